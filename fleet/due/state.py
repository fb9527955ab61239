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
from collections.abc import Callable
from dataclasses import dataclass, field, replace
from typing import Any

from django.db import transaction
from django.db.models import F, Max, Q, QuerySet
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


_READING_FIELDS = (
    "position_id", "mass_g", "remaining_percent", "bond_resistance_ohm", "replaced", "record_id",
)  # fmt: skip
# The anode row's derived fields; the base copy carries the same names after "base_".
_ANODE_FIELDS = (
    "fitted_at", "immersed_days_at_fit", "n", "sum_x", "sum_y", "sum_xx", "sum_xy", "sum_yy",
    "last_read_at", "last_mass_kg", "last_bond_resistance_ohm",
)  # fmt: skip


@dataclass(slots=True)
class _Anode:
    """One position's anode while its readings are walked oldest first: the sums so far and
    the points not yet added (added in order, so the floats are those of one ``extend``)."""

    new_kg: float
    fitted_at: dt.datetime | None = None
    at_fit: float = 0.0
    sums: WearSums = field(default_factory=WearSums.empty)
    points: list[tuple[float, float]] = field(default_factory=list)
    last_read_at: dt.datetime | None = None
    last_mass_kg: float | None = None
    last_bond: float | None = None

    def take(self, reading: tuple[Any, ...], opened_at: dt.datetime, x: float) -> None:
        _, mass_g, percent, bond, replaced, _ = reading
        mass_kg = _mass_kg(self.new_kg, mass_g, percent)
        if mass_kg is None:
            return
        self.points.append((max(0.0, x - self.at_fit), mass_kg))
        self.last_read_at, self.last_mass_kg, self.last_bond = opened_at, mass_kg, bond
        if replaced:
            self.fitted_at, self.at_fit, self.last_mass_kg = opened_at, x, self.new_kg
            # The bond measured at this visit was the old anode's; the new one has none yet.
            self.last_bond = None
            self.sums, self.points = WearSums.empty(), [(0.0, self.new_kg)]

    def settled(self) -> "_Anode":
        """The points added to the sums; a copy that can be walked on independently."""
        self.sums, self.points = self.sums.extend(self.points), []
        return replace(self, points=[])

    def values(self) -> tuple[object, ...]:
        s = self.settled().sums
        return (
            self.fitted_at, self.at_fit, s.n, s.sum_x, s.sum_y, s.sum_xx, s.sum_xy, s.sum_yy,
            self.last_read_at, self.last_mass_kg, self.last_bond,
        )  # fmt: skip

    def write(self, row: AnodeState, prefix: str = "") -> None:
        for name, value in zip(_ANODE_FIELDS, self.values(), strict=True):
            setattr(row, prefix + name, value)

    @classmethod
    def read(cls, row: AnodeState, new_kg: float, prefix: str = "") -> "_Anode":
        v = [getattr(row, prefix + name) for name in _ANODE_FIELDS]
        return cls(new_kg, v[0], v[1], WearSums(*v[2:8]), [], v[8], v[9], v[10])


def _new_kg(unit: Transponder) -> dict[int, float]:
    return {p.pk: p.new_net_mass_g / 1000.0 for p in unit.variant.anode_positions.all()}


def _walk(
    anodes: dict[int, _Anode],
    readings: list[tuple[Any, ...]],
    visits: dict[int, dt.datetime],
    x_at: dict[int, float],
) -> None:
    for reading in readings:
        record_id = reading[5]
        anodes[reading[0]].take(reading, visits[record_id], x_at[record_id])


