"""The read-only selectors in fleet/selectors.py: what each returns on a hand-built history,
and how many queries it makes (the count does not grow with the records)."""

import datetime as dt
import random

import pytest
from django.utils import timezone

from fleet.due.condition import Condition
from fleet.due.rules import rules_for
from fleet.models import (
    AnodeReading,
    BatteryInstall,
    Deployment,
    SealChange,
    ServiceRecord,
    Site,
    Transponder,
)
from fleet.selectors import (
    entry_names,
    fleet_counts,
    last_anode_readings,
    last_seal_changes,
    open_records,
    record_amendments,
    record_sections,
    unit_deployments,
    unit_history,
    unit_history_page,
    unit_page,
    unit_records,
    units_in_water,
)
from fleet.services.deployments import deployment_recover
from fleet.services.records import amendment_create
from tests.builders import make_unit
from tests.due.test_engine import deploy, t, visit

pytestmark = pytest.mark.django_db


def seal_change(position):
    return SealChange(
        position=position,
        material="NBR",
        cure_date=dt.date(2025, 10, 1),
        lot="L-1",
        reason="interval",
    )


def pack():
    return BatteryInstall(
        pack_serial="PK-1",
        chemistry="alkaline",
        nominal_voltage_v=31.5,
        capacity_ah=17.0,
        made_on=dt.date(2025, 12, 1),
        installed_on=dt.date(2026, 1, 5),
        ocv_install_v=33.1,
    )


def loaded(unit):
    """The unit as the page's guard loads it: with its variant and place."""
    return Transponder.objects.select_related("variant", "place").get(pk=unit.pk)


@pytest.fixture
def story(unit, site, technician):
    """Visit, deployment (recovered), visit, deployment (still in the water)."""
    anode1, anode2 = unit.variant.anode_positions.order_by("name")
    seal1, seal2 = unit.variant.seal_positions.order_by("name")
    first = visit(
        unit,
        technician,
        t(2026, 1, 5, 9),
        AnodeReading(position=anode1, mass_g=390.0),
        AnodeReading(position=anode2, mass_g=395.0),
        seal_change(seal1),
        pack(),
    )
    out = deploy(unit, site, technician, t(2026, 2, 1), t(2026, 5, 1))
    second = visit(unit, technician, t(2026, 5, 5, 9), AnodeReading(position=anode1, mass_g=380.0))
    still_out = deploy(unit, site, technician, t(2026, 6, 1))
    unit.refresh_from_db()
    return {
        "anodes": (anode1, anode2),
        "seals": (seal1, seal2),
        "records": (first, second),
        "deployments": (out, still_out),
    }


def test_it_gives_the_last_reading_at_each_anode_position(unit, story, django_assert_num_queries):
    anode1, anode2 = story["anodes"]
    # Expect 1 query: the unit's anode readings with record and position, newest first.
    with django_assert_num_queries(1):
        latest = last_anode_readings(unit=unit)
    assert {pk: r.mass_g for pk, r in latest.items()} == {anode1.pk: 380.0, anode2.pk: 395.0}


def test_it_gives_the_last_seal_change_at_each_position(unit, story, django_assert_num_queries):
    seal1, _ = story["seals"]
    # Expect 1 query: the unit's seal changes with record and position, newest first.
    with django_assert_num_queries(1):
        latest = last_seal_changes(unit=unit)
    assert list(latest) == [seal1.pk]
    assert latest[seal1.pk].record == story["records"][0]


