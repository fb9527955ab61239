"""Keep the derived state rows (fleet/models/state.py) in step with the records.

Algorithm for one unit, run inside the transaction of every write that touches the unit:

1. Deployments, in order, give the unit's immersed time: every reading's x is the
   cumulative immersed days at the moment of its bench visit (``calc.exposure``).
2. Anodes: per position, walk the readings oldest first and add (x − x_fit, mass kg) to
   the running sums (``calc.anodes.WearSums``). A reading marked *replaced* ends that anode:
   the sums restart from one point, (0, new net mass), at that visit.
3. Seals: per position, the last seal change is the fitted ring; housing openings in later
   visits count against it.
4. Battery: the fitted pack's charge used over recovered deployments since it went in:
   listening hours × listen current + replies × charge per reply at the deployment's
   transmit power step + release operations (``calc.battery.charge_used_ah``). Replies are
   the count made on recovery where there is one, else the planned rate.
5. Last pressure test, and whether any housing opening after the end of its hold voids it
   (``test_moment``); last release test and sensor checks.
6. The unit's last event (``as_of``): the latest moment a deployment went over the side or
   came back, or a bench visit opened. Every projection runs from there (``duty.py``).

Recomputing one unit reads only that unit's records (a handful of queries). A whole-fleet
evaluation then reads one row per item.
"""

import datetime as dt

from django.db import transaction
from django.db.models import F, Q, QuerySet
from django.utils import timezone

from fleet.calc.anodes import WearSums
from fleet.calc.battery import charge_used_ah
from fleet.calc.exposure import immersed_days, immersed_days_at_each, overlap_days
from fleet.models import (
    AnodeReading,
    AnodeState,
    BatteryInstall,
    Deployment,
    HousingOpening,
    PressureTest,
    ReleaseTest,
    SealChange,
    SealState,
    SensorCheck,
    ServiceRecord,
    Transponder,
    UnitState,
)

from .days import OPEN_END, start_of
from .duty import charge_per_reply_as, replies_in, replies_per_day


def test_moment(test: PressureTest) -> dt.datetime:
    """When a pressure test's hold ended: its date and time of day, or the start of its day
    when no time was given (so any opening that day voids it: the safe side)."""
    day = start_of(test.tested_on)
    if test.hold_ended_at is None:
        return day
    return timezone.make_aware(dt.datetime.combine(test.tested_on, test.hold_ended_at))


def unit_readings(unit: Transponder, position_ids: list[int]) -> QuerySet[AnodeReading]:
    """The unit's anode readings at ``position_ids``, found through its visits (the unit's
    index on visits, then each visit's readings). The position is matched as an expression
    (``position_id + 0``) so that a planner without statistics (SQLite's) does not pick
    the position's index instead, which holds that position's readings across the fleet:
    a third of a million rows on a fleet of 5,000 units over ten years."""
    return (
        AnodeReading.objects.filter(record__unit=unit)
        .alias(position_no=F("position_id") + 0)
        .filter(position_no__in=position_ids)
    )


def _mass_kg(new_kg: float, mass_g: float | None, remaining_percent: float | None) -> float | None:
    if mass_g is not None:
        return mass_g / 1000.0
    if remaining_percent is not None:
        return new_kg * remaining_percent / 100.0
    return None


