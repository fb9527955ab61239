"""The due engine: for each unit and maintenance item, when it is due and why.

Each unit is read with its derived state (``fleet/models/state.py``) in a constant number of
queries, and every projection runs from the unit's last event (``duty.py``), so a due date
is a function of the records alone: computing it again on any later day gives the same date.
Only its *state* (overdue, due soon...) depends on the day it is read (``items.classify``).

- **Anode** per position: the wear line (``calc.anodes.fit_wear_from_sums``) through the
  readings against immersed days since the anode was fitted, falling back to the design
  rate (``design_current_a`` and the alloy's capacity, DNV-RP-B401 Table 10-6) while there
  are too few readings. The immersed days left to the replace-at mass are spread over the
  calendar at the unit's duty. Flags: wear faster than design × factor (a bonding fault or a
  dissimilar-metal contact); a bond resistance above the limit is a fault.
- **Seal** per position: ``calc.seals.seal_due``: calendar interval from the fitting visit,
  elastomer shelf life from the cure date, openings since fitting.
- **Battery**: usable capacity of the fitted pack (``calc.battery.usable_capacity_ah``) less
  the charge used, run down at the duty's daily charge in the water and by self-discharge
  every day, to the reserve.
- **Pressure test**, **release test**, **sensor checks**: judged by ``acceptance.py``; valid
  for their configured interval from the test date.

A fault found (a failed or voided test, a bond fault, openings used up) makes the item due
on the day the fault was recorded, so it reads overdue from then on.
"""

from __future__ import annotations

import datetime as dt
import functools
import math
from collections.abc import Iterable
from dataclasses import dataclass, field
from typing import NamedTuple

from django.db.models import Prefetch, QuerySet

from fleet.calc import anodes as calc_anodes
from fleet.calc import battery as calc_battery
from fleet.calc import seals as calc_seals
from fleet.formatting import clauses, quantity
from fleet.models import (
    AnodeAlloy,
    AnodePosition,
    AnodeState,
    PressureTest,
    SealState,
    SensorCheck,
    Transponder,
    UnitHold,
    UnitState,
    Variant,
)
from fleet.models.session import written_join_order

from .acceptance import (
    pressure_test_acceptance,
    release_test_failures,
    release_valid_to,
    sensor_check_failures,
)
from .days import add_days, add_months, days_between, local_day, start_of
from .duty import Duty, charge_per_reply_as, duty_of
from .facts import AnodeRowFacts, PressureTestFacts, StateFacts, UnitFacts
from .items import DueItem, DueState, ItemKind, classify
from .rules import Rules, rules_for
from .state import Derived

CHEMISTRY_KEY = {
    "alkaline": "alkaline_zn_mno2",
    "li_socl2": "li_socl2_bobbin",
    "li_mno2": "li_mno2",
}
SENSOR_FLAGS = (
    (SensorCheck.Sensor.TEMPERATURE, "has_temperature_sensor", "last_temperature_check"),
    (SensorCheck.Sensor.PRESSURE, "has_pressure_sensor", "last_pressure_check"),
    (SensorCheck.Sensor.TILT, "has_tilt_sensor", "last_tilt_check"),
)
# Units that are off the books for maintenance.
INACTIVE = {UnitHold.RETIRED, UnitHold.LOST}


@dataclass(frozen=True, slots=True)
class Outcome:
    """What a rule found for one item, before it is labelled for its unit."""

    due_on: dt.date | None
    basis: str
    flags: tuple[str, ...] = ()
    failed: bool = False


def state_of(unit: Transponder) -> UnitState | None:
    """The unit's derived state row, or None before its first write."""
    try:
        return unit.state
    except UnitState.DoesNotExist:
        return None


# --- anodes -------------------------------------------------------------------------------


class AnodeProjection(NamedTuple):
    position_id: int
    name: str
    new_kg: float
    threshold_kg: float
    replace_at_percent: float
    fit: calc_anodes.WearFit | None
    immersed_days_since_fit: float
    mass_now_kg: float | None  # at the unit's last event
    remaining_immersed_days: float | None
    bond_resistance_ohm: float | None
    last_read_at: dt.datetime | None
    design_rate_kg_per_day: float | None

    def mass_after_kg(self, more_immersed_days: float) -> float | None:
        """Projected mass after ``more_immersed_days`` more in the water."""
        if self.fit is None or self.fit.rate_kg_per_day is None:
            return self.mass_now_kg
        mass = self.fit.mass_at_kg(self.immersed_days_since_fit + max(0.0, more_immersed_days))
        return None if mass is None else max(0.0, mass)

    def bond_fault(self, rules: Rules) -> bool:
        return (
            self.bond_resistance_ohm is not None
            and self.bond_resistance_ohm > rules.bond_resistance_limit_ohm
        )


