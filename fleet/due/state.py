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
   (``hold_end``); last release test and sensor checks.
6. The unit's last event (``as_of``): the latest moment a deployment went over the side or
   came back, or a bench visit opened. Every projection runs from there (``duty.py``).

The records are read as plain values by ``read_inputs``, for one unit or for a chunk of
units in the same constant number of queries, and each unit's rows are derived alone by
``derive`` (no query), so a write and ``rebuild_state`` run one derivation. A save at the end
of the history brings the stored rows forward instead (``_refresh_after_visit``). A
whole-fleet evaluation then reads one row per item.
"""

import datetime as dt
from collections.abc import Callable, Iterable, Iterator
from dataclasses import dataclass, field, replace
from itertools import groupby
from operator import itemgetter
from typing import Any

from django.db import transaction
from django.db.models import Exists, F, Max, Q, QuerySet
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
from fleet.models.bulk import insert_instances, update_instances
from fleet.models.functions import AsStored, Instant

from .days import OPEN_END, start_of
from .duty import charge_per_reply_as, replies_in, replies_per_day


def hold_end(tested_on: dt.date, hold_ended_at: dt.time | None) -> dt.datetime:
    """When a pressure test's hold ended: its date and time of day, or the start of its day
    when no time was given (so any opening that day voids it: the safe side)."""
    if hold_ended_at is None:
        return start_of(tested_on)
    return timezone.make_aware(dt.datetime.combine(tested_on, hold_ended_at))


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


_READING_FIELDS = (
    "position_id", "mass_g", "remaining_percent", "bond_resistance_ohm", "replaced", "record_id",
)  # fmt: skip


def _reading_columns() -> tuple[str | AsStored, ...]:
    """``_READING_FIELDS`` as read: ``replaced`` is only tested, so it is read as stored
    (0 or 1 on SQLite), with no conversion per reading (a million in a rebuild)."""
    return tuple(AsStored(f) if f == "replaced" else f for f in _READING_FIELDS)


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

    def settled(self) -> "_Anode":
        """The points added to the sums; a copy that can be walked on independently."""
        self.sums, self.points = self.sums.extend(self.points), []
        return _Anode(
            self.new_kg, self.fitted_at, self.at_fit, self.sums, [],
            self.last_read_at, self.last_mass_kg, self.last_bond,
        )  # fmt: skip

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
    """Each reading (``_READING_FIELDS``), oldest first, taken by its position's anode: a
    point (immersed days since the anode was fitted, mass kg) and the last reading. A
    reading marked *replaced* ends that anode: the sums restart from (0, new mass) there."""
    for position_id, mass_g, percent, bond, replaced, record_id in readings:
        anode = anodes[position_id]
        if mass_g is not None:
            mass_kg = mass_g / 1000.0
        elif percent is not None:
            mass_kg = anode.new_kg * percent / 100.0
        else:
            continue
        opened_at = visits[record_id]
        x = x_at[record_id]
        since_fit = x - anode.at_fit
        anode.points.append((since_fit if since_fit > 0.0 else 0.0, mass_kg))
        anode.last_read_at, anode.last_mass_kg, anode.last_bond = opened_at, mass_kg, bond
        if replaced:
            anode.fitted_at, anode.at_fit, anode.last_mass_kg = opened_at, x, anode.new_kg
            # The bond measured at this visit was the old anode's; the new one has none yet.
            anode.last_bond = None
            anode.sums, anode.points = WearSums.empty(), [(0.0, anode.new_kg)]


# --- the inputs ---------------------------------------------------------------------------
# The derivation reads each unit's records as plain values, for one unit (a write) or for a
# chunk of units at once (``rebuild_state``) through the same readers: a constant number of
# queries per call, whatever the number of units or the length of their histories.

# The orderings that pick "the latest": written once, for the SQL of every reader.
_FITTED_PACK_ORDER = ("-installed_on", "-pk")
_PRESSURE_ORDER = ("-tested_on", "-record__opened_at", "-pk")
_RELEASE_ORDER = ("-tested_on", "-pk")
# (pk, tested on, hold ended at, its visit opened at)
PressureRow = tuple[int, dt.date, dt.time | None, dt.datetime]
# (position, its visit opened at, cure date, material)
SealChangeRow = tuple[int, dt.datetime, dt.date | None, str]
# A housing opening as (opened at, its visit opened at).
Opening = tuple[dt.datetime, dt.datetime]
# A deployment as (pk, over the side, recovered or None).
Span = tuple[int, dt.datetime, dt.datetime | None]
# Ids in one ``IN (...)`` at most (SQLite's old bound on parameters, with room to spare).
_IN_BATCH = 900


@dataclass(slots=True)
class UnitInputs:
    """Everything the state of one unit is derived from (``derive``)."""

    pack_pk: int | None = None  # the fitted pack, as read first
    pack: BatteryInstall | None = None
    spans: list[Span] = field(default_factory=list)  # every deployment, in time order
    # As records, only those the state names or charges to the pack (``_needed``).
    deployments: list[Deployment] = field(default_factory=list)
    visits: dict[int, dt.datetime] = field(default_factory=dict)  # pk -> opened at
    readings: list[tuple[Any, ...]] = field(default_factory=list)  # _READING_FIELDS, in order
    seal_changes: list[SealChangeRow] = field(default_factory=list)  # oldest first
    openings: list[Opening] = field(default_factory=list)  # oldest first
    release_tests: list[tuple[int, dt.date]] = field(default_factory=list)  # latest first
    last_pressure_test: PressureRow | None = None
    checks: list[tuple[str, int]] = field(default_factory=list)  # (sensor, pk), oldest first


def fitted_pack(unit: Transponder) -> BatteryInstall | None:
    """The pack no removal has taken out (the latest fitted, should there be more)."""
    return (
        BatteryInstall.objects.filter(unit=unit, removal__isnull=True)
        .order_by(*_FITTED_PACK_ORDER)
        .first()
    )


# A reader's rows, each (unit id, *values), ordered by unit id first.
Rows = QuerySet[Any, tuple[Any, ...]]


def _packs(units: Q) -> Rows:
    installs = BatteryInstall.objects.filter(units, removal__isnull=True)
    return installs.order_by("unit_id", *_FITTED_PACK_ORDER).values_list("unit_id", "pk")


def _spans(units: Q) -> Rows:
    return (
        Deployment.objects.filter(units)
        .order_by("unit_id", "over_side_at", "pk")
        .values_list("unit_id", "pk", Instant("over_side_at"), Instant("recovered_at"))
    )


def _visits(units: Q) -> Rows:
    return (
        ServiceRecord.objects.filter(units)
        .order_by("unit_id", "pk")
        .values_list("unit_id", "pk", Instant("opened_at"))
    )


def _readings(units: Q) -> Rows:
    """Every anode reading of the units (``_anode_rows`` keeps those at the positions of the
    unit's variant: a reading is only ever taken at one of them)."""
    return (
        AnodeReading.objects.filter(units)
        .order_by("record__unit_id", "record__opened_at", "pk")
        .values_list("record__unit_id", *_reading_columns())
    )


def _seal_change_rows(units: Q) -> Rows:
    return (
        SealChange.objects.filter(units)
        .order_by("record__unit_id", "record__opened_at", "pk")
        .values_list("record__unit_id", "position_id", "record__opened_at", "cure_date", "material")
    )


def _openings(units: Q) -> Rows:
    return (
        HousingOpening.objects.filter(units)
        .order_by("record__unit_id", "opened_at", "pk")
        .values_list("record__unit_id", "opened_at", "record__opened_at")
    )


def _release_tests(units: Q) -> Rows:
    return (
        ReleaseTest.objects.filter(units)
        .order_by("record__unit_id", *_RELEASE_ORDER)
        .values_list("record__unit_id", "pk", "tested_on")
    )


def _pressure_tests(units: Q) -> Rows:
    return (
        PressureTest.objects.filter(units)
        .order_by("record__unit_id", *_PRESSURE_ORDER)
        .values_list("record__unit_id", "pk", "tested_on", "hold_ended_at", "record__opened_at")
    )


def _check_rows(units: Q) -> Rows:
    return (
        SensorCheck.objects.filter(units)
        .order_by("record__unit_id", "checked_on", "pk")
        .values_list("record__unit_id", "sensor", "pk")
    )


def _values(rows: Iterator[tuple[Any, ...]]) -> list[Any]:
    """A unit's rows without their unit id."""
    return [row[1:] for row in rows]


def _set_pack(inputs: UnitInputs, rows: Iterator[tuple[Any, ...]]) -> None:
    inputs.pack_pk = next(rows)[1]  # the latest fitted, should there be more


def _set_spans(inputs: UnitInputs, rows: Iterator[tuple[Any, ...]]) -> None:
    inputs.spans = _values(rows)


def _set_visits(inputs: UnitInputs, rows: Iterator[tuple[Any, ...]]) -> None:
    inputs.visits = {pk: opened for _, pk, opened in rows}


def _set_readings(inputs: UnitInputs, rows: Iterator[tuple[Any, ...]]) -> None:
    inputs.readings = _values(rows)


def _set_seal_changes(inputs: UnitInputs, rows: Iterator[tuple[Any, ...]]) -> None:
    inputs.seal_changes = _values(rows)


def _set_openings(inputs: UnitInputs, rows: Iterator[tuple[Any, ...]]) -> None:
    inputs.openings = _values(rows)


def _set_release_tests(inputs: UnitInputs, rows: Iterator[tuple[Any, ...]]) -> None:
    inputs.release_tests = _values(rows)


def _set_pressure_test(inputs: UnitInputs, rows: Iterator[tuple[Any, ...]]) -> None:
    inputs.last_pressure_test = next(rows)[1:]  # the latest


def _set_checks(inputs: UnitInputs, rows: Iterator[tuple[Any, ...]]) -> None:
    inputs.checks = _values(rows)


# Every kind of record the state reads: its rows for the units a filter selects, where a
# unit's rows go in its inputs, and the path of the unit id the filter names.
_Reader = tuple[Callable[[Q], Rows], Callable[[UnitInputs, Iterator[tuple[Any, ...]]], None], str]
_READERS: tuple[_Reader, ...] = (
    (_packs, _set_pack, "unit_id"),
    (_spans, _set_spans, "unit_id"),
    (_visits, _set_visits, "unit_id"),
    (_readings, _set_readings, "record__unit_id"),
    (_seal_change_rows, _set_seal_changes, "record__unit_id"),
    (_openings, _set_openings, "record__unit_id"),
    (_release_tests, _set_release_tests, "record__unit_id"),
    (_pressure_tests, _set_pressure_test, "record__unit_id"),
    (_check_rows, _set_checks, "record__unit_id"),
)


def _by_unit(rows: Iterable[tuple[Any, ...]]) -> Iterator[tuple[int, Iterator[tuple[Any, ...]]]]:
    return groupby(rows, key=itemgetter(0))


def _seal_changes(unit_ids: list[int]) -> dict[int, list[SealChangeRow]]:
    rows = _seal_change_rows(Q(record__unit_id__in=unit_ids))
    return {unit_id: _values(group) for unit_id, group in _by_unit(rows)}


def _checks(unit_ids: list[int]) -> dict[int, list[tuple[str, int]]]:
    rows = _check_rows(Q(record__unit_id__in=unit_ids))
    return {unit_id: _values(group) for unit_id, group in _by_unit(rows)}


def _needed(spans: list[Span], pack: BatteryInstall | None) -> list[int]:
    """The deployments read as records: the open one, the last recovered one, and those
    recovered after the pack's day."""
    closed = [pk for pk, _, back in spans if back is not None]
    since = start_of(pack.installed_on) if pack is not None else None
    return [
        pk
        for pk, _, back in spans
        if back is None or (closed and pk == closed[-1]) or (since is not None and back > since)
    ]


def _in_batches(ids: list[int]) -> list[list[int]]:
    return [ids[i : i + _IN_BATCH] for i in range(0, len(ids), _IN_BATCH)]


def read_inputs(units: list[Transponder]) -> dict[int, UnitInputs]:
    """The inputs of ``units`` (their variants' positions loaded or shared), by unit id, in
    a constant number of queries (one per kind of record, more only past 900 packs or
    deployments to read as records): every record read as plain values except the few the
    state names."""
    inputs = {unit.pk: UnitInputs() for unit in units}
    ids = list(inputs)
    for rows, put, unit_path in _READERS:
        for unit_id, group in _by_unit(rows(Q(**{f"{unit_path}__in": ids}))):
            put(inputs[unit_id], group)
    _read_records(inputs)
    return inputs


@dataclass(slots=True)
class _Pass:
    """One kind of record read in one ordered pass: its rows grouped by unit, and the next
    unit's group, not yet handed out."""

    groups: Iterator[tuple[int, Iterator[tuple[Any, ...]]]]
    put: Callable[[UnitInputs, Iterator[tuple[Any, ...]]], None]
    head: tuple[int, Iterator[tuple[Any, ...]]] | None = None

    def __post_init__(self) -> None:
        self.head = next(self.groups, None)

    def give(self, inputs: dict[int, UnitInputs], last: int) -> None:
        """Put the rows of every unit up to ``last`` (by id) in ``inputs``."""
        while self.head is not None and self.head[0] <= last:
            unit_inputs = inputs.get(self.head[0])
            if unit_inputs is not None:  # else a unit not asked for (added since the pass began)
                self.put(unit_inputs, self.head[1])
            self.head = next(self.groups, None)


class FleetInputs:
    """The inputs of every unit, read in one ordered pass per kind of record (each query run
    once for the whole fleet, its rows fetched a batch at a time: a server-side cursor on
    PostgreSQL) and handed out by chunks of units in increasing id order (``read``: the same
    inputs as ``read_inputs`` gives for the chunk). Open it inside the transaction that has
    locked the units: its reads see the records as they are then."""

    FETCH = 2000  # rows fetched at a time from each pass

    def __init__(self) -> None:
        self._passes = [
            _Pass(_by_unit(rows(Q()).iterator(chunk_size=self.FETCH)), put)
            for rows, put, _ in _READERS
        ]

    def read(self, units: list[Transponder]) -> dict[int, UnitInputs]:
        """The inputs of ``units``, which come after every unit read before (by id)."""
        inputs = {unit.pk: UnitInputs() for unit in units}
        if inputs:
            last = max(inputs)
            for one_pass in self._passes:
                one_pass.give(inputs, last)
        _read_records(inputs)
        return inputs


def _read_records(inputs: dict[int, UnitInputs]) -> None:
    """The records the state names: the fitted pack, and the deployments it needs."""
    packs = [i.pack_pk for i in inputs.values() if i.pack_pk is not None]
    for batch in _in_batches(packs):
        for install in BatteryInstall.objects.filter(pk__in=batch):
            inputs[install.unit_id].pack = install
    wanted = [pk for i in inputs.values() for pk in _needed(i.spans, i.pack)]
    for batch in _in_batches(wanted):
        for deployment in (
            Deployment.objects.filter(pk__in=batch)
            .select_related("site")
            .order_by("unit_id", "over_side_at", "pk")
        ):
            inputs[deployment.unit_id].deployments.append(deployment)


# --- the derivation -----------------------------------------------------------------------


def _anode_rows(
    unit: Transponder,
    intervals: list[tuple[dt.datetime, dt.datetime | None]],
    visits: dict[int, dt.datetime],
    all_readings: list[tuple[Any, ...]],
) -> list[AnodeState]:
    """Step 2: the unit's anode rows from its readings, read as plain values (no model per
    reading, no date per reading: ``visits`` holds each visit's opening) with every visit's
    immersed days found in one pass. Each row also keeps its base: the same over every
    visit but the latest, from which a save of that visit starts."""
    new_kg = _new_kg(unit)
    x_at = dict(zip(visits, immersed_days_at_each(intervals, visits.values()), strict=True))
    latest = max(visits, key=lambda pk: (visits[pk], pk), default=None)
    readings: list[tuple[Any, ...]] = []
    earlier: list[tuple[Any, ...]] = []  # the readings of every visit but the latest
    at_latest: list[tuple[Any, ...]] = []
    for r in all_readings:
        if r[0] in new_kg:
            readings.append(r)
            (at_latest if r[5] == latest else earlier).append(r)
    anodes = {pk: _Anode(kg) for pk, kg in new_kg.items()}
    _walk(anodes, earlier, visits, x_at)
    bases = {pk: anode.settled() for pk, anode in anodes.items()}
    latest_at = visits.get(latest) if latest is not None else None
    if any(at == latest_at for pk, at in visits.items() if pk != latest):
        # Another visit opened at the same moment: its readings and the latest's interleave,
        # so the rows are walked again from the start, in the one order.
        anodes = {pk: _Anode(kg) for pk, kg in new_kg.items()}
        _walk(anodes, readings, visits, x_at)
    else:
        _walk(anodes, at_latest, visits, x_at)
    rows = []
    for pk, anode in anodes.items():
        row = AnodeState(unit=unit, position_id=pk, base_visit_pk=latest)
        anode.write(row)
        bases[pk].write(row, "base_")
        rows.append(row)
    return rows


def _seal_rows(
    unit: Transponder, changes: list[SealChangeRow], openings_after: Callable[[dt.datetime], int]
) -> list[SealState]:
    """Step 3: the unit's seal rows: the last change per position and the openings in
    visits after the one that fitted it (``openings_after``)."""
    latest_change: dict[int, tuple[dt.datetime, dt.date | None, str]] = {}
    for position_id, fitted, cure_date, material in changes:
        latest_change[position_id] = (fitted, cure_date, material)
    seal_rows = []
    for position in unit.variant.seal_positions.all():
        fitted_change = latest_change.get(position.pk)
        row = SealState(unit=unit, position=position)
        if fitted_change is not None:
            fitted, row.cure_date, row.material = fitted_change
            row.fitted_at = fitted
            # Openings during the fitting visit came before the new ring went in.
            row.openings_since_fit = openings_after(fitted)
        seal_rows.append(row)
    return seal_rows


def _write_seals(unit: Transponder, rows: list[SealState]) -> None:
    SealState.objects.filter(unit=unit).delete()
    insert_instances(rows)


def _pack_tally(
    unit: Transponder,
    pack: BatteryInstall | None,
    recovered: list[tuple[Deployment, dt.datetime]],
    release_tests: int,
) -> tuple[float, int]:
    """Step 4: the fitted pack's charge used (A h) and its release operations, over the
    recovered deployments since it went in (``recovered`` holds at least every deployment
    recovered after the pack's day, in time order); ``release_tests``: those tested since
    the pack's day."""
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
    pack_releases += release_tests
    pack_charge = (
        charge_used_ah(
            hours, variant.listen_current_a, 0, 0.0, pack_releases, variant.release_charge_as
        )
        + replies_charge
    )
    return pack_charge, pack_releases


def _tests_and_checks(
    last_test: PressureRow | None,
    last_release: int | None,
    checks: list[tuple[str, int]],
    voided_by: Callable[[dt.datetime, dt.datetime], bool],
) -> dict[str, object]:
    """Step 5's fields of the unit's state row: the last pressure test, and whether an
    opening after it voids it (``voided_by(end of the hold, its visit's opening)``); the
    last release test; the latest check of each sensor."""
    voided = False
    if last_test is not None:
        pk, tested_on, hold_ended_at, visit_at = last_test
        voided = voided_by(hold_end(tested_on, hold_ended_at), visit_at)
    latest: dict[str, int] = {}
    for sensor, pk in checks:
        latest[sensor] = pk
    return {
        "last_pressure_test_id": last_test[0] if last_test is not None else None,
        "test_voided_by_opening": voided,
        "last_release_test_id": last_release,
        "last_temperature_check_id": latest.get(SensorCheck.Sensor.TEMPERATURE),
        "last_pressure_check_id": latest.get(SensorCheck.Sensor.PRESSURE),
        "last_tilt_check_id": latest.get(SensorCheck.Sensor.TILT),
    }


@dataclass(slots=True)
class Derived:
    """One unit's state rows, unsaved."""

    state: UnitState
    anodes: list[AnodeState]
    seals: list[SealState]


def derive(unit: Transponder, inputs: UnitInputs, *, at: dt.datetime) -> Derived:
    """The unit's state rows from its whole history (``read_inputs``); no query when the
    unit's variant comes with its positions and reply steps loaded."""
    pack = inputs.pack
    intervals = [(over, back) for _, over, back in inputs.spans]
    closed_intervals = [(over, back) for over, back in intervals if back is not None]
    deployments = inputs.deployments
    recovered = [(d, d.recovered_at) for d in deployments if d.recovered_at is not None]
    open_deployment = next((d for d in deployments if d.recovered_at is None), None)
    visits = inputs.visits
    openings = inputs.openings
    anodes = _anode_rows(unit, intervals, visits, inputs.readings)
    seals = _seal_rows(
        unit,
        inputs.seal_changes,
        lambda fitted: sum(1 for _, visit in openings if visit > fitted),
    )
    since_pack = sum(1 for _, on in inputs.release_tests if on >= pack.installed_on) if pack else 0
    pack_charge, pack_releases = _pack_tally(unit, pack, recovered, since_pack)
    tests = _tests_and_checks(
        inputs.last_pressure_test,
        inputs.release_tests[0][0] if inputs.release_tests else None,
        inputs.checks,
        lambda tested, visit_at: any(
            opened > tested or visit > visit_at for opened, visit in openings
        ),
    )
    events = [over for over, _ in intervals] + [back for _, back in closed_intervals]
    events += visits.values()
    duty = open_deployment or (recovered[-1][0] if recovered else None)
    state = UnitState(
        unit=unit,
        refreshed_at=at,
        as_of=max(events, default=None),
        immersed_days_closed=immersed_days(closed_intervals, OPEN_END),
        first_over_side_at=intervals[0][0] if intervals else None,
        open_deployment=open_deployment,
        duty_deployment=duty,
        duty_replies_per_day=replies_per_day(duty) if duty else None,
        duty_site=duty.site if duty else None,
        pack=pack,
        pack_charge_used_ah=pack_charge,
        pack_releases=pack_releases,
        last_opening_at=openings[-1][0] if openings else None,
        **tests,
    )
    return Derived(state, anodes, seals)


def write_derived(unit_ids: list[int], derived: list[Derived]) -> None:
    """Replace the state rows of ``unit_ids`` with ``derived``, in bulk."""
    for model in (UnitState, AnodeState, SealState):
        model.objects.filter(unit_id__in=unit_ids).delete()
    insert_instances([d.state for d in derived])
    insert_instances([r for d in derived for r in d.anodes])
    insert_instances([r for d in derived for r in d.seals])


def refresh_states(
    units: list[Transponder],
    *,
    at: dt.datetime,
    read: Callable[[list[Transponder]], dict[int, UnitInputs]] = read_inputs,
) -> list[Derived]:
    """Derive every unit's state rows again from its whole history and write them: the
    inputs read for all of ``units`` at once, each unit derived alone (``derive``, as for
    one unit), the rows written in bulk. Run inside a transaction that locks the units.
    The rows written, in the order of ``units``. ``read``: ``read_inputs``, or a whole
    fleet's ``FleetInputs.read``."""
    inputs = read(units)
    derived = [derive(unit, inputs[unit.pk], at=at) for unit in units]
    write_derived([unit.pk for unit in units], derived)
    return derived


def attach_named_records(derived: list[Derived]) -> None:
    """Give each state row the tests and checks it names, as records (three queries for
    any number of rows; its deployments, site and pack are records already), so that the
    rows can be evaluated as derived, with no read back (``engine.evaluate_unit``)."""
    states = [d.state for d in derived]
    tests = PressureTest.objects.in_bulk([s.last_pressure_test_id for s in states])
    releases = ReleaseTest.objects.in_bulk([s.last_release_test_id for s in states])
    check_ids = [getattr(s, f"{name}_id") for s in states for name in _CHECK_NAMES]
    checks = SensorCheck.objects.in_bulk([pk for pk in check_ids if pk is not None])
    for s in states:
        s.last_pressure_test = tests.get(s.last_pressure_test_id)
        s.last_release_test = releases.get(s.last_release_test_id)
        for name in _CHECK_NAMES:
            setattr(s, name, checks.get(getattr(s, f"{name}_id")))


_CHECK_NAMES = ("last_temperature_check", "last_pressure_check", "last_tilt_check")


# --- a save at the end of the history -----------------------------------------------------


def _appendable(unit: Transponder, visit: ServiceRecord) -> UnitState | None:
    """The unit's stored state, if ``visit`` comes after everything else the unit has: no
    other visit opened at or after it, no deployment open, going over or back after it.
    One query: the state row with whether each kind of later record exists."""
    moment = visit.opened_at
    later_visit = ServiceRecord.objects.filter(unit=unit, opened_at__gte=moment).exclude(
        pk=visit.pk
    )
    later_deployment = Deployment.objects.filter(unit=unit).filter(
        Q(recovered_at__isnull=True) | Q(recovered_at__gt=moment) | Q(over_side_at__gte=moment)
    )
    state = (
        UnitState.objects.filter(unit=unit)
        .annotate(later_visit=Exists(later_visit), later_deployment=Exists(later_deployment))
        .first()
    )
    if state is None or state.open_deployment_id is not None:
        return None
    later: Any = state
    return None if later.later_visit or later.later_deployment else state


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
        .values_list(*_reading_columns())
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
    update_instances(rows, fields)
    return True


def _refresh_after_visit(
    unit: Transponder, visit: ServiceRecord, *, new_visit: bool, at: dt.datetime
) -> UnitState | None:
    """The state after a save of the unit's latest visit, from the stored rows and that
    visit's entries, in a number of queries and rows that does not grow with the history;
    None (nothing written) when the save is not at the end of the history.

    The deployments are unchanged and all ended by the visit, so the deployment fields stay
    and the visit's immersed days are the closed total (the same float ``immersed_days_at_each``
    gives: the same spans, added in the same order). A new visit's seals, tests, checks and
    openings are the stored ones brought forward with the visit's own
    (``_latest_after_new_visit``); a visit saved again is read against the unit's whole
    history of them (``_latest_in_history``), counted in SQL. The pack's tally reads only
    deployments and release tests since its day. The rest goes through the same functions
    as ``derive``."""
    state = _appendable(unit, visit)
    if state is None or not _anodes_after_visit(
        unit, visit, new_visit=new_visit, x=state.immersed_days_closed
    ):
        return None
    latest = (_latest_after_new_visit(unit, visit, state) if new_visit else None) or (
        _latest_in_history(unit)
    )
    seal_rows, values = latest
    _write_seals(unit, seal_rows)
    pack = fitted_pack(unit)
    since_pack = (
        Deployment.objects.filter(unit=unit, recovered_at__gt=start_of(pack.installed_on))
        if pack is not None
        else Deployment.objects.none()
    )
    recovered = [(d, d.recovered_at) for d in since_pack.order_by("over_side_at") if d.recovered_at]
    release_tests = ReleaseTest.objects.filter(record__unit=unit)
    values |= {"refreshed_at": at, "as_of": visit.opened_at, "pack": pack}
    values["pack_charge_used_ah"], values["pack_releases"] = _pack_tally(
        unit,
        pack,
        recovered,
        release_tests.filter(tested_on__gte=pack.installed_on).count() if pack else 0,
    )
    for name, value in values.items():
        setattr(state, name, value)
    state.save(update_fields=[name.removesuffix("_id") for name in values])
    return state


# The unit's seal rows, and its state's fields for openings, tests and checks.
_Latest = tuple[list[SealState], dict[str, object]]


def _latest_in_history(unit: Transponder) -> _Latest:
    """Steps 3 and 5 from the unit's whole history of seal changes, openings, tests and
    checks (``derive``'s functions; openings counted in SQL)."""
    openings = HousingOpening.objects.filter(record__unit=unit)
    counted: dict[dt.datetime, int] = {}

    def openings_after(fitted: dt.datetime) -> int:
        if fitted not in counted:
            counted[fitted] = openings.filter(record__opened_at__gt=fitted).count()
        return counted[fitted]

    seal_rows = _seal_rows(unit, _seal_changes([unit.pk]).get(unit.pk, []), openings_after)
    values: dict[str, object] = {
        "last_opening_at": openings.aggregate(last=Max("opened_at"))["last"]
    }
    last_test: PressureRow | None = (
        PressureTest.objects.filter(record__unit=unit)
        .order_by(*_PRESSURE_ORDER)
        .values_list("pk", "tested_on", "hold_ended_at", "record__opened_at")
        .first()
    )
    values |= _tests_and_checks(
        last_test,
        ReleaseTest.objects.filter(record__unit=unit)
        .order_by(*_RELEASE_ORDER)
        .values_list("pk", flat=True)
        .first(),
        _checks([unit.pk]).get(unit.pk, []),
        lambda tested, visit_at: openings.filter(
            Q(opened_at__gt=tested) | Q(record__opened_at__gt=visit_at)
        ).exists(),
    )
    return seal_rows, values


def _latest_after_new_visit(
    unit: Transponder, visit: ServiceRecord, state: UnitState
) -> _Latest | None:
    """``_latest_in_history`` for a new visit after everything else the unit has, from the
    stored rows and the visit's own entries: the same rows and fields (``derive``'s rules),
    in a constant number of queries. None if the stored seal rows are not one per position
    of the variant (they cannot serve as the base).

    - A seal the visit changed was fitted at the visit's opening, with no opening after it
      (no visit comes after this one; openings during the fitting visit came before the new
      ring). Any other keeps its stored fitting, and the visit's openings add to its count
      (the visit opened after the one that fitted it).
    - The last opening is the later of the stored one and the visit's.
    - The last pressure test, release test and check of each sensor: the latest, in the
      order ``derive`` takes, of the stored one and the visit's (the stored one was the
      latest of all before).
    - A stored last test still last is voided if it was, or if the visit has an opening (the
      visit opened after the test's). A test of the visit's own is checked against the
      unit's openings as ``derive`` checks it."""
    positions = list(unit.variant.seal_positions.all())
    stored = {row.position_id: row for row in SealState.objects.filter(unit=unit)}
    if sorted(stored) != sorted(p.pk for p in positions):
        return None
    visit_openings = list(
        HousingOpening.objects.filter(record=visit).values_list("opened_at", flat=True)
    )
    changed: dict[int, tuple[dt.date | None, str]] = {}
    for position_id, cure_date, material in (
        SealChange.objects.filter(record=visit)
        .order_by("pk")
        .values_list("position_id", "cure_date", "material")
    ):
        changed[position_id] = (cure_date, material)
    seal_rows = []
    for position in positions:
        row = SealState(unit=unit, position=position)
        before = stored[position.pk]
        if position.pk in changed:
            row.cure_date, row.material = changed[position.pk]
            row.fitted_at = visit.opened_at
            row.openings_since_fit = 0
        elif before.fitted_at is not None:
            row.fitted_at, row.cure_date, row.material = (
                before.fitted_at, before.cure_date, before.material,
            )  # fmt: skip
            row.openings_since_fit = before.openings_since_fit + len(visit_openings)
        seal_rows.append(row)
    last_opening = max(
        [at for at in (state.last_opening_at, *visit_openings) if at is not None], default=None
    )

    def with_stored(pks: list[int | None]) -> Q:
        return Q(record=visit) | Q(pk__in=[pk for pk in pks if pk is not None])

    last_test: PressureRow | None = (
        PressureTest.objects.filter(with_stored([state.last_pressure_test_id]))
        .order_by(*_PRESSURE_ORDER)
        .values_list("pk", "tested_on", "hold_ended_at", "record__opened_at")
        .first()
    )
    openings = HousingOpening.objects.filter(record__unit=unit)

    def voided_by(tested: dt.datetime, visit_at: dt.datetime) -> bool:
        if last_test is not None and last_test[0] == state.last_pressure_test_id:
            return state.test_voided_by_opening or bool(visit_openings)
        return openings.filter(Q(opened_at__gt=tested) | Q(record__opened_at__gt=visit_at)).exists()

    checks = [getattr(state, f"{name}_id") for name in _CHECK_NAMES]
    values: dict[str, object] = {"last_opening_at": last_opening}
    values |= _tests_and_checks(
        last_test,
        ReleaseTest.objects.filter(with_stored([state.last_release_test_id]))
        .order_by(*_RELEASE_ORDER)
        .values_list("pk", flat=True)
        .first(),
        list(
            SensorCheck.objects.filter(with_stored(checks))
            .order_by("checked_on", "pk")
            .values_list("sensor", "pk")
        ),
        voided_by,
    )
    return seal_rows, values


@transaction.atomic(savepoint=False)
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
    queries: ``refresh_states`` for one unit."""
    derived = derive(unit, read_inputs([unit])[unit.pk], at=at)
    write_derived([unit.pk], [derived])
    return derived.state
