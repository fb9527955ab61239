"""The due engine: for each unit and maintenance item, when it is due and why.

For each unit (loaded with its derived state in a constant number of queries):

- **Anode** per position: the wear line (``calc.anodes.fit_wear_from_sums``) through the
  readings against immersed days since the anode was fitted, falling back to the design
  rate (``design_current_a`` and the alloy's capacity, DNV-RP-B401 Table 10-6) while there
  are too few readings. The immersed days left to the replace-at mass are spread over the
  calendar at the unit's duty: in the water all the time while deployed, otherwise at its
  historical fraction of time in the water. Flags: wear faster than design × factor (a
  bonding fault or a dissimilar-metal contact), bond resistance above the limit.
- **Seal** per position: ``calc.seals.seal_due``: calendar interval from the fitting visit,
  elastomer shelf life from the cure date, openings since fitting.
- **Battery**: usable capacity of the fitted pack at the duty site's temperature and its
  age (``calc.battery.usable_capacity_ah``) less the charge used (kept in the unit state,
  plus the open deployment so far), run down at the duty's daily charge in the water and
  by self-discharge every day, to the reserve.
- **Pressure test**: void after any housing opening; else valid for the configured months
  from the test date; it must have held (``calc.pressure.evaluate_hold``) at the proof
  pressure for the variant's rated depth (``calc.pressure.required_test_pressure_dbar``).
- **Release test** (variants with a release): valid for the configured days; a failed test
  is overdue at once. **Sensor checks** per fitted sensor: calibration interval, and the
  reading within tolerance (temperature elements also against IEC 60751).

States: overdue (due today or earlier), due soon (within the warning window), current,
no data (nothing recorded to compute from). A fault found (a failed test, a high bond
resistance, openings used up) makes the item due on the day it is evaluated.
"""

from __future__ import annotations

import datetime as dt
import math
from dataclasses import dataclass, field
from enum import StrEnum

from django.db.models import QuerySet
from django.utils import timezone

from fleet.calc import anodes as calc_anodes
from fleet.calc import battery as calc_battery
from fleet.calc import pressure as calc_pressure
from fleet.calc import rtd as calc_rtd
from fleet.calc import seals as calc_seals
from fleet.calc import seawater as calc_seawater
from fleet.models import (
    AnodeState,
    ReleaseTest,
    SealState,
    SensorCheck,
    Transponder,
    UnitHold,
    UnitState,
)

from .rules import Rules, rules_for
from .state import charge_per_reply_as, start_of

ANODE_METAL = {"al_zn_in": "Al-Zn-In", "zn": "Zn", "mg": "Mg"}
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
# A unit that has never been in the water wears and drains nothing while it waits; below this
# fraction of time in the water a projection would run decades out and say nothing useful.
MIN_DUTY_FRACTION = 0.05


class DueState(StrEnum):
    OVERDUE = "overdue"
    DUE_SOON = "due_soon"
    CURRENT = "current"
    NO_DATA = "no_data"

    @property
    def label(self) -> str:
        return _STATE_LABEL[self]

    @property
    def icon(self) -> str:
        # Shapes of our own, readable in black and white.
        return _STATE_ICON[self]

    @property
    def rank(self) -> int:
        """Sort order: what needs action first."""
        return _STATE_RANK[self]

    @classmethod
    def from_rank(cls, rank: int) -> DueState:
        return _RANK_STATE[rank]


_STATE_LABEL = {
    DueState.OVERDUE: "Overdue",
    DueState.DUE_SOON: "Due soon",
    DueState.CURRENT: "Current",
    DueState.NO_DATA: "No data",
}
_STATE_ICON = {
    DueState.OVERDUE: "▲",
    DueState.DUE_SOON: "◆",
    DueState.CURRENT: "●",
    DueState.NO_DATA: "○",
}
_STATE_RANK = {
    DueState.OVERDUE: 0,
    DueState.DUE_SOON: 1,
    DueState.NO_DATA: 2,
    DueState.CURRENT: 3,
}
_RANK_STATE = {rank: state for state, rank in _STATE_RANK.items()}