@functools.lru_cache(maxsize=1024)
def _position_figures(
    new_net_mass_g: float, replace_at_percent: float, design_current_a: float | None, alloy: str
) -> tuple[float, float, float | None]:
    """An anode position's new mass and replace-at mass (kg) and design wear rate (kg per
    immersed day, None without a design current), from its stored columns (``alloy``: the
    stored code): the same for every unit of a variant, so worked out once per set of
    values."""
    new_kg = new_net_mass_g / 1000.0
    threshold = new_kg * replace_at_percent / 100.0
    design_rate = None
    if design_current_a:
        capacity = calc_anodes.alloy(AnodeAlloy(alloy).calc_name).capacity_ah_per_kg
        design_rate = calc_anodes.design_wear_rate_kg_per_day(design_current_a, capacity)
    return new_kg, threshold, design_rate


def anode_projection(row: AnodeState | AnodeRowFacts, rules: Rules, duty: Duty) -> AnodeProjection:
    position = row.position
    new_kg, threshold, design_rate = _position_figures(
        position.new_net_mass_g,
        position.replace_at_remaining_percent,
        position.design_current_a,
        position.alloy,
    )
    since_fit = max(0.0, duty.immersed_days - row.immersed_days_at_fit)
    fit = None
    mass_now = row.last_mass_kg
    remaining_days = None
    if row.n:
        sums = calc_anodes.WearSums(row.n, row.sum_x, row.sum_y, row.sum_xx, row.sum_xy, row.sum_yy)
        fit = calc_anodes.fit_wear_from_sums(sums, design_rate, rules.wear_flag_factor)
        if fit.rate_kg_per_day is not None:
            mass = fit.mass_at_kg(since_fit)
            mass_now = None if mass is None else max(0.0, min(new_kg, mass))
            to_threshold = fit.days_to_mass(threshold)
            remaining_days = None if to_threshold is None else to_threshold - since_fit
    return AnodeProjection(
        position.pk,
        position.name,
        new_kg,
        threshold,
        position.replace_at_remaining_percent,
        fit,
        since_fit,
        mass_now,
        remaining_days,
        row.last_bond_resistance_ohm,
        row.last_read_at,
        design_rate,
    )


def _anode_words(p: AnodeProjection, duty: Duty) -> list[str]:
    assert p.fit is not None
    parts = []
    if p.mass_now_kg is not None and duty.as_of is not None:
        pct_now = 100.0 * p.mass_now_kg / p.new_kg
        parts.append(f"{pct_now:.0f} % remaining on {local_day(duty.as_of)}")
    if p.fit.rate_kg_per_day is not None:
        source = (
            "design rate"
            if p.fit.rate_source == "design"
            else f"fitted to {p.fit.n_points} readings"
        )
        parts.append(f"wearing {p.fit.rate_kg_per_day * 1000.0:.2f} g per immersed day ({source})")
    parts.append(f"replace at {p.replace_at_percent:.0f} %")
    return parts


