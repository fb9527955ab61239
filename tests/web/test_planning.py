import datetime as dt
import gc

import pytest
from django.db import connection
from django.test.utils import CaptureQueriesContext
from django.urls import reverse
from django.utils import timezone
from icalendar import Calendar

from fleet.due.readiness import Readiness
from fleet.models import AnodeReading, CalendarFeed
from tests.builders import make_unit
from tests.due.test_engine import t, visit

pytestmark = pytest.mark.django_db


def test_the_readiness_page_shows_every_check(as_viewer, unit, site):
    start = (timezone.localdate() + dt.timedelta(days=5)).isoformat()
    response = as_viewer.get(
        reverse("unit-readiness", args=[unit.serial]), {"site": site.pk, "start": start, "days": 30}
    )
    assert response.status_code == 200
    body = response.content.decode()
    for name in (
        "Depth rating",
        "Pressure test",
        "Battery",
        "Recovery buoyancy",
        "Acoustic address",
    ):
        assert name in body
    assert "no pressure test recorded" in body


def test_the_readiness_form_rejects_a_past_start(as_viewer, unit, site):
    response = as_viewer.get(
        reverse("unit-readiness", args=[unit.serial]),
        {"site": site.pk, "start": "2020-01-01", "days": "x"},
    )
    assert response.status_code == 400
    body = response.content.decode()
    assert "The start must be today" in body
    assert "Enter a whole number." in body


def test_the_planner_lists_ready_and_rejected_units(as_viewer, unit, site):
    start = (timezone.localdate() + dt.timedelta(days=5)).isoformat()
    response = as_viewer.get(
        reverse("plan"), {"site": site.pk, "start": start, "days": 30, "wanted": 2}
    )
    assert response.status_code == 200
    body = response.content.decode()
    assert "Cannot go (1)" in body
    assert unit.serial in body
    assert "Short by 2" in body


def test_the_planner_leaves_its_rows_to_reference_counting(as_viewer, unit, variant, site):
    # Django keeps a rendered context in a reference cycle; the page drops the plan's rows
    # once drawn, so no unit's readiness waits for the cyclic collector.
    for n in range(3):
        make_unit(variant=variant, place=unit.place, serial=f"TX-GC{n}")
    start = (timezone.localdate() + dt.timedelta(days=5)).isoformat()
    query = {"site": site.pk, "start": start, "days": 30, "wanted": 2}
    gc.collect()
    gc.disable()
    try:
        response = as_viewer.get(reverse("plan"), query)
        assert response.status_code == 200
        assert "TX-GC2" in response.content.decode()
        del response
        gc.set_debug(gc.DEBUG_SAVEALL)
        gc.collect()
        left = [o for o in gc.garbage if type(o) is Readiness]  # type(): no lazy object run
    finally:
        gc.set_debug(0)
        gc.garbage.clear()
        gc.enable()
    assert left == []


def test_the_planner_is_for_people_with_a_role(as_outsider):
    assert as_outsider.get(reverse("plan")).status_code == 403


def test_the_charts_are_svg_images(as_viewer, unit, technician):
    position = unit.variant.anode_positions.first()
    visit(unit, technician, t(2026, 1, 5), AnodeReading(position=position, mass_g=300))
    response = as_viewer.get(reverse("unit-anode-chart", args=[unit.serial, position.pk]))
    assert response["Content-Type"].startswith("image/svg+xml")
    assert b"<svg" in response.content and b"replace at 50 %" in response.content
    assert b"<script" not in response.content
    response = as_viewer.get(reverse("unit-battery-chart", args=[unit.serial]))
    assert response.status_code == 200
    assert as_viewer.get(reverse("unit-anode-chart", args=[unit.serial, 99999])).status_code == 404


def test_the_unit_page_lists_its_due_items(as_viewer, unit):
    body = as_viewer.get(reverse("unit-detail", args=[unit.serial])).content.decode()
    assert "Maintenance due" in body
    assert "no reading recorded" in body


def test_the_overview_lists_overdue_items_and_exports_them(as_viewer, unit, technician):
    position = unit.variant.anode_positions.first()
    visit(
        unit,
        technician,
        t(2026, 1, 5),
        AnodeReading(position=position, mass_g=150, bond_resistance_ohm=0.5),
    )
    body = as_viewer.get("/").content.decode()
    assert "Anode: Anode 1" in body
    assert "at or below the replace-at mass when read on 2026-01-05" in body
    csv_body = as_viewer.get("/", {"export": "csv"}).content.decode("utf-8-sig")
    assert "Anode: Anode 1" in csv_body
    assert "Overdue" in csv_body


