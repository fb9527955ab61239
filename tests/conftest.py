import pytest
from django.test import Client

from tests.builders import make_place, make_site, make_unit, make_user, make_variant


@pytest.fixture
def technician(db):
    return make_user("tech", "technician")


@pytest.fixture
def supervisor(db):
    return make_user("super", "supervisor", is_staff=True)


@pytest.fixture
def viewer(db):
    return make_user("view", "viewer")


@pytest.fixture
def outsider(db):
    """Signed in, but in no role group."""
    return make_user("outsider")


def _client_for(user) -> Client:
    client = Client()
    client.force_login(user)
    return client


@pytest.fixture
def as_technician(technician) -> Client:
    return _client_for(technician)


@pytest.fixture
def as_supervisor(supervisor) -> Client:
    return _client_for(supervisor)


@pytest.fixture
def as_viewer(viewer) -> Client:
    return _client_for(viewer)


@pytest.fixture
def as_outsider(outsider) -> Client:
    return _client_for(outsider)


@pytest.fixture
def workshop(db):
    return make_place()


@pytest.fixture
def variant(db):
    return make_variant()


@pytest.fixture
def unit(db, variant, workshop):
    return make_unit(variant=variant, place=workshop)


@pytest.fixture
def site(db):
    return make_site()


@pytest.fixture(autouse=True)
def _fast_password_hashing(settings):
    # Tests create many users; the production hasher is slow on purpose.
    settings.PASSWORD_HASHERS = ["django.contrib.auth.hashers.MD5PasswordHasher"]