class ItemKind(StrEnum):
    ANODE = "anode"
    SEAL = "seal"
    BATTERY = "battery"
    PRESSURE_TEST = "pressure_test"
    RELEASE_TEST = "release_test"
    SENSOR_CHECK = "sensor_check"

    @property
    def label(self) -> str:
        return self.value.replace("_", " ").capitalize()


@dataclass(frozen=True, slots=True)
class DueItem:
    unit_id: int
    serial: str
    variant: str
    place: str
    kind: ItemKind
    item: str
    due_on: dt.date | None
    state: DueState
    basis: str
    flags: tuple[str, ...] = ()


def classify(due_on: dt.date | None, on: dt.date, soon_days: int) -> DueState:
    if due_on is None:
        return DueState.NO_DATA
    # Due today is due now: the unit should not go out until the item is done.
    if due_on <= on:
        return DueState.OVERDUE
    if due_on <= on + dt.timedelta(days=soon_days):
        return DueState.DUE_SOON
    return DueState.CURRENT


def _days(delta: dt.timedelta) -> float:
    return delta.total_seconds() / 86400.0


def _add_days(on: dt.date, days: float) -> dt.date | None:
    if not math.isfinite(days) or days > 365 * 200:
        return None
    return on + dt.timedelta(days=math.floor(days))


# --- per-unit context ---------------------------------------------------------------------


@dataclass(slots=True)
class Duty:
    """How the unit works: time in the water, replies per day, power step, temperature."""

    immersed_days: float
    fraction: float | None  # share of calendar time in the water; None: never deployed
    deployed: bool
    replies_per_day: float
    power_step: int
    temperature_c: float
    latitude_deg: float
    site_name: str | None


def duty_of(unit: Transponder, state: UnitState | None, rules: Rules, at: dt.datetime) -> Duty:
    if state is None:
        return Duty(
            0.0,
            None,
            False,
            0.0,
            unit.transmit_power_step,
            rules.battery_default_temperature_c,
            rules.default_latitude_deg,
            None,
        )
    immersed = state.immersed_days_closed
    open_d = state.open_deployment
    if open_d is not None:
        immersed += max(0.0, _days(at - open_d.over_side_at))
    fraction: float | None
    if open_d is not None:
        fraction = 1.0
    elif state.first_over_side_at is None:
        fraction = None
    else:
        span = _days(at - state.first_over_side_at)
        fraction = 1.0 if span <= 0 else min(1.0, max(MIN_DUTY_FRACTION, immersed / span))
    duty_d = state.duty_deployment
    site = state.duty_site
    if open_d is not None:
        replies = float(open_d.planned_interrogations_per_day)
        step = open_d.transmit_power_step
    elif duty_d is not None:
        replies = state.duty_replies_per_day or 0.0
        step = duty_d.transmit_power_step
    else:
        replies, step = 0.0, unit.transmit_power_step
    return Duty(
        immersed_days=immersed,
        fraction=fraction,
        deployed=open_d is not None,
        replies_per_day=replies,
        power_step=step,
        temperature_c=site.bottom_temperature_c if site else rules.battery_default_temperature_c,
        latitude_deg=site.latitude_deg if site else rules.default_latitude_deg,
        site_name=site.name if site else None,
    )


def _duty_words(duty: Duty) -> str:
    if duty.deployed:
        return "in the water now"
    if duty.fraction is None:
        return "never deployed"
    return f"in the water {duty.fraction:.0%} of the time so far"


# --- anodes -------------------------------------------------------------------------------