@pytest.mark.parametrize("seed", [1, 2, 3])
def test_the_last_seal_change_is_the_newest_by_visit_whatever_the_order_written(
    unit, technician, seed, django_assert_num_queries
):
    # The page looks the change up in the visit the unit's seal state names; a plain
    # recomputation from the records (the newest by visit opening, then by entry) agrees
    # after visits written out of order and several changes at a position in one visit.
    rng = random.Random(seed)
    seals = list(unit.variant.seal_positions.order_by("name"))
    days = rng.sample(range(1, 300), 8)  # written in this (random) order
    for day in days:
        chosen = [p for p in seals if rng.random() < 0.6] or [seals[0]]
        changes = [seal_change(p) for p in chosen]
        if rng.random() < 0.3:
            changes.append(seal_change(chosen[0]))  # the same position twice in one visit
        visit(unit, technician, t(2025, 1, 1) + dt.timedelta(days=day), *changes)
    expected = {}
    for change in SealChange.objects.filter(record__unit=unit).order_by("record__opened_at", "pk"):
        expected[change.position_id] = change.pk
    with django_assert_num_queries(1):
        latest = last_seal_changes(unit=unit)
    assert {pk: change.pk for pk, change in latest.items()} == expected


def test_it_loads_records_with_every_entry_in_a_fixed_number_of_queries(
    unit, story, django_assert_num_queries
):
    # Expect 10 queries: the records with technician, place and closer; then one prefetch each
    # for anode readings (with position), seal changes (with position), battery installs,
    # pressure tests, release tests, sensor checks, housing openings, pack removals and
    # amendments.
    with django_assert_num_queries(10):
        records = unit_records(unit=unit)
    assert sorted(r.pk for r in records) == sorted(r.pk for r in story["records"])
    # Expect 0 queries: everything the history list shows is already loaded.
    with django_assert_num_queries(0):
        shown = [
            (r.technician, r.place, [a.position.name for a in r.anode_readings.all()])
            for r in records
        ]
        for r in records:
            for relation in (
                r.seal_changes,
                r.battery_installs,
                r.pressure_tests,
                r.release_tests,
                r.sensor_checks,
                r.housing_openings,
                r.amendments,
            ):
                list(relation.all())
    assert sorted(len(names) for _, _, names in shown) == [1, 2]


def test_it_loads_deployments_with_their_sites_in_one_query(
    unit, story, site, django_assert_num_queries
):
    # Expect 1 query: the unit's deployments joined to their sites.
    with django_assert_num_queries(1):
        deployments = unit_deployments(unit=unit)
        assert {d.site.name for d in deployments} == {site.name}
    assert len(deployments) == 2


def test_the_history_runs_newest_first_across_records_and_deployments(unit, story):
    first, second = story["records"]
    out, still_out = story["deployments"]
    history = unit_history(
        list(story["records"]),
        list(story["deployments"]),
        rules_for(unit.variant),
        unit.variant,
    )
    assert [(kind, item.pk) for kind, _, item, _lines in history] == [
        ("deployment", still_out.pk),
        ("record", second.pk),
        ("deployment", out.pk),
        ("record", first.pk),
    ]
    assert [when for _, when, _, _lines in history] == [
        t(2026, 6, 1),
        t(2026, 5, 5, 9),
        t(2026, 2, 1),
        t(2026, 1, 5, 9),
    ]


def test_the_unit_page_reads_in_a_fixed_number_of_queries(
    unit, story, technician, django_assert_num_queries
):
    anode1, anode2 = story["anodes"]
    seal1, seal2 = story["seals"]
    # Expect 22 queries: anode positions, seal positions, last anode readings, last seal
    # changes, fitted pack, open deployment, open record; the history page: the counts of
    # records and deployments, the keys of each, its records (1 + 9 prefetches, see above)
    # and its deployments.
    unit = loaded(unit)
    with django_assert_num_queries(22):
        page = unit_page(unit=unit, rules=rules_for(unit.variant))
    assert [(p.pk, r.mass_g if r else None) for p, r in page.anodes] == [
        (anode1.pk, 380.0),
        (anode2.pk, 395.0),
    ]
    assert [(p.pk, c is not None) for p, c in page.seals] == [(seal1.pk, True), (seal2.pk, False)]
    assert page.fitted_pack is not None and page.fitted_pack.pack_serial == "PK-1"
    assert page.open_deployment == story["deployments"][1]
    assert len(page.history) == 4
    # More records do not add queries (after recovery: no visit while in the water).
    deployment_recover(
        deployment=story["deployments"][1],
        recovered_at=t(2026, 6, 20),
        replies_counted=None,
        place=None,
        by=technician,
    )
    visit(unit, technician, t(2026, 6, 25, 9), AnodeReading(position=anode2, mass_g=385.0))
    unit = loaded(unit)
    with django_assert_num_queries(22):
        assert len(unit_page(unit=unit, rules=rules_for(unit.variant)).history) == 5


