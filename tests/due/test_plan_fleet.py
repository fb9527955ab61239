"""The planner reads the stored rows: the same verdicts as checking each unit alone, and the
same number of queries for any size of fleet."""

import datetime as dt
import random

import pytest
from django.db import connection
from django.test.utils import CaptureQueriesContext
from django.utils import timezone

from fleet.due.planned import PlannedDeployment
from fleet.due.readiness import chunk_rows, plan_campaign, readiness_for
from fleet.models import (
    AnodeReading,
    DueRow,
    Transponder,
    UnitHold,
    UnitState,
)
from tests.builders import make_site, make_unit, pressure_test, serviced_unit
from tests.due.test_engine import deploy, visit

pytestmark = pytest.mark.django_db


def _random_fleet(rng, variant, site, technician, workshop, n):
    """``n`` units with histories drawn at random: fully serviced (some with a failed release
    test), half serviced, deployed now, held, or never touched."""
    today = timezone.localdate()
    for i in range(n):
        unit = make_unit(
            serial=f"RF-{i:03d}",
            acoustic_address=str(rng.choice([300, 301, 302, 400 + i])),  # some share one
            turnaround_delay_ms=rng.choice([12.5, 12.5, 40.0, 900.0]),
            variant=variant,
            place=workshop,
        )
        shape = rng.choice(["ready", "ready", "failed", "partial", "deployed", "held", "none"])
        # Mostly recent visits (ready for a job soon), some long ago (lapsed by now).
        day = today - dt.timedelta(days=rng.choice([rng.randint(1, 30), rng.randint(30, 700)]))
        if shape in ("ready", "failed", "deployed", "held"):
            extra = {"limit_switch_ok": False} if shape == "failed" else {}
            serviced_unit(unit, by=technician, site=site, day=day, **extra)
        elif shape == "partial":
            when = dt.datetime.combine(day, dt.time(9), tzinfo=dt.UTC)
            anode = variant.anode_positions.first()
            mass = anode.new_net_mass_g * rng.uniform(0.2, 1.0)
            visit(
                unit,
                technician,
                when,
                AnodeReading(position=anode, mass_g=mass),
                pressure_test(day),
            )
        if shape == "deployed":
            deploy(unit, site, technician, timezone.now() - dt.timedelta(hours=1))
        if shape == "held":
            Transponder.objects.filter(pk=unit.pk).update(
                hold=UnitHold.QUARANTINED, hold_reason="leak found"
            )


def _checks(readiness):
    return [(c.name, c.verdict, c.numbers, c.source) for c in readiness.checks]


@pytest.mark.parametrize("seed", [3, 11, 29, 41])
def test_the_plan_gives_every_unit_the_verdicts_it_gets_checked_alone(
    variant, site, technician, workshop, seed
):
    rng = random.Random(seed)
    _random_fleet(rng, variant, site, technician, workshop, 14)
    on = timezone.localdate()
    # The plan's own duty half the time (the battery check's other branch).
    duty = {"interrogations_per_day": rng.randint(50, 5000), "power_step": rng.randint(1, 3)}
    own_duty = rng.random() < 0.5
    planned = PlannedDeployment(
        site,
        on + dt.timedelta(days=rng.randint(1, 60)),
        rng.randint(20, 400),
        **(duty if own_duty else {}),
    )
    plan = plan_campaign(planned, wanted=3, on=on)
    planned_results = plan.ready + plan.rejected
    # Every active unit once (the planner reads plain values; alone, the unit's models).
    active = Transponder.objects.exclude(hold__in=[UnitHold.RETIRED, UnitHold.LOST])
    assert sorted(r.unit.serial for r in planned_results) == sorted(
        active.values_list("serial", flat=True)
    )
    for result in planned_results:
        alone = readiness_for(result.unit, planned, on=on)
        checks = _checks(result)
        if checks[0][2].endswith("ranked higher in this plan"):
            checks = checks[1:]  # the plan's own rule: one unit per address in one job
        assert checks == _checks(alone), result.unit.serial
        assert result.margins == alone.margins
        assert result.verdict == alone.verdict
        assert (result.interrogations_per_day, result.power_step) == (
            alone.interrogations_per_day,
            alone.power_step,
        )
    assert plan.rejected
    assert plan.ready or own_duty  # a heavy duty of the plan's own may leave none ready
    # The verdicts differ across the fleet: the comparison above is not of one repeated case.
    assert len({tuple(c[1] for c in _checks(r)) for r in planned_results}) >= 3