def _refresh_anodes(
    unit: Transponder,
    intervals: list[tuple[dt.datetime, dt.datetime | None]],
    visits: dict[int, dt.datetime],
) -> None:
    """Step 2: rewrite the unit's anode rows from its readings, read as plain values (no
    model per reading, no date per reading: ``visits`` holds each visit's opening) with
    every visit's immersed days found in one pass."""
    positions = {p.pk: p for p in unit.variant.anode_positions.all()}
    readings = list(
        unit_readings(unit, list(positions))
        .order_by("record__opened_at", "pk")
        .values_list(
            "position_id", "mass_g", "remaining_percent", "bond_resistance_ohm", "replaced",
            "record_id",
        )
    )  # fmt: skip
    x_at = dict(zip(visits, immersed_days_at_each(intervals, visits.values()), strict=True))
    anode_rows: dict[int, AnodeState] = {
        pk: AnodeState(unit=unit, position_id=pk) for pk in positions
    }
    # Per position, the (x, kg) points of the anode now fitted, summed once at the end.
    points: dict[int, list[tuple[float, float]]] = {pk: [] for pk in positions}
    for position_id, mass_g, percent, bond, replaced, record_id in readings:
        opened_at, x = visits[record_id], x_at[record_id]
        row = anode_rows[position_id]
        new_kg = positions[position_id].new_net_mass_g / 1000.0
        mass_kg = _mass_kg(new_kg, mass_g, percent)
        if mass_kg is None:
            continue
        points[position_id].append((max(0.0, x - row.immersed_days_at_fit), mass_kg))
        row.last_read_at = opened_at
        row.last_mass_kg = mass_kg
        row.last_bond_resistance_ohm = bond
        if replaced:
            row.fitted_at = opened_at
            row.immersed_days_at_fit = x
            row.last_mass_kg = new_kg
            # The bond measured at this visit was the old anode's; the new one has none yet.
            row.last_bond_resistance_ohm = None
            points[position_id] = [(0.0, new_kg)]
    for pk, row in anode_rows.items():
        s = WearSums.empty().extend(points[pk])
        row.n, row.sum_x, row.sum_y = s.n, s.sum_x, s.sum_y
        row.sum_xx, row.sum_xy, row.sum_yy = s.sum_xx, s.sum_xy, s.sum_yy
    AnodeState.objects.filter(unit=unit).delete()
    AnodeState.objects.bulk_create(anode_rows.values())


# A housing opening as (opened at, its visit opened at).
Opening = tuple[dt.datetime, dt.datetime]


def _refresh_seals(unit: Transponder, openings: list[Opening]) -> None:
    """Step 3: rewrite the unit's seal rows: the last change per position and the openings
    since it."""
    seal_positions = list(unit.variant.seal_positions.all())
    latest_change: dict[int, tuple[dt.datetime, dt.date | None, str]] = {}
    for position_id, fitted, cure_date, material in (
        SealChange.objects.filter(record__unit=unit)
        .order_by("record__opened_at", "pk")
        .values_list("position_id", "record__opened_at", "cure_date", "material")
    ):
        latest_change[position_id] = (fitted, cure_date, material)
    seal_rows = []
    for position in seal_positions:
        fitted_change = latest_change.get(position.pk)
        row = SealState(unit=unit, position=position)
        if fitted_change is not None:
            fitted, row.cure_date, row.material = fitted_change
            row.fitted_at = fitted
            # Openings during the fitting visit came before the new ring went in.
            row.openings_since_fit = sum(1 for _, visit in openings if visit > fitted)
        seal_rows.append(row)
    SealState.objects.filter(unit=unit).delete()
    SealState.objects.bulk_create(seal_rows)


def _pack_tally(
    unit: Transponder, pack: BatteryInstall | None, recovered: list[tuple[Deployment, dt.datetime]]
) -> tuple[float, int]:
    """Step 4: the fitted pack's charge used (A h) and its release operations, over the
    recovered deployments since it went in (``recovered`` holds at least every deployment
    recovered after the pack's day, in time order)."""
    variant = unit.variant
    steps = {s.step: s.charge_per_reply_as for s in variant.reply_steps.all()}
    if pack is None:
        return 0.0, 0
    fitted_from = start_of(pack.installed_on)
    hours = 0.0
    replies_charge = 0.0
    pack_releases = 0
    for d, recovered_at in recovered:
        days = overlap_days(d.over_side_at, recovered_at, fitted_from, OPEN_END)
        if days <= 0:
            continue
        hours += days * 24.0
        n = replies_in(d, days)
        replies_charge += charge_used_ah(
            0.0, 0.0, n, charge_per_reply_as(steps, d.transmit_power_step)
        )
        if variant.release_fitted and recovered_at >= fitted_from:
            pack_releases += 1  # the release fired to bring the unit up
    pack_releases += ReleaseTest.objects.filter(
        record__unit=unit, tested_on__gte=pack.installed_on
    ).count()
    pack_charge = (
        charge_used_ah(
            hours, variant.listen_current_a, 0, 0.0, pack_releases, variant.release_charge_as
        )
        + replies_charge
    )
    return pack_charge, pack_releases


