"""Error pages, sign-in, the admin's door, help, the fleet timeline, the deployments list's
lost units and filter, the overview's empty flags column and the CSV exports' columns."""

import csv
import datetime as dt
import io
import re

import pytest
from django.contrib.auth.models import AnonymousUser
from django.db import connection
from django.test import RequestFactory
from django.test.utils import CaptureQueriesContext
from django.urls import reverse
from django.utils import timezone
from django.views.defaults import server_error

from fleet.models import DueRow, Transponder, UnitHold
from tests.builders import make_unit
from tests.due.test_engine import deploy

pytestmark = pytest.mark.django_db

ISO_TIMESTAMP = re.compile(r"\d{4}-\d\d-\d\dT\d\d:\d\d:\d\dZ")
FLAGS_HEADER = re.compile(r"<th[^>]*>\s*Flags\s*</th>")
BASIS_HEADER = re.compile(r"<th[^>]*>\s*Basis\s*</th>")


def nav(page: str) -> str:
    return page.split('<nav aria-label="Main">')[1].split("</nav>")[0]


# --- Error pages ------------------------------------------------------------------------


def test_a_403_says_why_and_keeps_the_navigation(as_viewer):
    response = as_viewer.get(reverse("deployment-new"))
    assert response.status_code == 403
    page = response.content.decode()
    assert "<title>Not allowed · Holdfast</title>" in page
    assert "You cannot open this page" in page
    assert "ask a supervisor" in page
    assert reverse("unit-list") in nav(page)
    assert reverse("dashboard") in page


def test_a_404_says_what_happened_and_keeps_the_navigation(as_technician):
    response = as_technician.get("/units/NO-SUCH-UNIT/")
    assert response.status_code == 404
    page = response.content.decode()
    assert "<title>Not found · Holdfast</title>" in page
    assert "There is nothing at this address" in page
    assert reverse("unit-list") in nav(page)


def test_a_500_renders_without_a_request_context():
    request = RequestFactory().get("/")
    request.user = AnonymousUser()
    response = server_error(request)
    assert response.status_code == 500
    page = response.content.decode()
    assert "<title>Something went wrong · Holdfast</title>" in page
    assert "Something went wrong on our side" in page
    assert f'href="{reverse("dashboard")}"' in page
    assert f'href="{reverse("help")}"' in page


# --- Sign-in and the admin ------------------------------------------------------------------


def test_the_sign_in_page_says_why_you_are_there(client):
    response = client.get(reverse("unit-list"), follow=True)
    page = response.content.decode()
    assert "Sign in to see that page." in page
    assert 'name="next" value="/units/"' in page
    assert 'class="field' in page  # styled like every other form


def test_the_sign_in_page_says_nothing_when_you_came_to_it(client):
    page = client.get(reverse("login")).content.decode()
    assert "Sign in to see that page." not in page
    assert "Sign in" in page


def test_the_admin_sends_a_signed_out_visitor_to_our_sign_in_with_a_message(client):
    response = client.get("/admin/fleet/variant/", follow=True)
    assert response.redirect_chain[-1][0].startswith(reverse("login"))
    page = response.content.decode()
    assert "Sign in as a supervisor to manage reference data." in page
    assert "Django administration" not in page


@pytest.mark.parametrize("persona", ["as_technician", "as_viewer"])
def test_a_non_staff_user_reaching_the_admin_gets_our_403(request, persona):
    client = request.getfixturevalue(persona)
    response = client.get("/admin/", follow=True)
    assert response.status_code == 403
    page = response.content.decode()
    assert "kept by supervisors with staff access" in page
    assert "Django" not in page
    assert reverse("unit-list") in nav(page)


def test_the_admin_is_branded_holdfast(as_supervisor):
    page = as_supervisor.get("/admin/").content.decode()
    assert "Holdfast reference data" in page
    assert "Variants, units, places and sites" in page
    assert "Django administration" not in page


def test_the_admin_sign_in_sends_staff_on_to_the_admin(as_supervisor):
    response = as_supervisor.get(reverse("admin:login") + "?next=/admin/fleet/variant/")
    assert response.status_code == 302
    assert response["Location"] == "/admin/fleet/variant/"


def test_the_admin_sign_in_ignores_an_outside_next(as_supervisor):
    response = as_supervisor.get(reverse("admin:login") + "?next=https://example.invalid/")
    assert response["Location"] == reverse("admin:index")


# --- Help -------------------------------------------------------------------------------


def test_help_explains_our_words_with_the_defaults_in_force(as_viewer, settings):
    page = as_viewer.get(reverse("help")).content.decode()
    for anchor in ("margin", "reserve", "immersed-days", "proof-factor", "conditions", "due-dates"):
        assert f'id="{anchor}"' in page
    assert f"{settings.HOLDFAST['PROOF_FACTOR']} by default" in page
    assert f"Valid {settings.HOLDFAST['RELEASE_TEST_VALID_DAYS']} days" in page
    assert "DNV-RP-B401" in page
    assert "ISO 2230" in page
    assert "Lost" in page and "In the water" in page