@dataclass(frozen=True, slots=True)
class AnodeProjection:
    position_id: int
    name: str
    new_kg: float
    threshold_kg: float
    replace_at_percent: float
    fit: calc_anodes.WearFit | None
    immersed_days_since_fit: float
    mass_now_kg: float | None
    remaining_immersed_days: float | None
    bond_resistance_ohm: float | None
    design_rate_kg_per_day: float | None

    def mass_after_kg(self, more_immersed_days: float) -> float | None:
        """Projected mass after ``more_immersed_days`` more in the water."""
        if self.fit is None or self.fit.rate_kg_per_day is None:
            return self.mass_now_kg
        mass = self.fit.mass_at_kg(self.immersed_days_since_fit + max(0.0, more_immersed_days))
        return None if mass is None else max(0.0, mass)


def anode_projection(row: AnodeState, rules: Rules, duty: Duty) -> AnodeProjection:
    position = row.position
    new_kg = position.new_net_mass_g / 1000.0
    threshold = new_kg * position.replace_at_remaining_percent / 100.0
    design_rate = None
    if position.design_current_a:
        capacity = calc_anodes.alloy(ANODE_METAL[position.alloy]).capacity_ah_per_kg
        design_rate = calc_anodes.design_wear_rate_kg_per_day(position.design_current_a, capacity)
    since_fit = max(0.0, duty.immersed_days - row.immersed_days_at_fit)
    if row.n == 0:
        return AnodeProjection(
            position.pk,
            position.name,
            new_kg,
            threshold,
            position.replace_at_remaining_percent,
            None,
            since_fit,
            None,
            None,
            row.last_bond_resistance_ohm,
            design_rate,
        )
    sums = calc_anodes.WearSums(row.n, row.sum_x, row.sum_y, row.sum_xx, row.sum_xy, row.sum_yy)
    fit = calc_anodes.fit_wear_from_sums(sums, design_rate, rules.wear_flag_factor)
    if fit.rate_kg_per_day is None:
        mass_now = row.last_mass_kg
        remaining_days = None
    else:
        mass_now = fit.mass_at_kg(since_fit)
        mass_now = None if mass_now is None else max(0.0, min(new_kg, mass_now))
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
        design_rate,
    )


def _anode_item(p: AnodeProjection, rules: Rules, duty: Duty, on: dt.date) -> tuple:
    flags: list[str] = []
    if p.fit is None:
        return None, DueState.NO_DATA, "no reading recorded", ()
    pct_now = None if p.mass_now_kg is None else 100.0 * p.mass_now_kg / p.new_kg
    rate_g = None if p.fit.rate_kg_per_day is None else p.fit.rate_kg_per_day * 1000.0
    parts = []
    if pct_now is not None:
        parts.append(f"{pct_now:.0f} % remaining")
    if rate_g is not None:
        source = (
            "design rate"
            if p.fit.rate_source == "design"
            else (f"fitted to {p.fit.n_points} readings")
        )
        parts.append(f"wearing {rate_g:.2f} g per immersed day ({source})")
    parts.append(f"replace at {p.replace_at_percent:.0f} %")
    if p.fit.fast_wear and p.design_rate_kg_per_day:
        ratio = p.fit.rate_kg_per_day / p.design_rate_kg_per_day  # type: ignore[operator]
        flags.append(
            f"wearing {ratio:.1f}× the design rate: check bonding and dissimilar-metal contact"
        )
    bond_bad = (
        p.bond_resistance_ohm is not None
        and p.bond_resistance_ohm > rules.bond_resistance_limit_ohm
    )
    if bond_bad:
        flags.append(
            f"bond resistance {p.bond_resistance_ohm:g} Ω above the "
            f"{rules.bond_resistance_limit_ohm:g} Ω limit"
        )
    due: dt.date | None
    if p.mass_now_kg is not None and p.mass_now_kg <= p.threshold_kg:
        due = on
        parts.append("at or below the replace-at mass now")
    elif p.remaining_immersed_days is None:
        due = None
        parts.append("a second reading, or a design current, is needed for a wear rate")
    elif duty.fraction is None:
        due = None
        parts.append("not yet deployed: no wear expected in store")
    else:
        due = _add_days(on, p.remaining_immersed_days / duty.fraction)
        when = "beyond 200 years" if due is None else due.isoformat()
        parts.append(f"due {when} ({_duty_words(duty)})")
    if bond_bad:
        due = on if due is None else min(due, on)
    return due, classify(due, on, rules.due_soon_days), ", ".join(parts), tuple(flags)