def _copy_units(template, variant, workshop, n):
    """``n`` more units carrying a copy of ``template``'s stored state and due rows, written in
    bulk (what the planner reads; their records do not matter to its query count)."""
    units = Transponder.objects.bulk_create(
        Transponder(
            serial=f"BK-{i:05d}",
            variant=variant,
            place=workshop,
            acoustic_address=str(5000 + i),
            turnaround_delay_ms=12.5,
        )
        for i in range(n)
    )
    state = UnitState.objects.get(unit=template)
    rows = list(DueRow.objects.filter(unit=template))
    states, due = [], []
    for unit in units:
        state.pk = None
        state.unit = unit
        states.append(
            UnitState(
                **{f.attname: getattr(state, f.attname) for f in UnitState._meta.concrete_fields}
            )
        )
        for row in rows:
            due.append(
                DueRow(
                    **{
                        **{
                            f.attname: getattr(row, f.attname) for f in DueRow._meta.concrete_fields
                        },
                        "id": None,
                        "unit_id": unit.pk,
                    }
                )
            )
    UnitState.objects.bulk_create(states)
    DueRow.objects.bulk_create(due, batch_size=2000)


def test_the_planner_costs_the_same_queries_for_20_and_2000_units(
    variant, site, technician, workshop
):
    template = make_unit(serial="TPL-1", variant=variant, place=workshop)
    serviced_unit(
        template, by=technician, site=site, day=timezone.localdate() - dt.timedelta(days=3)
    )
    other_site = make_site(name="Other site", water_depth_m=800.0)
    on = timezone.localdate()
    planned = PlannedDeployment(other_site, on + dt.timedelta(days=5), 60)

    def count():
        with CaptureQueriesContext(connection) as captured:
            plan_campaign(planned, wanted=4, on=on)
        return len(captured)

    _copy_units(template, variant, workshop, 19)
    small = count()
    Transponder.objects.filter(serial__startswith="BK-").delete()
    _copy_units(template, variant, workshop, 1999)
    assert Transponder.objects.count() == 2000
    # Units in the water at the site (1); the units with their state and condition (1);
    # anode states, seal states, the variants, their anode positions, seal positions and
    # reply steps, the due rows (1 each). None of them grows with the fleet (read by chunks of
    # ``PLAN_CHUNK`` = 2,000 units: one chunk here).
    assert count() == small
    assert small <= 10


def test_the_overview_costs_the_same_queries_for_20_and_2000_units(
    as_viewer, variant, site, technician, workshop
):
    template = make_unit(serial="TPL-1", variant=variant, place=workshop)
    serviced_unit(
        template, by=technician, site=site, day=timezone.localdate() - dt.timedelta(days=400)
    )

    def queries():
        with CaptureQueriesContext(connection) as captured:
            assert as_viewer.get("/").status_code == 200
        return [q["sql"] for q in captured.captured_queries]

    _copy_units(template, variant, workshop, 19)
    small = queries()
    Transponder.objects.filter(serial__startswith="BK-").delete()
    _copy_units(template, variant, workshop, 1999)
    large = queries()
    assert len(large) == len(small)
    # With no place or variant chosen, the due rows are not filtered by a list of every unit.
    due_queries = [sql for sql in large if "fleet_duerow" in sql]
    assert due_queries
    assert not any('IN (SELECT U0."id"' in sql for sql in due_queries)


def test_the_plan_builds_a_sentence_only_when_it_is_read(
    variant, site, technician, workshop, monkeypatch
):
    """The planner works out verdicts and margins for every unit and leaves the words for the
    rows a page shows: a check's sentence is built once, on first reading, from the figures
    the verdict used, and reads the same as the unit checked alone."""
    from fleet.due import readiness as readiness_module

    _random_fleet(random.Random(5), variant, site, technician, workshop, 8)
    on = timezone.localdate()
    planned = PlannedDeployment(site, on + dt.timedelta(days=10), 90)
    built = []
    depth_words = readiness_module.depth_words

    def counted(*args):
        built.append(args)
        return depth_words(*args)

    monkeypatch.setattr(readiness_module, "depth_words", counted)
    plan = plan_campaign(planned, wanted=3, on=on)
    results = plan.ready + plan.rejected
    assert len(results) >= 5
    assert built == []  # no unit's depth sentence built yet
    first = results[0]
    depth = next(c for c in first.checks if c.name == "Depth rating")
    words = depth.numbers
    assert len(built) == 1
    assert depth.numbers is words  # built once, kept
    assert len(built) == 1
    alone = readiness_for(first.unit, planned, on=on)
    assert [c.numbers for c in alone.checks if c.name == "Depth rating"] == [words]


