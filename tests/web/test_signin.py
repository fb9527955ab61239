"""Sign-in throttling: django-axes locks a user name, or an address, after repeated failures."""

import datetime as dt

import pytest
from axes.models import AccessAttempt
from django.db.models import F
from django.test import Client, RequestFactory
from django.urls import reverse

from fleet.security import client_ip
from tests.builders import make_user

pytestmark = pytest.mark.django_db

PASSWORD = "pw-for-tests-only"  # tests/builders.make_user
LIMIT = 5  # AXES_FAILURE_LIMIT's default in fleet/settings.py


def sign_in(client: Client, username: str, password: str, address: str = "10.0.0.1"):
    return client.post(
        reverse("login"), {"username": username, "password": password}, REMOTE_ADDR=address
    )


def signed_in(client: Client) -> bool:
    return "_auth_user_id" in client.session


def fail(client: Client, username: str, times: int, address: str = "10.0.0.1") -> None:
    for _ in range(times):
        response = sign_in(client, username, "wrong-password", address)
        assert not signed_in(client)
        assert response.status_code in (200, 429)


def test_the_right_password_signs_in(client, technician):
    response = sign_in(client, "tech", PASSWORD)
    assert response.status_code == 302
    assert signed_in(client)


def test_a_few_failures_then_the_right_password_still_signs_in(client, technician):
    fail(client, "tech", LIMIT - 1)
    assert sign_in(client, "tech", PASSWORD).status_code == 302
    assert signed_in(client)


def test_thirty_failures_then_the_right_password_is_refused(client, technician):
    fail(client, "tech", 30)
    response = sign_in(client, "tech", PASSWORD)
    assert response.status_code == 429
    assert not signed_in(client)
    page = response.content.decode()
    assert "Too many failed sign-ins" in page
    assert "Try again in 15 minutes, or ask a supervisor" in page
    assert 'name="password"' in page  # the sign-in form is still there


def test_the_lock_is_reached_at_the_failure_limit(client, technician):
    fail(client, "tech", LIMIT - 1)
    assert sign_in(client, "tech", "wrong-password").status_code == 429


def test_a_user_name_is_locked_whichever_address_the_failures_came_from(client, technician):
    for n in range(LIMIT):
        fail(client, "tech", 1, address=f"10.0.1.{n}")
    assert sign_in(client, "tech", PASSWORD, address="10.0.2.1").status_code == 429
    assert not signed_in(client)


def test_an_address_is_locked_whichever_user_names_it_tried(client, technician):
    make_user("other")
    for n in range(LIMIT):
        fail(client, f"guess{n}", 1, address="10.0.3.3")
    assert sign_in(client, "tech", PASSWORD, address="10.0.3.3").status_code == 429
    assert not signed_in(client)
    # The same user from another address is not locked.
    assert sign_in(Client(), "other", PASSWORD, address="10.0.3.4").status_code == 302


def test_the_lock_holds_inside_the_cool_off_and_lifts_after_it(client, technician):
    fail(client, "tech", LIMIT)

    def age_attempts(minutes: int) -> None:
        AccessAttempt.objects.update(attempt_time=F("attempt_time") - dt.timedelta(minutes=minutes))

    age_attempts(14)  # 14 of the 15 minutes have passed
    assert sign_in(client, "tech", PASSWORD).status_code == 429
    age_attempts(16)  # the refused attempt restarted the cool-off: now 16 minutes after it
    assert sign_in(client, "tech", PASSWORD).status_code == 302
    assert signed_in(client)


def test_a_shorter_cool_off_set_in_the_settings_is_the_one_shown_and_kept(
    client, technician, settings
):
    settings.AXES_COOLOFF_TIME = dt.timedelta(minutes=1)
    fail(client, "tech", LIMIT)
    response = sign_in(client, "tech", PASSWORD)
    assert "Try again in 1 minute," in response.content.decode()
    AccessAttempt.objects.update(attempt_time=F("attempt_time") - dt.timedelta(seconds=61))
    assert sign_in(client, "tech", PASSWORD).status_code == 302


def test_a_right_password_clears_earlier_failures(client, technician):
    fail(client, "tech", LIMIT - 1)
    assert sign_in(client, "tech", PASSWORD).status_code == 302
    client.post(reverse("logout"))
    fail(client, "tech", LIMIT - 1)
    assert sign_in(client, "tech", PASSWORD).status_code == 302


def test_the_admin_has_no_sign_in_of_its_own(client, supervisor):
    # Its sign-in address sends everyone to ours (throttled above); a password posted there
    # signs no one in, so there is no second, unthrottled door.
    response = client.post(
        reverse("admin:login"), {"username": "super", "password": PASSWORD}, REMOTE_ADDR="10.0.4.4"
    )
    assert response.status_code == 302
    assert response["Location"].startswith(reverse("login"))
    assert not signed_in(client)


def test_a_supervisor_sees_and_clears_locks_in_the_admin(as_supervisor, client, technician):
    fail(client, "tech", LIMIT)
    changelist = reverse("admin:axes_accessattempt_changelist")
    assert as_supervisor.get(changelist).status_code == 200
    attempt = AccessAttempt.objects.get(username="tech")
    response = as_supervisor.post(
        reverse("admin:axes_accessattempt_delete", args=[attempt.pk]), {"post": "yes"}
    )
    assert response.status_code == 302
    assert sign_in(client, "tech", PASSWORD).status_code == 302


def test_a_technician_cannot_clear_locks(as_technician):
    changelist = reverse("admin:axes_accessattempt_changelist")
    assert as_technician.get(changelist).status_code == 302  # to the admin sign-in


@pytest.mark.parametrize(
    ("proxies", "forwarded", "expected"),
    [
        (0, "", "192.0.2.9"),  # no proxy: the connection's address
        (0, "203.0.113.5", "192.0.2.9"),  # no proxy trusted: the header is ignored
        (1, "203.0.113.5", "203.0.113.5"),  # one proxy appended the client's address
        (1, "198.51.100.1, 203.0.113.5", "203.0.113.5"),  # left entry is the client's own claim
        (2, "198.51.100.1, 203.0.113.5, 10.1.1.1", "203.0.113.5"),
        (2, "203.0.113.5", "192.0.2.9"),  # fewer hops than proxies: fall back
        (1, "not-an-address", "192.0.2.9"),
        (1, "2001:db8::1", "2001:db8::1"),
    ],
)
def test_the_client_address_trusts_only_the_configured_proxies(
    settings, proxies, forwarded, expected
):
    settings.TRUSTED_PROXY_COUNT = proxies
    request = RequestFactory().get("/", REMOTE_ADDR="192.0.2.9", HTTP_X_FORWARDED_FOR=forwarded)
    assert client_ip(request) == expected


def test_behind_a_proxy_one_clients_failures_do_not_lock_another(client, technician, settings):
    settings.TRUSTED_PROXY_COUNT = 1
    make_user("other")
    for n in range(LIMIT):
        client.post(
            reverse("login"),
            {"username": f"guess{n}", "password": "wrong"},
            REMOTE_ADDR="127.0.0.1",
            HTTP_X_FORWARDED_FOR="203.0.113.66",
        )
    other = Client()
    response = other.post(
        reverse("login"),
        {"username": "other", "password": PASSWORD},
        REMOTE_ADDR="127.0.0.1",
        HTTP_X_FORWARDED_FOR="203.0.113.77",
    )
    assert response.status_code == 302