def anode_outcome(p: AnodeProjection, rules: Rules, duty: Duty) -> Outcome:
    if p.fit is None:
        return Outcome(None, "no reading recorded")
    parts = _anode_words(p, duty)
    flags: list[str] = []
    if p.fit.fast_wear and p.design_rate_kg_per_day and p.fit.rate_kg_per_day:
        ratio = p.fit.rate_kg_per_day / p.design_rate_kg_per_day
        flags.append(
            f"wearing {ratio:.1f}× the design rate: check bonding and dissimilar-metal contact"
        )
    due: dt.date | None = None
    below = p.mass_now_kg is not None and p.mass_now_kg <= p.threshold_kg
    if p.remaining_immersed_days is not None and duty.fraction and duty.as_of is not None:
        due = add_days(duty.as_of, p.remaining_immersed_days / duty.fraction)
        when = "beyond the 200-year horizon" if due is None else str(due)
        reached = "reached" if p.remaining_immersed_days <= 0 else "due"
        parts.append(f"replace-at mass {reached} {when} ({duty.words()})")
    elif below and p.last_read_at is not None:
        due = local_day(p.last_read_at)
        parts.append(f"at or below the replace-at mass when read on {due}")
    elif p.remaining_immersed_days is None:
        parts.append("a second reading, or a design current, is needed for a wear rate")
    else:
        parts.append("not yet deployed: no wear expected in store")
    failed = False
    if p.bond_fault(rules) and p.last_read_at is not None:
        read_on = local_day(p.last_read_at)
        flags.append(
            f"bond resistance {p.bond_resistance_ohm:g} Ω above the "
            f"{rules.bond_resistance_limit_ohm:g} Ω limit"
        )
        due = read_on if due is None else min(due, read_on)
        failed = True
    return Outcome(due, ", ".join(parts), tuple(flags), failed)


# --- battery ------------------------------------------------------------------------------


class BatteryProjection(NamedTuple):
    pack_serial: str
    chemistry: str
    on: dt.date  # the day the figures below are for
    usable_ah: float
    used_ah: float
    remaining_ah: float
    reserve_ah: float
    daily_in_water_ah: float
    self_discharge_daily_ah: float  # in the water, at the working temperature
    store_self_discharge_daily_ah: float  # out of the water, at the store temperature
    temperature_c: float
    age_years: float
    replies_per_day: float
    charge_per_reply_as: float

    def daily_ah(self, fraction_in_water: float) -> float:
        """Charge per calendar day at ``fraction_in_water`` of the time in the water."""
        wet = fraction_in_water * (self.daily_in_water_ah + self.self_discharge_daily_ah)
        return wet + (1.0 - fraction_in_water) * self.store_self_discharge_daily_ah

    def days_to_reserve(self, fraction_in_water: float) -> float:
        per_day = self.daily_ah(fraction_in_water)
        if per_day <= 0:
            return math.inf
        return (self.remaining_ah - self.reserve_ah) / per_day


# Pure functions of a pack's kind, temperatures, age and load: a fleet's packs come in few
# kinds and batches, so a whole-fleet plan meets the same arguments again and again.
@functools.lru_cache(maxsize=4096)
def _usable_capacity_ah(
    spec: calc_battery.PackSpec,
    temperature_c: float,
    age_years: float,
    storage_temperature_c: float,
    mean_load_current_a: float | None,
) -> float:
    """``calc_battery.usable_capacity_ah``, remembered (positional: a cheaper key)."""
    return calc_battery.usable_capacity_ah(
        spec,
        temperature_c,
        age_years,
        storage_temperature_c=storage_temperature_c,
        mean_load_current_a=mean_load_current_a,
    )


_self_discharge_ah_per_day = functools.lru_cache(maxsize=1024)(
    calc_battery.self_discharge_ah_per_day
)
# An immutable, checked pack description: one per kind of pack, shared.
_pack_spec_of = functools.lru_cache(maxsize=1024)(calc_battery.PackSpec)


def _pack_spec(
    unit: Transponder | UnitFacts, state: UnitState | StateFacts
) -> tuple[str, calc_battery.PackSpec]:
    pack = state.pack
    assert pack is not None
    variant = unit.variant
    key = CHEMISTRY_KEY[pack.chemistry]
    return key, _pack_spec_of(
        key,
        variant.cells_in_series,
        variant.parallel_strings,
        pack.capacity_ah / variant.parallel_strings,
    )


def _mean_current_a(
    chem: calc_battery.Chemistry, spec: calc_battery.PackSpec, daily_ah: float
) -> float | None:
    """The duty's mean pack current for the rate curve, held to the curve's top (a heavier
    drain than the handbook curve shows is judged as its heaviest point)."""
    if not chem.d_cell_rate_curve:
        return None
    top = chem.d_cell_rate_curve[-1][0] * spec.parallel_strings
    return min(daily_ah / 24.0, top)


