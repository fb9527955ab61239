"""The anode chart's points, read as numbers in the database, equal a plain recomputation
from the records: the thinning rule applied to every reading by its local date, and the wear
fit drawn at each reading's immersed days from ``immersed_days`` over the deployments.
Its reads do not grow with the history."""

import datetime as dt
import random

import pytest
from django.db import connection
from django.test.utils import CaptureQueriesContext
from django.utils import timezone

from fleet.calc.exposure import immersed_days
from fleet.due.engine import anode_outlook, anode_outlook_of, evaluate_unit, fleet_queryset
from fleet.due.history import anode_history, anode_history_of, thin_readings
from fleet.due.store import refresh_unit
from fleet.models import AnodeReading, Deployment, ServiceRecord, Transponder
from fleet.models.functions import EpochSeconds
from tests.builders import make_unit

pytestmark = pytest.mark.django_db


def _history(unit, technician, site, *, visits, seed):
    """``visits`` deployments, each followed by a closed bench visit with a reading at the
    first anode (now and then replacing it, now and then with a percent estimate or no
    value), written in bulk, then the unit's state refreshed."""
    rng = random.Random(seed)
    position = unit.variant.anode_positions.order_by("pk").first()
    at = timezone.now() - dt.timedelta(days=12 * visits + 30)
    deployments, readings = [], []
    for _ in range(visits):
        over = at + dt.timedelta(days=1, hours=rng.randint(0, 23))
        back = over + dt.timedelta(days=rng.randint(1, 9), minutes=rng.randint(0, 59))
        deployments.append(
            Deployment(
                unit=unit,
                site=site,
                over_side_at=over,
                recovered_at=back,
                planned_days=10,
                planned_interrogations_per_day=100,
                transmit_power_step=1,
                created_by=technician,
            )
        )
        opened = back + dt.timedelta(days=1, seconds=rng.randint(0, 86_000))
        record = ServiceRecord.objects.create(
            unit=unit,
            opened_at=opened,
            technician=technician,
            place=unit.place,
            created_by=technician,
            closed_at=opened + dt.timedelta(hours=2),
            closed_by=technician,
        )
        roll = rng.random()
        readings.append(
            AnodeReading(
                record=record,
                position=position,
                mass_g=None if roll < 0.1 else round(rng.uniform(100.0, 400.0), 1),
                remaining_percent=round(rng.uniform(20.0, 95.0), 1) if roll < 0.05 else None,
                replaced=rng.random() < 0.04,
            )
        )
        at = opened + dt.timedelta(days=rng.randint(1, 20))
    Deployment.objects.bulk_create(deployments)
    AnodeReading.objects.bulk_create(readings)
    refresh_unit(unit, at=timezone.now())
    return position


def _expected(unit, position):
    """The chart's points recomputed plainly from the records (datetimes, not numbers)."""
    tz = timezone.get_current_timezone()
    rows = list(
        AnodeReading.objects.filter(record__unit=unit, position=position)
        .select_related("record")
        .order_by("record__opened_at", "pk")
    )
    new_g = position.new_net_mass_g
    every = []
    for i, r in enumerate(rows):
        pct = r.remaining_percent if r.mass_g is None else 100.0 * r.mass_g / new_g
        if pct is not None:
            every.append((i, r.record.opened_at.astimezone(tz).date(), pct, r.replaced))
    kept = thin_readings([(day.year, pct, replaced) for _, day, pct, replaced in every])
    intervals = list(
        Deployment.objects.filter(unit=unit).values_list("over_side_at", "recovered_at")
    )
    last = max((i for i, r in enumerate(rows) if r.replaced), default=None)
    drawn = [every[k] for k in kept]
    days = {i: immersed_days(intervals, rows[i].record.opened_at) for i, *_ in drawn}
    if last is not None:
        days[last] = immersed_days(intervals, rows[last].record.opened_at)
    return [(day, pct) for _, day, pct, _ in drawn], [i for i, *_ in drawn], days, last, len(every)


def _chart(unit, position):
    loaded = fleet_queryset(Transponder.objects.filter(pk=unit.pk)).get()
    ev = evaluate_unit(loaded, on=timezone.localdate())
    return ev, anode_history(ev, position.pk)


