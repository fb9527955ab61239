"""``manage.py seed_demo`` on a server: it refuses without DEBUG unless forced, and never
changes an existing user's password.

Kept apart from test_seed_demo.py, whose module-wide loaded fleet (and its users) would be
in the database here.
"""

from io import StringIO

import pytest
from django.contrib.auth import authenticate, get_user_model
from django.core.management import CommandError, call_command
from django.test import RequestFactory

from fleet import demo

pytestmark = pytest.mark.django_db


def _seed_without_fleet(monkeypatch: pytest.MonkeyPatch, *args: str) -> str:
    """Run the command's "already loaded" path: the logins only, without writing the fleet."""
    monkeypatch.setattr(demo, "demo_loaded", lambda: True)
    out = StringIO()
    call_command("seed_demo", *args, stdout=out)
    return out.getvalue()


def test_it_refuses_to_run_with_debug_off(settings, monkeypatch) -> None:
    settings.DEBUG = False
    with pytest.raises(CommandError, match="--force"):
        _seed_without_fleet(monkeypatch)
    assert not get_user_model().objects.filter(username__in=demo.DEMO_USERNAMES).exists()


def test_force_runs_it_with_debug_off(settings, monkeypatch) -> None:
    settings.DEBUG = False
    output = _seed_without_fleet(monkeypatch, "--force")
    assert "password holdfast-demo" in output
    request = RequestFactory().post("/accounts/login/")
    assert authenticate(request, username="viewer", password="holdfast-demo") is not None


def test_it_leaves_a_changed_password_alone_and_says_so(settings, monkeypatch) -> None:
    settings.DEBUG = True
    users = get_user_model().objects
    users.create_user(username="supervisor", password="a-password-of-its-own")
    extra = users.create_user(username=demo.EXTRA_TECHNICIANS[0], password="another-of-its-own")
    output = _seed_without_fleet(monkeypatch)
    supervisor = users.get(username="supervisor")
    assert supervisor.check_password("a-password-of-its-own")
    assert not supervisor.check_password("holdfast-demo")
    assert "supervisor already existed with a password of its own: left as it is" in output
    assert "the demo password will not work" in output
    extra.refresh_from_db()
    assert extra.check_password("another-of-its-own")
    assert f"{extra.username} already existed with a password of its own" in output
    # The missing ones were created: sign-in users with the demo password, extras with none.
    assert users.get(username="technician").check_password("holdfast-demo")
    assert not users.get(username=demo.EXTRA_TECHNICIANS[1]).has_usable_password()
    assert "technician already existed" not in output


def test_an_existing_user_with_the_demo_password_goes_unmentioned(settings, monkeypatch) -> None:
    settings.DEBUG = True
    get_user_model().objects.create_user(username="viewer", password="holdfast-demo")
    output = _seed_without_fleet(monkeypatch)
    assert "already existed" not in output