def battery_projection(
    unit: Transponder | UnitFacts,
    state: UnitState | StateFacts,
    rules: Rules,
    duty: Duty,
    steps: dict[int, float],
    *,
    on: dt.date | None = None,
    temperature_c: float | None = None,
    replies_per_day: float | None = None,
    power_step: int | None = None,
) -> BatteryProjection | None:
    """The fitted pack's charge at the unit's last event (or, for a planned deployment, on
    ``on`` with its own site temperature, reply rate and power step)."""
    pack = state.pack
    if pack is None or duty.as_of is None:
        return None
    variant = unit.variant
    key, spec = _pack_spec(unit, state)
    chem = calc_battery.chemistry(key)
    lo, hi = chem.temperature_curve[0][0], chem.temperature_curve[-1][0]
    wanted_t = duty.temperature_c if temperature_c is None else temperature_c
    temperature = min(hi, max(lo, wanted_t))
    store_t = min(hi, max(lo, duty.store_temperature_c))
    rate = duty.replies_per_day if replies_per_day is None else replies_per_day
    step = duty.power_step if power_step is None else power_step
    day = local_day(duty.as_of) if on is None else on
    age = max(0.0, (day - pack.made_on).days / 365.25)
    q_reply = charge_per_reply_as(steps, step)
    daily = calc_battery.charge_used_ah(24.0, variant.listen_current_a, round(rate), q_reply)
    # Capacity at the working temperature and at the mean current of the duty (the rate
    # curve matters for high-drain duty); shelf loss since manufacture at the store's.
    usable = _usable_capacity_ah(
        spec, temperature, min(age, 50.0), store_t, _mean_current_a(chem, spec, daily)
    )
    used = state.pack_charge_used_ah
    open_d = state.open_deployment
    if open_d is not None:
        fitted_from = start_of(pack.installed_on)
        days_open = max(0.0, days_between(max(open_d.over_side_at, fitted_from), duty.as_of))
        used += calc_battery.charge_used_ah(
            days_open * 24.0,
            variant.listen_current_a,
            round(open_d.planned_interrogations_per_day * days_open),
            charge_per_reply_as(steps, open_d.transmit_power_step),
        )
    return BatteryProjection(
        pack_serial=pack.pack_serial,
        chemistry=chem.name,
        on=day,
        usable_ah=usable,
        used_ah=used,
        remaining_ah=usable - used,
        reserve_ah=usable * rules.battery_reserve_fraction,
        daily_in_water_ah=daily,
        self_discharge_daily_ah=_self_discharge_ah_per_day(spec, temperature),
        store_self_discharge_daily_ah=_self_discharge_ah_per_day(spec, store_t),
        temperature_c=temperature,
        age_years=age,
        replies_per_day=rate,
        charge_per_reply_as=q_reply,
    )


def battery_outcome(b: BatteryProjection | None, duty: Duty) -> Outcome:
    if b is None or duty.as_of is None:
        return Outcome(None, "no pack recorded as fitted")
    days = b.days_to_reserve(duty.fraction or 0.0)
    due = add_days(duty.as_of, days)
    when = "beyond the 200-year horizon" if due is None else str(due)
    basis = (
        f"{b.remaining_ah:.1f} Ah of {b.usable_ah:.1f} Ah usable left on {b.on} ({b.chemistry}, "
        f"{b.age_years:.1f} years old, at {b.temperature_c:g} °C); uses "
        f"{b.daily_in_water_ah * 1000:.1f} mAh a day in the water at "
        f"{b.replies_per_day:.0f} replies a day, plus self-discharge; "
        f"reserve {b.reserve_ah:.1f} Ah {'reached' if days <= 0 else 'reached on'} {when}"
        f" ({duty.words()})"
    )
    return Outcome(due, basis)


# --- tests and checks ---------------------------------------------------------------------


def pressure_tested_words(test: PressureTest | PressureTestFacts) -> str:
    """The one phrase that names a pressure test in every basis and check: its date and the
    pressure it held from."""
    return f"tested {test.tested_on} at {quantity(test.start_pressure_dbar, 'dbar', 0)}"