# --- battery ------------------------------------------------------------------------------


@dataclass(frozen=True, slots=True)
class BatteryProjection:
    pack_serial: str
    chemistry: str
    usable_ah: float
    used_ah: float
    remaining_ah: float
    reserve_ah: float
    daily_in_water_ah: float
    self_discharge_daily_ah: float
    temperature_c: float
    age_years: float
    replies_per_day: float
    charge_per_reply_as: float

    def days_to_reserve(self, fraction_in_water: float) -> float:
        per_day = fraction_in_water * self.daily_in_water_ah + self.self_discharge_daily_ah
        if per_day <= 0:
            return math.inf
        return (self.remaining_ah - self.reserve_ah) / per_day


def battery_projection(
    unit: Transponder,
    state: UnitState,
    rules: Rules,
    duty: Duty,
    on: dt.date,
    at: dt.datetime,
    steps: dict[int, float],
    *,
    temperature_c: float | None = None,
    replies_per_day: float | None = None,
    power_step: int | None = None,
) -> BatteryProjection | None:
    """The fitted pack's charge on ``on``; a planned deployment passes its own site
    temperature, reply rate and power step, else the unit's duty is used."""
    pack = state.pack
    if pack is None:
        return None
    variant = unit.variant
    key = CHEMISTRY_KEY[pack.chemistry]
    spec = calc_battery.PackSpec(
        key,
        variant.cells_in_series,
        variant.parallel_strings,
        pack.capacity_ah / variant.parallel_strings,
    )
    chem = calc_battery.chemistry(key)
    lo, hi = chem.temperature_curve[0][0], chem.temperature_curve[-1][0]
    wanted_t = duty.temperature_c if temperature_c is None else temperature_c
    temperature = min(hi, max(lo, wanted_t))
    rate = duty.replies_per_day if replies_per_day is None else replies_per_day
    step = duty.power_step if power_step is None else power_step
    age = max(0.0, (on - pack.made_on).days / 365.25)
    usable = calc_battery.usable_capacity_ah(spec, temperature, min(age, 50.0))
    used = state.pack_charge_used_ah
    q_reply = charge_per_reply_as(steps, step)
    open_d = state.open_deployment
    if open_d is not None:
        fitted_from = start_of(pack.installed_on)
        days_open = max(0.0, _days(at - max(open_d.over_side_at, fitted_from)))
        used += calc_battery.charge_used_ah(
            days_open * 24.0,
            variant.listen_current_a,
            round(open_d.planned_interrogations_per_day * days_open),
            charge_per_reply_as(steps, open_d.transmit_power_step),
        )
    daily = calc_battery.charge_used_ah(24.0, variant.listen_current_a, round(rate), q_reply)
    self_daily = (
        spec.nominal_capacity_ah
        * calc_battery.temperature_factor(key, temperature)
        * chem.self_discharge_per_year
        / 365.25
    )
    return BatteryProjection(
        pack_serial=pack.pack_serial,
        chemistry=chem.name,
        usable_ah=usable,
        used_ah=used,
        remaining_ah=usable - used,
        reserve_ah=usable * rules.battery_reserve_fraction,
        daily_in_water_ah=daily,
        self_discharge_daily_ah=self_daily,
        temperature_c=temperature,
        age_years=age,
        replies_per_day=rate,
        charge_per_reply_as=q_reply,
    )