def test_the_plan_pauses_the_cyclic_collector_and_restores_it(
    variant, site, technician, workshop, monkeypatch
):
    """The collector is off while the plan is built and back as it was afterwards, after a
    failure too (a collector left off would grow every later request's memory)."""
    import gc

    from fleet.due import readiness as readiness_module

    seen = []
    check_unit = readiness_module.check_unit

    def watched(*args, **kwargs):
        seen.append(gc.isenabled())
        return check_unit(*args, **kwargs)

    monkeypatch.setattr(readiness_module, "check_unit", watched)
    _random_fleet(random.Random(7), variant, site, technician, workshop, 3)
    planned = PlannedDeployment(site, timezone.localdate() + dt.timedelta(days=10), 90)
    assert gc.isenabled()
    plan_campaign(planned, wanted=1, on=timezone.localdate())
    assert seen and not any(seen)
    assert gc.isenabled()
    with pytest.raises(RuntimeError), readiness_module.cyclic_gc_paused():
        assert not gc.isenabled()
        raise RuntimeError("a failure inside")
    assert gc.isenabled()
    gc.disable()
    try:
        with readiness_module.cyclic_gc_paused():
            pass
        assert not gc.isenabled()  # left as it was found
    finally:
        gc.enable()


def test_objects_made_while_paused_wait_for_no_young_collection_after():
    """What a plan made while the collector was off is not walked by a collection as soon as
    it is back on: it moves to the oldest generation on the way out."""
    import gc

    from fleet.due import readiness as readiness_module

    assert gc.isenabled()
    started: list[int] = []

    def watch(phase, info):
        if phase == "start":
            started.append(info["generation"])

    young = gc.get_threshold()[0]
    gc.collect()
    gc.callbacks.append(watch)
    try:
        with readiness_module.cyclic_gc_paused():
            kept = [[i] for i in range(100 * young)]  # tracked objects, all alive
        after = [[i] for i in range(young // 2)]  # fewer than one young collection's worth
    finally:
        gc.callbacks.remove(watch)
    assert started == []
    assert len(kept) + len(after) > 100 * young


def test_objects_frozen_by_someone_else_stay_frozen():
    """A server that froze its start-up objects (``gc.freeze``) keeps them frozen: the plan
    then leaves the young generation as it is."""
    import gc

    from fleet.due import readiness as readiness_module

    gc.freeze()
    try:
        frozen = gc.get_freeze_count()
        assert frozen > 0
        with readiness_module.cyclic_gc_paused():
            kept = [[i] for i in range(1000)]
        assert gc.get_freeze_count() == frozen
        assert gc.isenabled() and kept
    finally:
        gc.unfreeze()


def test_the_planners_stored_rows_are_read_unsorted(unit, technician, site):
    """The chunk's anode and due rows are looked up by unit and key: no ORDER BY (the due
    rows' default order made SQLite sort every chunk's rows)."""
    serviced_unit(unit, by=technician, site=site, day=timezone.localdate() - dt.timedelta(days=3))
    with CaptureQueriesContext(connection) as captured:
        anodes, dated = chunk_rows([unit.pk])
    assert dated[unit.pk], "the unit has dated due rows"
    assert len(captured) == 2
    assert not [q["sql"] for q in captured if "ORDER BY" in q["sql"]]


def test_the_planners_stored_rows_are_read_by_range_and_only_the_chunks_units_kept(
    variant, technician, site, workshop
):
    """Each chunk query asks for the range of ids (two parameters, whatever the chunk's
    size); a unit in the range but not in the chunk (a lost one, say) is passed over."""
    day = timezone.localdate() - dt.timedelta(days=3)
    units = [
        make_unit(serial=f"RG-{n}", acoustic_address=str(700 + n), variant=variant, place=workshop)
        for n in range(3)
    ]
    for unit in units:
        serviced_unit(unit, by=technician, site=site, day=day)
    first, middle, last = (u.pk for u in units)
    with CaptureQueriesContext(connection) as captured:
        anodes, dated = chunk_rows([first, last])
    assert set(anodes) == set(dated) == {first, last}
    assert anodes[first] and dated[last]
    assert len(captured) == 2
    assert all('"unit_id" IN' not in q["sql"] and '"unit_id" >=' in q["sql"] for q in captured)
    whole_anodes, whole_dated = chunk_rows([first, middle, last])
    assert whole_anodes[first] == anodes[first] and whole_dated[last] == dated[last]
    assert set(whole_anodes) == {first, middle, last}