def test_a_unit_with_no_records_reads_in_eleven_queries(unit, django_assert_num_queries):
    # Expect 11 queries: as above, with no record or deployment to load for the history.
    unit = loaded(unit)
    with django_assert_num_queries(11):
        page = unit_page(unit=unit, rules=rules_for(unit.variant))
    assert page.fitted_pack is None
    assert page.open_deployment is None
    assert page.history == []
    assert all(reading is None for _, reading in page.anodes)


def test_the_record_sections_come_in_page_order(unit, story, supervisor, django_assert_num_queries):
    first = story["records"][0]
    rules = rules_for(first.unit.variant)  # the view reads the variant for its rules first
    # Expect 8 queries: one per entry kind.
    with django_assert_num_queries(8):
        sections = record_sections(record=first, rules=rules)
    assert [(s.title, len(s.rows)) for s in sections] == [
        ("Anode readings", 2),
        ("Seal changes", 1),
        ("Battery installs", 1),
        ("Pressure tests", 0),
        ("Release tests", 0),
        ("Sensor checks", 0),
        ("Housing openings", 0),
        ("Pack removals", 0),
    ]


def test_the_record_amendments_come_with_their_authors(
    unit, story, supervisor, django_assert_num_queries
):
    first = ServiceRecord.objects.get(pk=story["records"][0].pk)  # closed by the visit helper
    reading = first.anode_readings.order_by("pk").first()
    amendment_create(
        record=first,
        target=reading,
        field_name="mass_g",
        corrected_value="391",
        reason="Scale misread.",
        by=supervisor,
    )
    # Expect 1 query: amendments joined to their author and target type.
    with django_assert_num_queries(1):
        amendments = record_amendments(record=first)
        assert [(a.created_by, a.target_label, a.field_label) for a in amendments] == [
            (supervisor, f"Anode reading (entry {reading.pk})", "Net mass (g)")
        ]
    # Named as the page numbers the entries, never by a database key, given the page's names.
    names = entry_names(first.anode_readings.order_by("pk"))
    with django_assert_num_queries(1):
        amendments = record_amendments(record=first, names=names)
    assert [a.target_label for a in amendments] == ["Anode reading 1"]
    assert (amendments[0].original_words, amendments[0].corrected_words) == (
        f"{reading.mass_g:g} g",
        "391 g",
    )


def test_the_fleet_counts_cover_every_condition_and_place(
    unit, variant, site, technician, django_assert_num_queries
):
    make_unit(serial="TX-0002", acoustic_address="102", variant=variant, place=None)
    deploy(unit, site, technician, t(2026, 2, 1))
    # Expect 2 queries: units grouped by their condition (one SQL expression), by place.
    with django_assert_num_queries(2):
        counts = fleet_counts(on=timezone.localdate())
    assert counts.total == 2
    assert counts.by_condition[Condition.IN_WATER] == 1
    assert sum(counts.by_condition.values()) == 2
    assert list(counts.by_condition) == list(Condition)
    assert sorted((row["place__name"] or "", row["n"]) for row in counts.by_place) == [
        ("", 1),
        (unit.place.name, 1),
    ]