def test_help_follows_the_settings(as_viewer, settings):
    settings.HOLDFAST = {**settings.HOLDFAST, "RELEASE_TEST_VALID_DAYS": 90}
    page = as_viewer.get(reverse("help")).content.decode()
    assert "Valid 90 days" in page


def test_help_is_for_signed_in_roles(client, as_outsider):
    assert client.get(reverse("help")).status_code == 302
    assert as_outsider.get(reverse("help")).status_code == 403


@pytest.mark.parametrize("name", ["dashboard", "plan", "timeline"])
def test_pages_using_our_words_link_to_help(as_viewer, name):
    page = as_viewer.get(reverse(name)).content.decode()
    assert 'class="help-link"' in page
    assert reverse("help") + "#" in page


# --- Fleet timeline -------------------------------------------------------------------------


def _fleet(n: int, variant, place, site, by) -> None:
    start = timezone.make_aware(dt.datetime(2026, 6, 1, 8))
    for i in range(n):
        unit = make_unit(
            serial=f"TL-{i:03d}", acoustic_address=f"C1-{i:02d}", variant=variant, place=place
        )
        deploy(unit, site, by, start, start + dt.timedelta(days=30))


def _timeline_queries(client) -> int:
    with CaptureQueriesContext(connection) as queries:
        assert client.get(reverse("timeline")).status_code == 200
    return len(queries)


def test_the_timeline_costs_the_same_queries_for_two_units_or_twelve(
    as_viewer, variant, workshop, site, technician
):
    _fleet(2, variant, workshop, site, technician)
    few = _timeline_queries(as_viewer)
    _fleet_more = [f"TL-{i:03d}" for i in range(2, 12)]
    start = timezone.make_aware(dt.datetime(2026, 7, 1, 8))
    for serial in _fleet_more:
        unit = make_unit(serial=serial, acoustic_address="C2-01", variant=variant, place=workshop)
        deploy(unit, site, technician, start, start + dt.timedelta(days=20))
    many = _timeline_queries(as_viewer)
    # Expect: session, user, groups, variant and place choices, count, units page,
    # deployments, bench visits, due rows.
    assert few == many
    assert many <= 11


def test_the_timeline_draws_each_unit_with_its_deployments_and_due_dates(
    as_viewer, variant, workshop, site, technician
):
    _fleet(2, variant, workshop, site, technician)
    page = as_viewer.get(reverse("timeline")).content.decode()
    assert '<div class="timeline scroll-x"><svg' in page
    assert f'href="{reverse("unit-detail", args=["TL-000"])}"' in page
    assert "Test site A: 2026-06-01 to 2026-07-01" in page
    due_on = DueRow.objects.filter(due_on__isnull=False).values_list("due_on", flat=True).first()
    if due_on is not None and abs((due_on - timezone.localdate()).days) < 365:
        assert f"due {due_on.isoformat()}" in page
    assert "<script" not in page and "style=" not in page


def test_the_timeline_filters_by_variant_and_place(as_viewer, variant, workshop, site, technician):
    from tests.builders import make_place, make_variant

    _fleet(1, variant, workshop, site, technician)
    other_variant = make_variant(name="Other variant")
    store = make_place(name="Store room")
    make_unit(serial="OT-001", acoustic_address="C2-02", variant=other_variant, place=store)
    page = as_viewer.get(reverse("timeline"), {"variant": other_variant.pk}).content.decode()
    assert ">OT-001<" in page and ">TL-000<" not in page
    page = as_viewer.get(reverse("timeline"), {"place": workshop.pk}).content.decode()
    assert ">TL-000<" in page and ">OT-001<" not in page


# --- Deployments: a lost unit, the active filter, the export --------------------------------


@pytest.fixture
def lost_at_sea(unit, site, technician):
    deployment = deploy(unit, site, technician, timezone.make_aware(dt.datetime(2026, 5, 1, 8)))
    Transponder.objects.filter(pk=unit.pk).update(hold=UnitHold.LOST, hold_reason="No reply.")
    return deployment


def test_a_lost_unit_is_not_listed_in_the_water_and_has_no_recover_button(
    as_technician, lost_at_sea
):
    page = as_technician.get(reverse("deployment-list")).content.decode()
    assert reverse("deployment-recover", args=[lost_at_sea.pk]) not in page
    assert "in the water</td>" not in page
    row = page.split(">TX-0001<")[1].split("</tr>")[0]
    assert ">lost<" in row
    only_open = as_technician.get(reverse("deployment-list"), {"open": "1"}).content.decode()
    assert ">TX-0001<" not in only_open


def test_the_overview_does_not_list_a_lost_unit_in_the_water(as_viewer, lost_at_sea):
    page = as_viewer.get(reverse("dashboard")).content.decode()
    assert "No unit is deployed." in page


def test_a_lost_unit_cannot_be_recovered(as_technician, lost_at_sea):
    url = reverse("deployment-recover", args=[lost_at_sea.pk])
    response = as_technician.post(url, {"recovered_at": "2026-06-01T10:00"})
    assert response.status_code == 400
    assert "held as lost" in response.content.decode()
    lost_at_sea.refresh_from_db()
    assert lost_at_sea.recovered_at is None