@pytest.mark.parametrize("visits, seed", [(40, 1), (260, 2), (330, 3)])
def test_the_chart_draws_what_a_plain_recomputation_draws(unit, technician, site, visits, seed):
    position = _history(unit, technician, site, visits=visits, seed=seed)
    points, drawn, days, last, total = _expected(unit, position)
    ev, history = _chart(unit, position)
    assert list(history.readings) == points
    assert ("readings drawn" in history.shown) == (len(points) < total)
    if len(points) < total:
        assert history.shown.startswith(f"{len(points):,} of {total:,} readings drawn")
    # The fit line: one point per reading of the current anode (and one at its fitting),
    # at immersed days within a second of ``immersed_days`` over datetimes.
    projection = next(p for p in ev.anodes if p.position_id == position.pk)
    fit = projection.fit
    if fit is None or not fit.rate_kg_per_day:
        assert history.fitted == ()
        return
    start_x = days[last] if last is not None else 0.0
    expected_fit = []
    if last is not None and fit.mass_at_kg(0.0) is not None:
        expected_fit.append(100.0 * fit.mass_at_kg(0.0) / projection.new_kg)
    for i in drawn:
        if last is None or i > last:
            mass = fit.mass_at_kg(max(0.0, days[i] - start_x))
            if mass is not None:
                expected_fit.append(100.0 * mass / projection.new_kg)
    assert [pct for _, pct in history.fitted] == pytest.approx(expected_fit, abs=1e-6)


def test_the_chart_reads_in_the_same_number_of_queries_whatever_the_history(
    unit, technician, site, variant, workshop
):
    long_unit = make_unit(variant=variant, place=workshop, serial="TX-LONG")
    _history(unit, technician, site, visits=5, seed=4)
    position = _history(long_unit, technician, site, visits=300, seed=5)
    counts = []
    for u in (unit, long_unit):
        loaded = fleet_queryset(Transponder.objects.filter(pk=u.pk)).get()
        ev = evaluate_unit(loaded, on=timezone.localdate())
        with CaptureQueriesContext(connection) as queries:
            anode_history(ev, position.pk)
        counts.append(len(queries))
    assert counts[0] == counts[1] == 2  # the position's readings; the deployments


def test_epoch_seconds_match_pythons_timestamps(unit, technician, site):
    # Python's datetime.timestamp() as the reference (general-purpose library).
    _history(unit, technician, site, visits=30, seed=6)
    rows = Deployment.objects.filter(unit=unit).annotate(
        s=EpochSeconds("over_side_at"), e=EpochSeconds("recovered_at")
    )
    for d in rows:
        assert d.s == pytest.approx(d.over_side_at.timestamp(), abs=1e-3)
        assert d.e == pytest.approx(d.recovered_at.timestamp(), abs=1e-3)
        # Read as the driver gives them, with no converter: floats, as the prefix sums need.
        assert type(d.s) is float and type(d.e) is float
    open_one = Deployment.objects.filter(pk=rows[0].pk)
    open_one.update(recovered_at=None)
    assert open_one.values_list(EpochSeconds("recovered_at"), flat=True).get() is None


@pytest.mark.parametrize("visits, seed", [(0, 7), (12, 8), (90, 9)])
def test_one_positions_outlook_equals_the_whole_evaluations(unit, technician, site, visits, seed):
    # The chart reads one position's stored state row, not the unit's every item: the same
    # projection, due date and last event as ``evaluate_unit`` gives for that position.
    position = (
        _history(unit, technician, site, visits=visits, seed=seed)
        if visits
        else unit.variant.anode_positions.order_by("pk").first()
    )
    ev, history = _chart(unit, position)
    for p in unit.variant.anode_positions.all():
        alone = anode_outlook(unit.pk, p.pk)
        whole = anode_outlook_of(ev, p.pk)
        assert alone is not None and whole is not None
        assert (alone.projection, alone.due_on, alone.as_of) == (
            whole.projection,
            whole.due_on,
            whole.as_of,
        )
        assert alone.position == whole.position == p
    assert anode_history_of(anode_outlook(unit.pk, position.pk)) == history


def test_no_outlook_for_a_position_of_another_variant(unit, variant):
    other = variant.anode_positions.order_by("pk").first()
    other.pk = None
    other.variant = type(variant).objects.create(
        **{
            f.name: getattr(variant, f.name)
            for f in variant._meta.concrete_fields
            if not f.primary_key and f.name != "name"
        },
        name="Another variant",
    )
    other.save()
    assert anode_outlook(unit.pk, other.pk) is None