def pressure_outcome(
    unit: Transponder, state: UnitState | None, rules: Rules, duty: Duty
) -> Outcome:
    test = state.last_pressure_test if state else None
    if state is None or test is None:
        return Outcome(None, "no pressure test recorded")
    tested = pressure_tested_words(test)
    if state.test_voided_by_opening and state.last_opening_at is not None:
        opened = local_day(state.last_opening_at)
        return Outcome(
            opened, clauses(tested, f"void: the housing was opened on {opened}"), (), True
        )
    acceptance = pressure_test_acceptance(test, unit.variant, rules)
    if not acceptance.passed:
        reasons = clauses(*acceptance.reasons)
        return Outcome(test.tested_on, clauses(tested, f"not accepted: {reasons}"), (), True)
    due = add_months(test.tested_on, rules.pressure_test_valid_months)
    basis = (
        f"{tested} (proof {rules.proof_factor:g} × rating "
        f"{quantity(unit.variant.depth_rating_m, 'm', 0)} needs "
        f"{quantity(acceptance.required_dbar, 'dbar', 0)}), held "
        f"{quantity(test.hold_minutes, 'min')}, fell "
        f"{quantity(acceptance.hold.drop_percent, '%', 2)}; valid "
        f"{rules.pressure_test_valid_months} months to {due}"
    )
    return Outcome(due, basis)


def release_outcome(state: UnitState | None, rules: Rules) -> Outcome:
    test = state.last_release_test if state else None
    if test is None:
        return Outcome(None, "no release test recorded")
    failures = release_test_failures(test, rules)
    what = f"{test.get_kind_display().lower()} test {test.tested_on}"
    if failures:
        return Outcome(test.tested_on, f"{what} failed: {', '.join(failures)}", (), True)
    due = release_valid_to(test.tested_on, rules)
    basis = clauses(
        f"{what}: released in {quantity(test.seconds_to_release, 's')} at "
        f"{quantity(test.motor_current_a, 'A')}",
        f"valid {rules.release_test_valid_days} days to {due}",
    )
    return Outcome(due, basis)


def sensor_outcome(check: SensorCheck | None, unit: Transponder, rules: Rules) -> Outcome:
    if check is None:
        return Outcome(None, "no check recorded")
    failures = sensor_check_failures(check, unit.variant, rules)
    reading_unit = check.unit_for("unit_reading")
    what = (
        f"checked {check.checked_on}: reads {quantity(check.unit_reading, reading_unit)} "
        f"against {quantity(check.reference_value, reading_unit)}"
    )
    if failures:
        return Outcome(check.checked_on, clauses(what, *failures), (), True)
    due = add_months(check.checked_on, rules.sensor_check_interval_months)
    return Outcome(
        due, clauses(what, f"every {rules.sensor_check_interval_months} months, next {due}")
    )


def seal_outcome(row: SealState, rules: Rules, duty: Duty) -> Outcome:
    position = row.position
    if row.fitted_at is None:
        return Outcome(None, "no seal change recorded")
    fitted_on = local_day(row.fitted_at)
    cure = row.cure_date if row.cure_date and row.cure_date <= fitted_on else None
    result = calc_seals.seal_due(
        fitted_on,
        position.interval_months,
        row.openings_since_fit,
        position.max_openings,
        cure,
        row.material or position.material if cure else None,
        rules.seal_shelf_standard,
    )
    basis = "; ".join(result.reasons)
    if result.openings_exhausted and duty.as_of is not None:
        return Outcome(min(result.due_on, local_day(duty.as_of)), basis, (), True)
    return Outcome(result.due_on, basis)


# --- the fleet ----------------------------------------------------------------------------


@dataclass(slots=True)
class UnitEvaluation:
    unit: Transponder
    rules: Rules
    duty: Duty
    on: dt.date
    anodes: list[AnodeProjection] = field(default_factory=list)
    battery: BatteryProjection | None = None
    items: list[DueItem] = field(default_factory=list)

    @property
    def worst(self) -> DueState:
        return min((i.state for i in self.items), key=lambda s: s.rank, default=DueState.NO_DATA)

    def item(self, key: str) -> DueItem | None:
        return next((i for i in self.items if i.key == key), None)

    @property
    def steps(self) -> dict[int, float]:
        return {s.step: s.charge_per_reply_as for s in self.unit.variant.reply_steps.all()}


