"""The guards in fleet/views/guards.py: a user without the role gets 403 before anyone learns
whether the object exists; a user with the role gets 404 for a missing object."""

import pytest
from django.core.exceptions import PermissionDenied
from django.http import Http404
from django.test import RequestFactory
from django.urls import reverse

from fleet.models import CalendarFeed
from fleet.services.certificates import certificate_issue
from fleet.views.guards import (
    get_calendar_feed_for_token,
    get_certificate_for_user,
    get_release_test_for_user,
)
from tests.documents.conftest import AT, CLOSED_AT, bench_visit, release_test

pytestmark = pytest.mark.django_db

MISSING_PK = 999_999


@pytest.fixture
def release(unit, technician, supervisor):
    record = bench_visit(unit, technician, release_test(), close_at=CLOSED_AT, closer=supervisor)
    return record.release_tests.get()


@pytest.fixture
def certificate(release, supervisor):
    return certificate_issue(release_test=release, by=supervisor, at=AT)


def _request_as(request, persona):
    http_request = RequestFactory().get("/")
    http_request.user = request.getfixturevalue(persona)
    return http_request


def _outcome(call):
    try:
        return call()
    except PermissionDenied:
        return 403
    except Http404:
        return 404


@pytest.mark.parametrize(
    ("persona", "existing", "missing"),
    [
        ("supervisor", "found", 404),
        ("technician", 403, 403),
        ("viewer", 403, 403),
        ("outsider", 403, 403),
    ],
)
def test_it_gives_the_release_test_only_to_supervisors(
    request, release, persona, existing, missing
):
    http_request = _request_as(request, persona)
    found = _outcome(lambda: get_release_test_for_user(http_request, release.pk))
    assert (found if found in (403, 404) else "found") == existing
    if existing == "found":
        assert found == release
        assert found.record.unit.serial == release.record.unit.serial
    assert _outcome(lambda: get_release_test_for_user(http_request, MISSING_PK)) == missing


@pytest.mark.parametrize(
    ("persona", "existing", "missing"),
    [
        ("supervisor", "found", 404),
        ("technician", "found", 404),
        ("viewer", "found", 404),
        ("outsider", 403, 403),
    ],
)
def test_it_gives_a_certificate_to_every_reader(request, certificate, persona, existing, missing):
    http_request = _request_as(request, persona)
    found = _outcome(lambda: get_certificate_for_user(http_request, certificate.number))
    assert (found if found in (403, 404) else "found") == existing
    if existing == "found":
        assert found == certificate
    assert _outcome(lambda: get_certificate_for_user(http_request, "RC-1999-0001")) == missing


@pytest.mark.parametrize(
    ("persona", "existing", "missing"),
    [
        ("supervisor", "found", 404),
        ("technician", 403, 403),
        ("viewer", 403, 403),
        ("outsider", 403, 403),
    ],
)
def test_it_gives_a_certificate_to_change_only_to_supervisors(
    request, certificate, persona, existing, missing
):
    http_request = _request_as(request, persona)
    found = _outcome(
        lambda: get_certificate_for_user(http_request, certificate.number, supervise=True)
    )
    assert (found if found in (403, 404) else "found") == existing
    missing_outcome = _outcome(
        lambda: get_certificate_for_user(http_request, "RC-1999-0001", supervise=True)
    )
    assert missing_outcome == missing


@pytest.mark.parametrize(
    ("persona", "issue", "withdraw", "pdf"),
    [
        ("as_supervisor", 404, 404, 404),
        ("as_technician", 403, 403, 404),
        ("as_viewer", 403, 403, 404),
        ("as_outsider", 403, 403, 403),
    ],
)
def test_the_certificate_pages_answer_a_missing_object_by_role(
    request, persona, issue, withdraw, pdf
):
    client = request.getfixturevalue(persona)
    assert client.post(reverse("certificate-issue", args=[MISSING_PK])).status_code == issue
    withdraw_url = reverse("certificate-withdraw", args=["RC-1999-0001"])
    assert client.post(withdraw_url, {"reason": "x"}).status_code == withdraw
    assert client.get(reverse("certificate-pdf", args=["RC-1999-0001"])).status_code == pdf


@pytest.mark.parametrize("persona", ["technician", "supervisor", "viewer"])
def test_it_gives_a_feed_to_a_reader_by_its_token(request, persona):
    feed = CalendarFeed.objects.create(user=request.getfixturevalue(persona))
    assert get_calendar_feed_for_token(feed.token) == feed


def test_it_refuses_an_unknown_feed_token(viewer):
    CalendarFeed.objects.create(user=viewer)
    with pytest.raises(Http404):
        get_calendar_feed_for_token("made-up-token")


def test_it_refuses_the_feed_of_a_user_with_no_role(outsider):
    feed = CalendarFeed.objects.create(user=outsider)
    with pytest.raises(Http404):
        get_calendar_feed_for_token(feed.token)


def test_it_refuses_the_feed_of_a_user_who_has_left(viewer):
    feed = CalendarFeed.objects.create(user=viewer)
    viewer.is_active = False
    viewer.save(update_fields=["is_active"])
    with pytest.raises(Http404):
        get_calendar_feed_for_token(feed.token)