def _battery_item(b: BatteryProjection | None, rules: Rules, duty: Duty, on: dt.date) -> tuple:
    if b is None:
        return None, DueState.NO_DATA, "no pack recorded as fitted", ()
    fraction = duty.fraction or 0.0
    days = b.days_to_reserve(fraction)
    due = on if days <= 0 else _add_days(on, days)
    basis = (
        f"{b.remaining_ah:.1f} Ah of {b.usable_ah:.1f} Ah usable left ({b.chemistry}, "
        f"{b.age_years:.1f} years old, at {b.temperature_c:g} °C); uses "
        f"{b.daily_in_water_ah * 1000:.1f} mAh per day in the water at "
        f"{b.replies_per_day:.0f} replies a day, plus self-discharge; "
        f"reserve {b.reserve_ah:.1f} Ah reached "
        f"{'now' if days <= 0 else (due.isoformat() if due else 'beyond 200 years')}"
        f" ({_duty_words(duty)})"
    )
    return due, classify(due, on, rules.due_soon_days), basis, ()


# --- tests and checks ---------------------------------------------------------------------


def rated_test_pressure_dbar(unit: Transponder, rules: Rules, latitude_deg: float) -> float:
    return calc_pressure.required_test_pressure_dbar(
        unit.variant.depth_rating_m, latitude_deg, rules.proof_factor
    )


def _pressure_item(
    unit: Transponder, state: UnitState | None, rules: Rules, duty: Duty, on: dt.date
) -> tuple:
    test = state.last_pressure_test if state else None
    if test is None:
        return None, DueState.NO_DATA, "no pressure test recorded", ()
    required = rated_test_pressure_dbar(unit, rules, duty.latitude_deg)
    verdict = calc_pressure.evaluate_hold(
        test.start_pressure_dbar,
        test.end_pressure_dbar,
        max(test.hold_minutes, 1e-9),
        test.water_temperature_start_c,
        test.water_temperature_end_c,
        test.ingress_found,
        required * (1.0 - rules.gauge_tolerance_percent / 100.0),
        rules.hold_min_minutes,
        rules.allowable_drop_percent,
    )
    tested = f"tested {test.tested_on} at {test.start_pressure_dbar:.0f} dbar"
    if state and state.test_voided_by_opening:
        opened = timezone.localdate(state.last_opening_at) if state.last_opening_at else "since"
        return on, DueState.OVERDUE, f"{tested}; void: the housing was opened {opened}", ()
    if not verdict.passed:
        return on, DueState.OVERDUE, f"{tested}; not accepted: {'; '.join(verdict.reasons)}", ()
    due = calc_seals.add_months(test.tested_on, rules.pressure_test_valid_months)
    basis = (
        f"{tested} (proof {rules.proof_factor:g} × rating {unit.variant.depth_rating_m:.0f} m "
        f"needs {required:.0f} dbar), held {test.hold_minutes:g} min, fell "
        f"{verdict.drop_percent:.2f} %; valid {rules.pressure_test_valid_months} months to {due}"
    )
    return due, classify(due, on, rules.due_soon_days), basis, ()


def release_test_failures(test: ReleaseTest, rules: Rules) -> list[str]:
    reasons = []
    if not test.limit_switch_ok:
        reasons.append("limit switch not confirmed")
    if not test.acoustic_command_ok:
        reasons.append("acoustic release command not confirmed")
    if test.seconds_to_release > rules.release_max_seconds:
        reasons.append(f"took {test.seconds_to_release:g} s, limit {rules.release_max_seconds:g} s")
    if test.motor_current_a > rules.release_max_motor_current_a:
        reasons.append(
            f"motor drew {test.motor_current_a:g} A, limit {rules.release_max_motor_current_a:g} A"
        )
    return reasons