def _deployments(
    unit: Transponder, pack: BatteryInstall | None
) -> tuple[list[tuple[dt.datetime, dt.datetime | None]], list[Deployment]]:
    """Step 1: every deployment's interval, as plain values, and as records only those the
    state names or charges to the pack: the open one, the last recovered one, and those
    recovered after the pack's day (two queries, whatever the unit's history)."""
    spans = list(
        Deployment.objects.filter(unit=unit)
        .order_by("over_side_at")
        .values_list("pk", "over_side_at", "recovered_at")
    )
    last_closed = [pk for pk, _, back in spans if back is not None][-1:]
    wanted = Q(recovered_at__isnull=True) | Q(pk__in=last_closed)
    if pack is not None:
        wanted |= Q(recovered_at__gt=start_of(pack.installed_on))
    needed = (
        list(
            Deployment.objects.filter(unit=unit)
            .filter(wanted)
            .select_related("site")
            .order_by("over_side_at")
        )
        if spans
        else []
    )
    return [(over, back) for _, over, back in spans], needed


def _latest_checks(unit: Transponder) -> dict[str, int]:
    """Step 5: the latest sensor check of each sensor, by primary key."""
    latest: dict[str, int] = {}
    for sensor, pk in (
        SensorCheck.objects.filter(record__unit=unit)
        .order_by("checked_on", "pk")
        .values_list("sensor", "pk")
    ):
        latest[sensor] = pk
    return latest


def _last_pressure_test(
    unit: Transponder, openings: list[Opening]
) -> tuple[PressureTest | None, bool]:
    """Step 5: the last pressure test, and whether an opening after it voids it."""
    last_test = (
        PressureTest.objects.filter(record__unit=unit)
        .select_related("record")
        .order_by("-tested_on", "-record__opened_at", "-pk")
        .first()
    )
    voided = False
    if last_test is not None:
        tested_at = test_moment(last_test)
        visit_at = last_test.record.opened_at
        voided = any(opened > tested_at or visit > visit_at for opened, visit in openings)
    return last_test, voided


@transaction.atomic
def refresh_unit_state(unit: Transponder, *, at: dt.datetime) -> UnitState:
    """Rewrite the unit's state rows in a constant number of queries: the readings are read
    as plain values, the other records only as far as the state needs them."""
    pack = BatteryInstall.objects.filter(unit=unit, removal__isnull=True).first()
    intervals, deployments = _deployments(unit, pack)
    closed_intervals = [(over, back) for over, back in intervals if back is not None]
    recovered = [(d, d.recovered_at) for d in deployments if d.recovered_at is not None]
    open_deployment = next((d for d in deployments if d.recovered_at is None), None)

    visits = dict(ServiceRecord.objects.filter(unit=unit).values_list("pk", "opened_at"))
    _refresh_anodes(unit, intervals, visits)
    openings: list[Opening] = list(
        HousingOpening.objects.filter(record__unit=unit)
        .order_by("opened_at")
        .values_list("opened_at", "record__opened_at")
    )
    _refresh_seals(unit, openings)
    pack_charge, pack_releases = _pack_tally(unit, pack, recovered)
    last_test, voided = _last_pressure_test(unit, openings)
    last_release = (
        ReleaseTest.objects.filter(record__unit=unit).order_by("-tested_on", "-pk").first()
    )
    latest_check = _latest_checks(unit)

    events = [over for over, _ in intervals] + [back for _, back in closed_intervals]
    events += visits.values()
    duty = open_deployment or (recovered[-1][0] if recovered else None)
    state, _ = UnitState.objects.update_or_create(
        unit=unit,
        defaults={
            "refreshed_at": at,
            "as_of": max(events, default=None),
            "immersed_days_closed": immersed_days(closed_intervals, OPEN_END),
            "first_over_side_at": intervals[0][0] if intervals else None,
            "open_deployment": open_deployment,
            "duty_deployment": duty,
            "duty_replies_per_day": replies_per_day(duty) if duty else None,
            "duty_site": duty.site if duty else None,
            "pack": pack,
            "pack_charge_used_ah": pack_charge,
            "pack_releases": pack_releases,
            "last_pressure_test": last_test,
            "last_opening_at": openings[-1][0] if openings else None,
            "test_voided_by_opening": voided,
            "last_release_test": last_release,
            "last_temperature_check_id": latest_check.get(SensorCheck.Sensor.TEMPERATURE),
            "last_pressure_check_id": latest_check.get(SensorCheck.Sensor.PRESSURE),
            "last_tilt_check_id": latest_check.get(SensorCheck.Sensor.TILT),
        },
    )
    return state