def test_the_overview_costs_the_same_queries_for_a_small_and_a_larger_fleet(
    as_viewer, variant, workshop, technician
):
    from django.db import connection
    from django.test.utils import CaptureQueriesContext

    from tests.builders import make_unit

    def build(start, n):
        for i in range(start, start + n):
            u = make_unit(
                serial=f"Q-{i:03d}", acoustic_address=str(i), variant=variant, place=workshop
            )
            visit(
                u,
                technician,
                t(2026, 1, 5),
                AnodeReading(position=variant.anode_positions.first(), mass_g=150),
            )

    def count():
        with CaptureQueriesContext(connection) as captured:
            assert as_viewer.get("/").status_code == 200
        return len(captured)

    build(0, 3)
    small = count()
    build(3, 30)
    # Session, user, groups; filter choices (places, variants, rendered twice); due totals;
    # the page of due rows and its count; units by status and by place; open records;
    # units in the water. None of them grows with the fleet.
    assert count() == small
    assert small <= 14


def test_the_calendar_feed_is_secret_and_revocable(as_viewer, viewer, client, unit, technician):
    position = unit.variant.anode_positions.first()
    visit(unit, technician, t(2026, 1, 5), AnodeReading(position=position, mass_g=150))
    as_viewer.post(reverse("feed-settings"), {"action": "create"})
    feed = CalendarFeed.objects.get(user=viewer)
    response = client.get(f"/feed/{feed.token}.ics")  # no login: calendar programs cannot
    assert response.status_code == 200
    calendar = Calendar.from_ical(response.content)
    summaries = [str(e["summary"]) for e in calendar.walk("VEVENT")]
    assert any(s.startswith(f"{unit.serial}: Anode: Anode 1") for s in summaries)
    assert client.get("/feed/made-up-token.ics").status_code == 404
    old = feed.token
    as_viewer.post(reverse("feed-settings"), {"action": "renew"})
    assert client.get(f"/feed/{old}.ics").status_code == 404
    as_viewer.post(reverse("feed-settings"), {"action": "revoke"})
    assert not CalendarFeed.objects.filter(user=viewer).exists()


def test_a_feed_stops_when_its_owner_loses_every_role(as_viewer, viewer, client):
    as_viewer.post(reverse("feed-settings"), {"action": "create"})
    token = CalendarFeed.objects.get(user=viewer).token
    viewer.groups.clear()
    assert client.get(f"/feed/{token}.ics").status_code == 404


def test_the_due_export_escapes_formulas_in_names_people_typed(as_viewer, unit, technician):
    unit.place.name = "=HYPERLINK(1)"
    unit.place.save()
    visit(unit, technician, t(2026, 1, 5))
    body = as_viewer.get("/", {"export": "csv", "show": "all"}).content.decode("utf-8-sig")
    assert "'=HYPERLINK(1)" in body
    header = body.splitlines()[0]
    assert header == "State,Unit,Variant,Place,Kind,Item,Due,Basis,Flags"


def test_the_anode_chart_reads_the_unit_once(as_viewer, unit, technician):
    """The unit, its variant and the state its duty reads come in the guard's query; then the
    position's state row with the position, its readings and the deployments; before them
    the session, the user and the user's groups, as on every page."""
    position = unit.variant.anode_positions.first()
    visit(unit, technician, t(2026, 1, 5), AnodeReading(position=position, mass_g=300))
    url = reverse("unit-anode-chart", args=[unit.serial, position.pk])
    as_viewer.get(url)
    with CaptureQueriesContext(connection) as captured:
        assert as_viewer.get(url).status_code == 200
    unit_reads = [q["sql"] for q in captured if 'FROM "fleet_transponder"' in q["sql"]]
    assert len(unit_reads) == 1, unit_reads
    # On PostgreSQL the page runs in a transaction with the planner set for one unit's rows
    # in the written join order (``reading_one_unit_in_written_order``): here a savepoint in
    # the test's transaction, so the settings are set and put back (two statements); in a
    # transaction of its own, its COMMIT puts them back (one).
    reads = [q["sql"] for q in captured if "set_config" not in q["sql"]]
    reads = [sql for sql in reads if not sql.startswith(("SAVEPOINT", "RELEASE SAVEPOINT"))]
    assert len(reads) == 7, [sql[:50] for sql in reads]
    settings = len(captured) - len(reads)
    assert settings == (4 if connection.vendor == "postgresql" else 0)