def test_open_records_and_units_in_water_are_oldest_first(
    unit, variant, story, technician, django_assert_num_queries
):
    # One open visit per unit: two other units on the bench, the older visit first.
    units = [
        make_unit(serial=f"TX-010{i}", acoustic_address=f"11{i}", variant=variant, place=unit.place)
        for i in (1, 2)
    ]
    second = visit(units[1], technician, t(2026, 7, 2, 9), close=False)
    first = visit(units[0], technician, t(2026, 7, 1, 9), close=False)
    # Expect 1 query each: the rows joined to what the overview shows.
    with django_assert_num_queries(1):
        records = open_records(limit=20)
        assert [(r.pk, r.unit.serial, r.technician) for r in records] == [
            (first.pk, units[0].serial, technician),
            (second.pk, units[1].serial, technician),
        ]
    assert [r.pk for r in open_records(limit=1)] == [first.pk]
    with django_assert_num_queries(1):
        in_water = units_in_water(limit=50)
        assert [(d.pk, d.unit.serial, d.site.name) for d in in_water] == [
            (story["deployments"][1].pk, unit.serial, story["deployments"][1].site.name)
        ]


def _bulk_history(unit, technician, visits: int) -> None:
    """``visits`` closed bench visits a week apart, each with a reading at every anode and a
    deployment between them, written in bulk (the page only reads them)."""
    positions = list(unit.variant.anode_positions.all())
    start = t(2000, 1, 3)
    records = ServiceRecord.objects.bulk_create(
        ServiceRecord(
            unit=unit,
            opened_at=start + dt.timedelta(days=7 * i),
            closed_at=start + dt.timedelta(days=7 * i, hours=8),
            technician=technician,
            place=unit.place,
            created_by=technician,
        )
        for i in range(visits)
    )
    AnodeReading.objects.bulk_create(
        AnodeReading(record=r, position=p, mass_g=390.0 - i * 0.01)
        for i, r in enumerate(records)
        for p in positions
    )
    Deployment.objects.bulk_create(
        Deployment(
            unit=unit,
            site=Site.objects.first(),
            over_side_at=start + dt.timedelta(days=7 * i + 1),
            recovered_at=start + dt.timedelta(days=7 * i + 6),
            planned_days=5,
            planned_interrogations_per_day=100,
            transmit_power_step=1,
            created_by=technician,
        )
        for i in range(visits)
    )


def test_the_unit_page_costs_the_same_for_10_and_1000_readings(
    variant, workshop, site, technician, django_assert_num_queries
):

    small = make_unit(serial="HS-0001", variant=variant, place=workshop)
    large = make_unit(serial="HS-0002", acoustic_address="102", variant=variant, place=workshop)
    _bulk_history(small, technician, 5)  # 10 readings at the two anodes
    _bulk_history(large, technician, 500)  # 1,000 readings
    assert AnodeReading.objects.filter(record__unit=large).count() == 1000
    # Expect 22 queries for each: as in the test above, whatever the history's length.
    for unit in (small, large):
        unit = loaded(unit)
        with django_assert_num_queries(22):
            page = unit_page(unit=unit, rules=rules_for(unit.variant))
        assert len(page.history) == (10 if unit == small else 20)
    assert page.history_page.total == 1000
    newest = t(2000, 1, 3) + dt.timedelta(days=7 * 499 + 1)
    assert page.history[0][1] == newest  # the last deployment, newest first
    assert {p.pk: r.mass_g for p, r in page.anodes} == {
        p.pk: pytest.approx(390.0 - 499 * 0.01) for p in variant.anode_positions.all()
    }


def test_the_unit_history_pages_run_back_in_time_without_gaps(variant, workshop, site, technician):

    unit = loaded(make_unit(serial="HS-0003", variant=variant, place=workshop))
    _bulk_history(unit, technician, 25)  # 50 events: 25 visits, 25 deployments
    rules = rules_for(unit.variant)
    pages = [unit_history_page(unit=unit, rules=rules, number=n) for n in (1, 2, 3)]
    assert [p.num_pages for p in pages] == [3, 3, 3]
    whens = [when for p in pages for _, when, _, _ in p.entries]
    assert len(whens) == 50
    assert whens == sorted(whens, reverse=True)
    assert len(set(whens)) == 50
    # A page number past the end shows the last page.
    assert unit_history_page(unit=unit, rules=rules, number=99).number == 3