def _release_item(state: UnitState | None, rules: Rules, on: dt.date) -> tuple:
    test = state.last_release_test if state else None
    if test is None:
        return None, DueState.NO_DATA, "no release test recorded", ()
    failures = release_test_failures(test, rules)
    what = f"{test.get_kind_display().lower()} test {test.tested_on}"
    if failures:
        return on, DueState.OVERDUE, f"{what} failed: {', '.join(failures)}", ()
    due = test.tested_on + dt.timedelta(days=rules.release_test_valid_days)
    basis = (
        f"{what}: released in {test.seconds_to_release:g} s at {test.motor_current_a:g} A; "
        f"valid {rules.release_test_valid_days} days to {due}"
    )
    return due, classify(due, on, rules.due_soon_days), basis, ()


def sensor_check_failures(check: SensorCheck, unit: Transponder, rules: Rules) -> list[str]:
    error = check.unit_reading - check.reference_value
    reasons = []
    if check.sensor == SensorCheck.Sensor.TEMPERATURE:
        limit, unit_label = rules.temperature_tolerance_c, "°C"
    elif check.sensor == SensorCheck.Sensor.PRESSURE:
        # Full scale is the sea pressure at the rated depth.
        full_scale = calc_seawater.pressure_dbar(
            unit.variant.depth_rating_m, rules.default_latitude_deg
        )
        limit, unit_label = rules.pressure_tolerance_fraction_of_rating * full_scale, "dbar"
    else:
        limit, unit_label = rules.tilt_tolerance_deg, "°"
    if abs(error) > limit:
        reasons.append(f"reads {error:+.3g} {unit_label} off, tolerance ±{limit:.3g} {unit_label}")
    if check.sensor == SensorCheck.Sensor.TEMPERATURE and check.raw_resistance_ohm is not None:
        element_t = calc_rtd.temperature_c(check.raw_resistance_ohm)
        tolerance = calc_rtd.tolerance_c(check.reference_value, rules.pt100_class)
        if abs(element_t - check.reference_value) > tolerance:
            reasons.append(
                f"PT100 element at {check.raw_resistance_ohm:g} Ω is {element_t:.2f} °C, outside "
                f"IEC 60751 class {rules.pt100_class} ±{tolerance:.2f} °C"
            )
    return reasons


def _sensor_item(check: SensorCheck | None, unit: Transponder, rules: Rules, on: dt.date) -> tuple:
    if check is None:
        return None, DueState.NO_DATA, "no check recorded", ()
    failures = sensor_check_failures(check, unit, rules)
    what = (
        f"checked {check.checked_on}: reads {check.unit_reading:g} "
        f"against {check.reference_value:g}"
    )
    if failures:
        return on, DueState.OVERDUE, f"{what}; {'; '.join(failures)}", ()
    due = calc_seals.add_months(check.checked_on, rules.sensor_check_interval_months)
    basis = f"{what}; every {rules.sensor_check_interval_months} months, next {due}"
    return due, classify(due, on, rules.due_soon_days), basis, ()


def _seal_item(row: SealState, rules: Rules, on: dt.date) -> tuple:
    position = row.position
    if row.fitted_at is None:
        return None, DueState.NO_DATA, "no seal change recorded", ()
    fitted_on = timezone.localdate(row.fitted_at)
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
    if result.openings_exhausted:
        return on, DueState.OVERDUE, basis, ()
    return result.due_on, classify(result.due_on, on, rules.due_soon_days), basis, ()


# --- the fleet ----------------------------------------------------------------------------


@dataclass(slots=True)
class UnitEvaluation:
    unit: Transponder
    rules: Rules
    duty: Duty
    anodes: list[AnodeProjection] = field(default_factory=list)
    battery: BatteryProjection | None = None
    items: list[DueItem] = field(default_factory=list)

    @property
    def worst(self) -> DueState:
        return min((i.state for i in self.items), key=lambda s: s.rank, default=DueState.NO_DATA)