# What the engine reads of a unit's variant, and of its state beside the unit row.
VARIANT_PREFETCH = ("anode_positions", "seal_positions", "reply_steps")
_STATE_RELATED = (
    "open_deployment",
    "duty_deployment",
    "duty_site",
    "pack",
    "last_pressure_test",
    "last_release_test",
    "last_temperature_check",
    "last_pressure_check",
    "last_tilt_check",
)
# The same read for a unit already loaded with its variant and place (three queries).
UNIT_STATE_PREFETCH = (
    Prefetch("state", queryset=UnitState.objects.select_related(*_STATE_RELATED)),
    "anode_states",
    "seal_states",
)


def fleet_queryset(
    queryset: QuerySet[Transponder] | None = None, *, share_variants: bool = False
) -> QuerySet[Transponder]:
    """Units with everything the engine reads, in a constant number of queries:
    units with variant, place and state joined (1), anode states (1), seal states (1), and
    the variants' anode positions, seal positions and reply charge steps (1 each).

    ``share_variants`` (for many units): the variants are read by one query of their own
    (one more) and each is one object shared by all its units, so its positions are loaded
    and attached once per variant instead of once per unit."""
    base = queryset if queryset is not None else Transponder.objects.all()
    related = ("place", *(f"state__{name}" for name in _STATE_RELATED))
    if share_variants:
        variants = Variant.objects.prefetch_related(*VARIANT_PREFETCH)
        return base.select_related(*related).prefetch_related(
            "anode_states", "seal_states", Prefetch("variant", queryset=variants)
        )
    return base.select_related("variant", *related).prefetch_related(
        "anode_states", "seal_states", *(f"variant__{name}" for name in VARIANT_PREFETCH)
    )


def loaded_unit(pk: int) -> Transponder:
    """One unit with everything the engine reads (``fleet_queryset``); the unit row with its
    twelve joined rows planned in the written order (``written_join_order``)."""
    with written_join_order():
        return fleet_queryset(Transponder.objects.filter(pk=pk)).get()


@dataclass(frozen=True, slots=True)
class AnodeOutlook:
    """One anode position of a unit as its chart draws it: the projection from the stored
    state row and the unit's duty, the day the replace-at mass is due (``anode_outcome``,
    as the unit's due item), and the unit's last event."""

    unit: Transponder
    position: AnodePosition
    projection: AnodeProjection
    as_of: dt.datetime | None
    due_on: dt.date | None


def anode_outlook_of(ev: UnitEvaluation, position_id: int) -> AnodeOutlook | None:
    """The outlook of ``position_id`` from a whole evaluation (None: not the unit's)."""
    projection = next((p for p in ev.anodes if p.position_id == position_id), None)
    if projection is None:
        return None
    position = next(p for p in ev.unit.variant.anode_positions.all() if p.pk == position_id)
    item = ev.item(f"anode:{position_id}")
    due_on = item.due_on if item is not None else None
    return AnodeOutlook(ev.unit, position, projection, ev.duty.as_of, due_on)


# What ``anode_outlook_of_unit`` reads of the unit, loaded with it.
OUTLOOK_RELATED = (
    "variant",
    "place",
    "state__open_deployment",
    "state__duty_deployment",
    "state__duty_site",
)


def anode_outlook(unit_id: int, position_id: int) -> AnodeOutlook | None:
    """The outlook of one position without evaluating the unit's other items: the unit with
    its variant and the state its duty reads (1 query), then ``anode_outlook_of_unit``."""
    loaded = Transponder.objects.select_related(*OUTLOOK_RELATED).get(pk=unit_id)
    return anode_outlook_of_unit(loaded, position_id)


def anode_outlook_of_unit(loaded: Transponder, position_id: int) -> AnodeOutlook | None:
    """``anode_outlook`` of a unit loaded with ``OUTLOOK_RELATED``: the position's state row
    with the position (1 query; 2 while the unit has no state row for it). The same
    projection and due date as ``evaluate_unit``'s for that position."""
    # The state row with its position (one query), or, if the unit has none for it yet,
    # the position alone.
    row = (
        AnodeState.objects.select_related("position")
        .filter(unit=loaded, position_id=position_id, position__variant_id=loaded.variant_id)
        .first()
    )
    if row is None:
        position = AnodePosition.objects.filter(
            pk=position_id, variant_id=loaded.variant_id
        ).first()
        if position is None:
            return None
        row = AnodeState(unit=loaded, position=position)
    position = row.position
    rules = rules_for(loaded.variant)
    duty = duty_of(loaded, state_of(loaded), rules)
    projection = anode_projection(row, rules, duty)
    due_on = anode_outcome(projection, rules, duty).due_on
    return AnodeOutlook(loaded, position, projection, duty.as_of, due_on)