def test_the_deployments_filter_shows_which_option_is_active(as_viewer):
    page = as_viewer.get(reverse("deployment-list")).content.decode()
    assert '<span class="current" aria-current="page">All</span>' in page
    page = as_viewer.get(reverse("deployment-list"), {"open": "1"}).content.decode()
    assert '<span class="current" aria-current="page">In the water only</span>' in page


def _csv(response) -> list[dict[str, str]]:
    text = response.content.decode("utf-8-sig")
    return list(csv.DictReader(io.StringIO(text)))


def test_the_deployments_export_keeps_one_type_per_column(as_viewer, unit, site, technician):
    start = timezone.make_aware(dt.datetime(2026, 5, 1, 8, 30))
    deploy(unit, site, technician, start, start + dt.timedelta(days=10), replies=1200)
    other = make_unit(serial="TX-0002", acoustic_address="C1-02", variant=unit.variant)
    deploy(other, site, technician, start)
    rows = _csv(as_viewer.get(reverse("deployment-list"), {"export": "csv"}))
    by_unit = {r["Unit"]: r for r in rows}
    assert by_unit["TX-0001"]["Over the side"] == "2026-05-01T08:30:00Z"
    assert by_unit["TX-0001"]["Recovered"] == "2026-05-11T08:30:00Z"
    assert by_unit["TX-0001"]["Status"] == "recovered"
    assert by_unit["TX-0002"]["Recovered"] == ""  # not a word in a timestamp column
    assert by_unit["TX-0002"]["Status"] == "in the water"
    assert by_unit["TX-0002"]["Replies counted"] == ""
    for row in rows:
        assert ISO_TIMESTAMP.fullmatch(row["Over the side"])


def test_the_units_export_has_iso_dates_and_empty_cells(as_viewer, unit, technician, site):
    from tests.builders import serviced_unit

    serviced_unit(unit, by=technician, site=site, day=dt.date(2026, 3, 2))
    make_unit(serial="TX-0002", acoustic_address="C1-02", variant=unit.variant, place=None)
    rows = _csv(as_viewer.get(reverse("unit-list"), {"export": "csv"}))
    by_unit = {r["Serial"]: r for r in rows}
    assert ISO_TIMESTAMP.fullmatch(by_unit["TX-0001"]["Last bench visit"])
    assert by_unit["TX-0002"]["Last bench visit"] == ""
    assert by_unit["TX-0002"]["Place"] == ""


# --- The overview's flags column and the planner's margin ----------------------------------


def test_the_overview_drops_the_flags_column_when_no_row_has_a_flag(as_viewer, unit):
    DueRow.objects.filter(unit=unit).update(flags="")
    page = as_viewer.get(reverse("dashboard"), {"show": "all"}).content.decode()
    assert not FLAGS_HEADER.search(page)
    assert BASIS_HEADER.search(page)  # the table is there, without the empty column


def test_the_overview_keeps_the_flags_column_when_a_row_has_one(as_viewer, unit):
    DueRow.objects.filter(unit=unit).update(flags="")
    row = DueRow.objects.filter(unit=unit).first()
    assert row is not None
    DueRow.objects.filter(pk=row.pk).update(flags="wearing fast")
    page = as_viewer.get(reverse("dashboard"), {"show": "all"}).content.decode()
    assert FLAGS_HEADER.search(page)
    assert "wearing fast" in page


def test_a_lost_units_page_does_not_say_it_is_in_the_water(as_technician, lost_at_sea):
    page = as_technician.get(reverse("unit-detail", args=["TX-0001"])).content.decode()
    assert "still in the water" not in page
    assert "not recovered: the unit is held as lost" in page
    assert "last deployed at Test site A on" in page
    assert reverse("deployment-recover", args=[lost_at_sea.pk]) not in page


def test_the_unit_filter_labels_its_condition_field(as_viewer):
    page = as_viewer.get(reverse("unit-list")).content.decode()
    assert "[invalid name]" not in page
    assert '<label for="id_condition">Condition</label>' in page


def test_the_timeline_escapes_what_it_draws():
    from fleet.charts import timeline_svg
    from fleet.selectors import TimelineRow, TimelineSpan

    on = dt.date(2026, 12, 2)
    row = TimelineRow(
        serial='TX-<1>"',
        variant="v",
        deployments=(TimelineSpan(dt.date(2026, 1, 1), None, "Site <b>&amp;", lost=True),),
        visits=(),
        due=((dt.date(2027, 1, 1), 'Seal "A" <x>'),),
    )
    svg = timeline_svg(
        [row],
        start=on - dt.timedelta(days=730),
        end=on + dt.timedelta(days=365),
        today=on,
        unit_url=lambda serial: f"/units/{serial}/",
    )
    assert "<b>" not in svg and "<x>" not in svg and "<1>" not in svg
    assert "Site &lt;b&gt;&amp;amp;: 2026-01-01 to lost" in svg
    assert 'href="/units/TX-&lt;1&gt;&quot;/"' in svg
    assert 'Seal "A" &lt;x&gt;: due 2027-01-01' in svg
