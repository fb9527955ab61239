"""The role matrix: who may read and write each page."""

import pytest
from django.urls import reverse

from fleet.models import AnodeReading
from tests.builders import make_record

pytestmark = pytest.mark.django_db


def test_it_sends_anonymous_visitors_to_the_login_page(client, unit):
    for url in ("/", "/units/", f"/units/{unit.serial}/", "/deployments/", "/sites/"):
        response = client.get(url)
        assert response.status_code == 302
        assert response["Location"].startswith("/accounts/login/?next=")


def test_it_shows_the_login_page_without_login(client):
    response = client.get("/accounts/login/")
    assert response.status_code == 200
    assert b"Sign in" in response.content


READ_PAGES = ["/", "/units/", "/deployments/", "/sites/"]


@pytest.mark.parametrize("persona", ["as_technician", "as_supervisor", "as_viewer"])
def test_every_role_reads_the_fleet(request, persona, unit, site):
    client = request.getfixturevalue(persona)
    for url in [*READ_PAGES, f"/units/{unit.serial}/", f"/sites/{site.pk}/"]:
        assert client.get(url).status_code == 200, url


def test_it_refuses_a_user_with_no_role(as_outsider, unit, site):
    for url in [*READ_PAGES, f"/units/{unit.serial}/", f"/sites/{site.pk}/"]:
        assert as_outsider.get(url).status_code == 403, url


@pytest.mark.parametrize(
    ("persona", "expected"),
    [("as_technician", 200), ("as_supervisor", 200), ("as_viewer", 403), ("as_outsider", 403)],
)
def test_only_technicians_and_supervisors_open_a_new_record(request, persona, expected, unit):
    client = request.getfixturevalue(persona)
    assert client.get(reverse("record-new", args=[unit.serial])).status_code == expected
    assert client.get(reverse("deployment-new")).status_code == expected


@pytest.mark.parametrize(
    ("persona", "expected"),
    [("as_technician", 403), ("as_supervisor", 302), ("as_viewer", 403), ("as_outsider", 403)],
)
def test_only_supervisors_close_records(request, persona, expected, unit, technician):
    record = make_record(unit=unit, by=technician)
    AnodeReading.objects.create(
        record=record, position=unit.variant.anode_positions.first(), mass_g=390
    )
    client = request.getfixturevalue(persona)
    response = client.post(
        reverse("record-close", args=[record.pk]), {"confirm": "on", "version": record.version}
    )
    assert response.status_code == expected
    record.refresh_from_db()
    assert record.is_closed is (expected == 302)


@pytest.mark.parametrize(
    ("persona", "expected"),
    [("as_technician", 403), ("as_supervisor", 200), ("as_viewer", 403)],
)
def test_only_supervisors_manage_sites(request, persona, expected, site):
    client = request.getfixturevalue(persona)
    assert client.get(reverse("site-new")).status_code == expected
    assert client.get(reverse("site-edit", args=[site.pk])).status_code == expected


def test_the_admin_is_for_supervisors(as_supervisor, as_technician):
    assert as_supervisor.get("/admin/fleet/variant/").status_code == 200
    assert as_technician.get("/admin/fleet/variant/").status_code == 302  # to the admin login


def test_a_missing_unit_is_a_404_for_readers_and_403_for_outsiders(as_viewer, as_outsider):
    assert as_viewer.get("/units/NOPE-1/").status_code == 404
    assert as_outsider.get("/units/NOPE-1/").status_code == 403


def test_photos_are_served_only_to_readers(as_viewer, as_outsider, settings, tmp_path):
    settings.MEDIA_ROOT = tmp_path
    (tmp_path / "a.txt").write_text("x")
    assert as_viewer.get("/media/a.txt").status_code == 200
    assert as_outsider.get("/media/a.txt").status_code == 403
