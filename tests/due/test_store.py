"""Stored due items: written with every change, read fleet-wide in a few queries."""

import datetime as dt

import pytest
from django.core.management import call_command
from django.db import connection
from django.test.utils import CaptureQueriesContext
from django.urls import reverse
from django.utils import timezone

from fleet.due.engine import DueState, classify
from fleet.due.store import due_items_stored, due_queryset, due_summary, due_totals
from fleet.models import AnodeReading, DueRow, UnitHold
from tests.builders import make_unit, pressure_test
from tests.due.test_engine import t, visit

pytestmark = pytest.mark.django_db


def test_a_bench_visit_rewrites_the_units_due_rows(unit, technician):
    position = unit.variant.anode_positions.first()
    visit(unit, technician, t(2026, 2, 1), AnodeReading(position=position, mass_g=390))
    before = DueRow.objects.get(unit=unit, item="Pressure test")
    assert before.due_on is None
    visit(
        unit,
        technician,
        t(2026, 3, 1),
        pressure_test(dt.date(2026, 3, 1), end_pressure_dbar=1899),
    )
    after = DueRow.objects.get(unit=unit, item="Pressure test")
    assert after.due_on == dt.date(2027, 3, 1)
    assert after.key == "pressure_test"


def test_the_list_classifies_rows_against_the_day_it_is_read(unit, technician):
    position = unit.variant.anode_positions.first()
    visit(unit, technician, t(2026, 2, 1), AnodeReading(position=position, mass_g=150))
    DueRow.objects.filter(unit=unit, item="Anode: Anode 1").update(due_on=dt.date(2026, 6, 1))
    early = due_items_stored(on=dt.date(2026, 5, 20), soon_days=30)
    late = due_items_stored(on=dt.date(2026, 6, 2), soon_days=30)
    assert {i.item: i.state for i in early}["Anode: Anode 1"] == DueState.DUE_SOON
    assert {i.item: i.state for i in late}["Anode: Anode 1"] == DueState.OVERDUE
    totals = due_totals(on=dt.date(2026, 6, 2), soon_days=30)
    assert totals.overdue >= 1 and totals.units_overdue == 1


@pytest.mark.parametrize("offset", [-1, 0, 1, 29, 30, 31])
def test_the_sql_state_rank_agrees_with_classify(unit, technician, offset):
    visit(unit, technician, t(2026, 2, 1))
    on = dt.date(2026, 6, 1)
    DueRow.objects.filter(unit=unit).update(due_on=on + dt.timedelta(days=offset))
    row = due_queryset(on=on, soon_days=30, show="all").first()
    assert DueState.from_rank(row.state_rank) == classify(row.due_on, on, 30)


def test_retired_and_lost_units_drop_off_the_list(unit, technician):
    visit(unit, technician, t(2026, 2, 1))
    on = timezone.localdate()
    assert due_items_stored(on=on, soon_days=30)
    unit.hold, unit.hold_reason = UnitHold.RETIRED, "housing beyond repair"
    unit.save()
    assert due_items_stored(on=on, soon_days=30) == []


def test_reading_the_list_takes_two_queries_at_any_size(
    variant, workshop, technician, django_assert_num_queries
):
    for i in range(12):
        u = make_unit(serial=f"S-{i:03d}", acoustic_address=str(i), variant=variant, place=workshop)
        visit(u, technician, t(2026, 2, 1))
    on = dt.date(2026, 12, 1)
    # Expect 2 queries: the totals (one aggregate) and the rows with unit, variant and place.
    with django_assert_num_queries(2):
        due_totals(on=on, soon_days=30)
        result = due_items_stored(on=on, soon_days=30)
    assert len({i.serial for i in result}) == 12


def test_rebuild_state_recomputes_the_rows(unit, technician):
    visit(unit, technician, t(2026, 2, 1))
    DueRow.objects.filter(unit=unit).delete()
    call_command("rebuild_state")
    assert DueRow.objects.filter(unit=unit).count() > 0