def _refresh_anodes(
    unit: Transponder,
    intervals: list[tuple[dt.datetime, dt.datetime | None]],
    visits: dict[int, dt.datetime],
) -> None:
    """Step 2: rewrite the unit's anode rows from its readings, read as plain values (no
    model per reading, no date per reading: ``visits`` holds each visit's opening) with
    every visit's immersed days found in one pass. Each row also keeps its base: the same
    over every visit but the latest, from which a save of that visit starts."""
    new_kg = _new_kg(unit)
    readings = list(
        unit_readings(unit, list(new_kg))
        .order_by("record__opened_at", "pk")
        .values_list(*_READING_FIELDS)
    )
    x_at = dict(zip(visits, immersed_days_at_each(intervals, visits.values()), strict=True))
    latest = max(visits, key=lambda pk: (visits[pk], pk), default=None)
    anodes = {pk: _Anode(kg) for pk, kg in new_kg.items()}
    _walk(anodes, [r for r in readings if r[5] != latest], visits, x_at)
    bases = {pk: anode.settled() for pk, anode in anodes.items()}
    latest_at = visits.get(latest) if latest is not None else None
    if any(at == latest_at for pk, at in visits.items() if pk != latest):
        # Another visit opened at the same moment: its readings and the latest's interleave,
        # so the rows are walked again from the start, in the one order.
        anodes = {pk: _Anode(kg) for pk, kg in new_kg.items()}
        _walk(anodes, readings, visits, x_at)
    else:
        _walk(anodes, [r for r in readings if r[5] == latest], visits, x_at)
    rows = []
    for pk, anode in anodes.items():
        row = AnodeState(unit=unit, position_id=pk, base_visit_pk=latest)
        anode.write(row)
        bases[pk].write(row, "base_")
        rows.append(row)
    AnodeState.objects.filter(unit=unit).delete()
    AnodeState.objects.bulk_create(rows)


# A housing opening as (opened at, its visit opened at).
Opening = tuple[dt.datetime, dt.datetime]


def _refresh_seals(unit: Transponder, openings_after: Callable[[dt.datetime], int]) -> None:
    """Step 3: rewrite the unit's seal rows: the last change per position and the openings
    in visits after the one that fitted it (``openings_after``)."""
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
            row.openings_since_fit = openings_after(fitted)
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
    unit: Transponder, voided_by: Callable[[dt.datetime, dt.datetime], bool]
) -> tuple[PressureTest | None, bool]:
    """Step 5: the last pressure test, and whether an opening after it voids it
    (``voided_by(end of the hold, its visit's opening)``)."""
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
        voided = voided_by(tested_at, visit_at)
    return last_test, voided


def _appendable(unit: Transponder, visit: ServiceRecord) -> UnitState | None:
    """The unit's stored state, if ``visit`` comes after everything else the unit has: no
    other visit opened at or after it, no deployment open, going over or back after it."""
    state = UnitState.objects.filter(unit=unit).first()
    if state is None or state.open_deployment_id is not None:
        return None
    moment = visit.opened_at
    later_visit = (
        ServiceRecord.objects.filter(unit=unit, opened_at__gte=moment).exclude(pk=visit.pk).exists()
    )
    later_deployment = (
        Deployment.objects.filter(unit=unit)
        .filter(
            Q(recovered_at__isnull=True) | Q(recovered_at__gt=moment) | Q(over_side_at__gte=moment)
        )
        .exists()
    )
    return None if later_visit or later_deployment else state


def _anodes_after_visit(
    unit: Transponder, visit: ServiceRecord, *, new_visit: bool, x: float
) -> bool:
    """Step 2 for a save of the unit's latest visit: each row's base (every other visit: the
    row as stored when the visit is new, else its stored base) plus the visit's readings.
    False, with nothing written, if the stored rows cannot serve as the base."""
    new_kg = _new_kg(unit)
    rows = list(AnodeState.objects.filter(unit=unit))
    if sorted(r.position_id for r in rows) != sorted(new_kg):
        return False
    if not new_visit and any(r.base_visit_pk != visit.pk for r in rows):
        return False
    readings = list(
        AnodeReading.objects.filter(record=visit, position_id__in=list(new_kg))
        .order_by("pk")
        .values_list(*_READING_FIELDS)
    )
    for row in rows:
        base = _Anode.read(row, new_kg[row.position_id], "" if new_visit else "base_")
        anode = replace(base, points=[])
        _walk({row.position_id: anode}, [r for r in readings if r[0] == row.position_id],
              {visit.pk: visit.opened_at}, {visit.pk: x})  # fmt: skip
        anode.write(row)
        base.write(row, "base_")
        row.base_visit_pk = visit.pk
    fields = [*_ANODE_FIELDS, *("base_" + f for f in _ANODE_FIELDS), "base_visit_pk"]
    AnodeState.objects.bulk_update(rows, fields)
    return True