def sensor_key(sensor: str) -> str:
    return f"sensor:{sensor}"


def evaluate_unit(
    unit: Transponder,
    *,
    on: dt.date,
    rules_cache: dict[int, Rules] | None = None,
    derived: Derived | None = None,
) -> UnitEvaluation:
    """Every due item of ``unit`` (loaded with ``fleet_queryset``), classified on ``on``.
    ``derived``: the unit's state rows as just derived (``state.derive``, with the records
    they name attached), evaluated as they are instead of read back after their write; the
    unit then needs only its variant (with its positions and steps) and place loaded."""
    cache = rules_cache if rules_cache is not None else {}
    rules = cache.get(unit.variant_id)
    if rules is None:
        rules = cache[unit.variant_id] = rules_for(unit.variant)
    if derived is None:
        state = state_of(unit)
        anode_states: Iterable[AnodeState] = unit.anode_states.all()
        seal_states: Iterable[SealState] = unit.seal_states.all()
    else:
        state, anode_states, seal_states = derived.state, derived.anodes, derived.seals
    duty = duty_of(unit, state, rules)
    ev = UnitEvaluation(unit=unit, rules=rules, duty=duty, on=on)
    place = unit.place.name if unit.place else ""

    def add(kind: ItemKind, key: str, label: str, o: Outcome) -> None:
        state = classify(o.due_on, on, rules.due_soon_days)
        ev.items.append(
            DueItem(
                unit.pk, unit.serial, unit.variant.name, place, kind, key, label,
                o.due_on, state, o.basis, o.flags, o.failed,
            )
        )  # fmt: skip

    # Positions come from the variant; a position with no state row yet has no data.
    anode_rows = {r.position_id: r for r in anode_states}
    for position in unit.variant.anode_positions.all():
        row = anode_rows.get(position.pk) or AnodeState(unit=unit, position=position)
        row.position = position
        projection = anode_projection(row, rules, duty)
        ev.anodes.append(projection)
        add(
            ItemKind.ANODE,
            f"anode:{position.pk}",
            f"Anode: {position.name}",
            anode_outcome(projection, rules, duty),
        )
    seal_rows = {r.position_id: r for r in seal_states}
    for seal in unit.variant.seal_positions.all():
        seal_row = seal_rows.get(seal.pk) or SealState(unit=unit, position=seal)
        seal_row.position = seal
        add(
            ItemKind.SEAL,
            f"seal:{seal.pk}",
            f"Seal: {seal.name} ({seal.size_label})",
            seal_outcome(seal_row, rules, duty),
        )
    if state is not None:
        ev.battery = battery_projection(unit, state, rules, duty, ev.steps)
    add(ItemKind.BATTERY, "battery", "Battery", battery_outcome(ev.battery, duty))
    add(
        ItemKind.PRESSURE_TEST,
        "pressure_test",
        "Pressure test",
        pressure_outcome(unit, state, rules, duty),
    )
    if unit.variant.release_fitted:
        add(ItemKind.RELEASE_TEST, "release_test", "Release test", release_outcome(state, rules))
    for sensor, flag, attr in SENSOR_FLAGS:
        if getattr(unit.variant, flag):
            check = getattr(state, attr) if state else None
            add(
                ItemKind.SENSOR_CHECK,
                sensor_key(sensor),
                f"Sensor check: {sensor.label}",
                sensor_outcome(check, unit, rules),
            )
    return ev


def evaluate_fleet(
    *,
    on: dt.date,
    queryset: QuerySet[Transponder] | None = None,
    include_inactive: bool = False,
) -> list[UnitEvaluation]:
    units = fleet_queryset(queryset)
    if not include_inactive:
        units = units.exclude(hold__in=INACTIVE)
    cache: dict[int, Rules] = {}
    return [evaluate_unit(u, on=on, rules_cache=cache) for u in units]


def due_items(evaluations: list[UnitEvaluation]) -> list[DueItem]:
    items = [i for ev in evaluations for i in ev.items]
    items.sort(key=lambda i: (i.state.rank, i.due_on or dt.date.max, i.serial, i.item))
    return items