def test_a_variant_change_in_the_admin_reaches_the_units_rows(as_supervisor, unit, technician):
    visit(
        unit,
        technician,
        t(2026, 3, 1),
        pressure_test(dt.date(2026, 3, 1), end_pressure_dbar=1899),
    )
    variant = unit.variant
    data = {
        "name": variant.name,
        "description": "",
        "depth_rating_m": "1500",
        "housing_alloy": "al6061",
        "release_fitted": "on",
        "has_temperature_sensor": "on",
        "has_pressure_sensor": "on",
        "allowed_chemistries": '["alkaline", "li_socl2"]',
        "cells_in_series": "21",
        "parallel_strings": "1",
        "listen_current_a": "0.0002",
        "release_charge_as": "0",
        "mass_in_air_kg": "45",
        "displaced_volume_m3": "0.06",
        "pressure_test_valid_months": "6",
    }
    for prefix, related in (
        ("anode_positions", variant.anode_positions),
        ("seal_positions", variant.seal_positions),
        ("reply_steps", variant.reply_steps),
    ):
        rows = list(related.all())
        data.update(
            {
                f"{prefix}-TOTAL_FORMS": str(len(rows)),
                f"{prefix}-INITIAL_FORMS": str(len(rows)),
                f"{prefix}-MIN_NUM_FORMS": "0",
                f"{prefix}-MAX_NUM_FORMS": "1000",
            }
        )
        for i, row in enumerate(rows):
            for field in row._meta.concrete_fields:
                if field.name == "variant":
                    data[f"{prefix}-{i}-variant"] = str(variant.pk)
                elif field.name == "id":
                    data[f"{prefix}-{i}-id"] = str(row.pk)
                else:
                    value = getattr(row, field.attname)
                    if isinstance(value, bool):
                        if value:
                            data[f"{prefix}-{i}-{field.name}"] = "on"
                    elif value is not None:
                        data[f"{prefix}-{i}-{field.name}"] = str(value)
    response = as_supervisor.post(f"/admin/fleet/variant/{variant.pk}/change/", data)
    assert response.status_code == 302, response.content.decode()[:2000]
    assert DueRow.objects.get(unit=unit, item="Pressure test").due_on == dt.date(2026, 9, 1)


def test_the_summary_counts_what_the_list_shows(variant, workshop, technician):
    for i in range(6):
        u = make_unit(serial=f"C-{i:03d}", acoustic_address=str(i), variant=variant, place=workshop)
        visit(u, technician, t(2026, 2, 1))
    DueRow.objects.filter(unit__serial="C-000").update(flags="wearing fast")
    on = dt.date(2026, 12, 1)
    for show in ("attention", "overdue", "all"):
        for kind in ("", "anode", "seal"):
            summary = due_summary(on=on, soon_days=30, show=show, kind=kind)
            listed = list(due_queryset(on=on, soon_days=30, show=show, kind=kind))
            assert summary.listed == len(listed)
            assert summary.listed_flagged == sum(1 for row in listed if row.flags)
            assert summary.totals == due_totals(on=on, soon_days=30)


def test_the_overview_pages_its_rows_without_a_count_query_of_its_own(
    as_viewer, variant, workshop, technician
):
    for i in range(3):
        u = make_unit(serial=f"P-{i:03d}", acoustic_address=str(i), variant=variant, place=workshop)
        visit(u, technician, t(2026, 2, 1))
    with CaptureQueriesContext(connection) as captured:
        page = as_viewer.get(reverse("dashboard"), {"show": "all", "per_page": 5, "page": 2})
    assert page.status_code == 200
    counted = [q["sql"] for q in captured.captured_queries if "COUNT(" in q["sql"]]
    # The one aggregate (totals and the rows listed) and the units by condition and by place.
    assert len(counted) == 3
    # The pager knows the total: a link to the last page and none past it.
    last = -(-DueRow.objects.count() // 5)
    body = page.content.decode()
    assert f"per_page=5&amp;page={last}" in body
    assert f"per_page=5&amp;page={last + 1}" not in body


def test_the_overview_says_when_no_item_matches(as_viewer, unit):
    DueRow.objects.filter(unit=unit).update(due_on=dt.date(2099, 1, 1), flags="")
    body = as_viewer.get(reverse("dashboard")).content.decode()
    assert "No maintenance item matches these filters." in body