def _tests_and_checks(
    unit: Transponder, voided_by: Callable[[dt.datetime, dt.datetime], bool]
) -> dict[str, object]:
    """Step 5's fields of the unit's state row."""
    last_test, voided = _last_pressure_test(unit, voided_by)
    latest_check = _latest_checks(unit)
    return {
        "last_pressure_test": last_test,
        "test_voided_by_opening": voided,
        "last_release_test": (
            ReleaseTest.objects.filter(record__unit=unit).order_by("-tested_on", "-pk").first()
        ),
        "last_temperature_check_id": latest_check.get(SensorCheck.Sensor.TEMPERATURE),
        "last_pressure_check_id": latest_check.get(SensorCheck.Sensor.PRESSURE),
        "last_tilt_check_id": latest_check.get(SensorCheck.Sensor.TILT),
    }


def _refresh_after_visit(
    unit: Transponder, visit: ServiceRecord, *, new_visit: bool, at: dt.datetime
) -> UnitState | None:
    """The state after a save of the unit's latest visit, from the stored rows and that
    visit's entries, in a number of queries and rows that does not grow with the history;
    None (nothing written) when the save is not at the end of the history.

    The deployments are unchanged and all ended by the visit, so the deployment fields stay
    and the visit's immersed days are the closed total (the same float ``immersed_days_at_each``
    gives: the same spans, added in the same order). Seal openings and the pressure test's
    voiding are counted in SQL; the pack's tally reads only deployments since its day."""
    state = _appendable(unit, visit)
    if state is None or not _anodes_after_visit(
        unit, visit, new_visit=new_visit, x=state.immersed_days_closed
    ):
        return None
    openings = HousingOpening.objects.filter(record__unit=unit)
    counted: dict[dt.datetime, int] = {}

    def openings_after(fitted: dt.datetime) -> int:
        if fitted not in counted:
            counted[fitted] = openings.filter(record__opened_at__gt=fitted).count()
        return counted[fitted]

    _refresh_seals(unit, openings_after)
    pack = BatteryInstall.objects.filter(unit=unit, removal__isnull=True).first()
    since_pack = (
        Deployment.objects.filter(unit=unit, recovered_at__gt=start_of(pack.installed_on))
        if pack is not None
        else Deployment.objects.none()
    )
    recovered = [(d, d.recovered_at) for d in since_pack.order_by("over_side_at") if d.recovered_at]
    values: dict[str, object] = {"refreshed_at": at, "as_of": visit.opened_at, "pack": pack}
    values["pack_charge_used_ah"], values["pack_releases"] = _pack_tally(unit, pack, recovered)
    values["last_opening_at"] = openings.aggregate(last=Max("opened_at"))["last"]
    values |= _tests_and_checks(
        unit,
        lambda tested, visit_at: openings.filter(
            Q(opened_at__gt=tested) | Q(record__opened_at__gt=visit_at)
        ).exists(),
    )
    for name, value in values.items():
        setattr(state, name, value)
    state.save(update_fields=[name.removesuffix("_id") for name in values])
    return state


@transaction.atomic
def refresh_unit_state(
    unit: Transponder,
    *,
    at: dt.datetime,
    visit: ServiceRecord | None = None,
    new_visit: bool = False,
) -> UnitState:
    """Rewrite the unit's state rows. ``visit``: the write only changed that visit's entries
    (``new_visit``: it was created by the write); if the visit comes after everything else
    the unit has, the rows are brought forward from the stored ones (``_refresh_after_visit``),
    else, and for every other write, derived again from the whole history."""
    if visit is not None:
        state = _refresh_after_visit(unit, visit, new_visit=new_visit, at=at)
        if state is not None:
            return state
    return _refresh_whole(unit, at=at)


def _refresh_whole(unit: Transponder, *, at: dt.datetime) -> UnitState:
    """Rewrite the unit's state rows from its whole history, in a constant number of
    queries: the readings are read as plain values, the other records only as far as the
    state needs them."""
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
    _refresh_seals(unit, lambda fitted: sum(1 for _, visit in openings if visit > fitted))
    pack_charge, pack_releases = _pack_tally(unit, pack, recovered)
    tests = _tests_and_checks(
        unit,
        lambda tested, visit_at: any(
            opened > tested or visit > visit_at for opened, visit in openings
        ),
    )

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
            "last_opening_at": openings[-1][0] if openings else None,
            **tests,
        },
    )
    return state
