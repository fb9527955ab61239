"""Personas and common records. Builders are imported lazily so that the pure calc tests can
also run without Django (``pytest tests/calc -p no:django``)."""

import pytest


def _builders():
    from tests import builders

    return builders


@pytest.fixture
def technician(db):
    return _builders().make_user("tech", "technician")


@pytest.fixture
def supervisor(db):
    return _builders().make_user("super", "supervisor", is_staff=True)


@pytest.fixture
def viewer(db):
    return _builders().make_user("view", "viewer")


@pytest.fixture
def outsider(db):
    """Signed in, but in no role group."""
    return _builders().make_user("outsider")


def _client_for(user):
    from django.test import Client

    client = Client()
    client.force_login(user)
    return client


@pytest.fixture
def as_technician(technician):
    return _client_for(technician)


@pytest.fixture
def as_supervisor(supervisor):
    return _client_for(supervisor)


@pytest.fixture
def as_viewer(viewer):
    return _client_for(viewer)


@pytest.fixture
def as_outsider(outsider):
    return _client_for(outsider)


@pytest.fixture
def workshop(db):
    return _builders().make_place()


@pytest.fixture
def variant(db):
    return _builders().make_variant()


@pytest.fixture
def unit(db, variant, workshop):
    return _builders().make_unit(variant=variant, place=workshop)


@pytest.fixture
def site(db):
    return _builders().make_site()


@pytest.fixture(autouse=True)
def _fast_password_hashing(request):
    # Tests create many users; the production hasher is slow on purpose.
    if not request.config.pluginmanager.hasplugin("django"):
        return
    settings = request.getfixturevalue("settings")
    settings.PASSWORD_HASHERS = ["django.contrib.auth.hashers.MD5PasswordHasher"]


@pytest.fixture(autouse=True)
def _plain_static_names(request):
    # Production serves hashed names from collectstatic's manifest; the suite runs without it.
    if not request.config.pluginmanager.hasplugin("django"):
        return
    settings = request.getfixturevalue("settings")
    settings.STORAGES = {
        **settings.STORAGES,
        "staticfiles": {"BACKEND": "django.contrib.staticfiles.storage.StaticFilesStorage"},
    }


def _flush_through_the_purge_door() -> None:
    """The test database's flush (after each ``transaction=True`` test) deletes every row, closed
    records included. On SQLite the closed-record triggers refuse that unless the purge marker
    is set (``fleet.integrity``); PostgreSQL's flush is a TRUNCATE, which row triggers do not
    see."""
    from django.db.backends.sqlite3.base import DatabaseWrapper

    from fleet.integrity import MARKER_TABLE, PURGING

    operations = DatabaseWrapper.ops_class
    original = operations.execute_sql_flush
    if getattr(original, "_through_purge", False):
        return

    def execute_sql_flush(self, sql_list):
        if MARKER_TABLE not in self.connection.introspection.table_names():
            return original(self, sql_list)
        marker = f"INSERT INTO {MARKER_TABLE} (purpose) VALUES ('{PURGING}')"
        clear = f"DELETE FROM {MARKER_TABLE}"
        return original(self, [marker, *sql_list, clear])

    execute_sql_flush._through_purge = True
    operations.execute_sql_flush = execute_sql_flush


def pytest_configure(config):
    if config.pluginmanager.hasplugin("django"):
        _flush_through_the_purge_door()


@pytest.fixture(autouse=True)
def _no_kit_at_the_start():
    # Which kit the database is, is cached per process. A test database holds no Kit row when
    # a test starts (a test that saves one resets the cache through the Kit's signals), and a
    # test's rollback removes a Kit row without a signal: so every test starts and ends with
    # "no kit here", and query counts never include the one-time read.
    from fleet.models.kits import forget_kit_here, remember_kit_here

    forget_kit_here()
    remember_kit_here(None)
    yield
    forget_kit_here()
    remember_kit_here(None)