def fleet_queryset(queryset: QuerySet[Transponder] | None = None) -> QuerySet[Transponder]:
    """Units with everything the engine reads, in a constant number of queries:
    units with variant, place and state joined (1), anode states (1), seal states (1), and
    the variants' anode positions, seal positions and reply charge steps (1 each)."""
    base = queryset if queryset is not None else Transponder.objects.all()
    return base.select_related(
        "variant",
        "place",
        "state__open_deployment",
        "state__duty_deployment",
        "state__duty_site",
        "state__pack",
        "state__last_pressure_test",
        "state__last_release_test",
        "state__last_temperature_check",
        "state__last_pressure_check",
        "state__last_tilt_check",
    ).prefetch_related(
        "anode_states",
        "seal_states",
        "variant__anode_positions",
        "variant__seal_positions",
        "variant__reply_steps",
    )


def _state(unit: Transponder) -> UnitState | None:
    try:
        return unit.state
    except UnitState.DoesNotExist:
        return None


def evaluate_unit(
    unit: Transponder, *, on: dt.date, at: dt.datetime, rules_cache: dict[int, Rules] | None = None
) -> UnitEvaluation:
    cache = rules_cache if rules_cache is not None else {}
    rules = cache.get(unit.variant_id)
    if rules is None:
        rules = cache[unit.variant_id] = rules_for(unit.variant)
    state = _state(unit)
    duty = duty_of(unit, state, rules, at)
    ev = UnitEvaluation(unit=unit, rules=rules, duty=duty)
    place = unit.place.name if unit.place else ""

    def add(kind: ItemKind, label: str, result: tuple) -> None:
        due, st, basis, flags = result
        ev.items.append(
            DueItem(
                unit.pk, unit.serial, unit.variant.name, place, kind, label, due, st, basis, flags
            )
        )

    # Positions come from the variant; a position with no state row yet has no data.
    anode_rows = {r.position_id: r for r in unit.anode_states.all()}
    for position in unit.variant.anode_positions.all():
        row = anode_rows.get(position.pk) or AnodeState(unit=unit, position=position)
        row.position = position
        projection = anode_projection(row, rules, duty)
        ev.anodes.append(projection)
        add(ItemKind.ANODE, f"Anode: {position.name}", _anode_item(projection, rules, duty, on))
    seal_rows = {r.position_id: r for r in unit.seal_states.all()}
    for seal in unit.variant.seal_positions.all():
        row = seal_rows.get(seal.pk) or SealState(unit=unit, position=seal)
        row.position = seal
        add(ItemKind.SEAL, f"Seal: {seal.name} ({seal.size_label})", _seal_item(row, rules, on))
    steps = {s.step: s.charge_per_reply_as for s in unit.variant.reply_steps.all()}
    if state is not None:
        ev.battery = battery_projection(unit, state, rules, duty, on, at, steps)
    add(ItemKind.BATTERY, "Battery", _battery_item(ev.battery, rules, duty, on))
    add(ItemKind.PRESSURE_TEST, "Pressure test", _pressure_item(unit, state, rules, duty, on))
    if unit.variant.release_fitted:
        add(ItemKind.RELEASE_TEST, "Release test", _release_item(state, rules, on))
    for sensor, flag, attr in SENSOR_FLAGS:
        if getattr(unit.variant, flag):
            check = getattr(state, attr) if state else None
            add(
                ItemKind.SENSOR_CHECK,
                f"Sensor check: {sensor.label}",
                _sensor_item(check, unit, rules, on),
            )
    return ev


def evaluate_fleet(
    *,
    on: dt.date,
    at: dt.datetime,
    queryset: QuerySet[Transponder] | None = None,
    include_inactive: bool = False,
) -> list[UnitEvaluation]:
    units = fleet_queryset(queryset)
    if not include_inactive:
        units = units.exclude(hold__in=INACTIVE)
    cache: dict[int, Rules] = {}
    return [evaluate_unit(u, on=on, at=at, rules_cache=cache) for u in units]


def due_items(evaluations: list[UnitEvaluation]) -> list[DueItem]:
    items = [i for ev in evaluations for i in ev.items]
    items.sort(key=lambda i: (i.state.rank, i.due_on or dt.date.max, i.serial, i.item))
    return items
