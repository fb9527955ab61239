"""Readiness: can this unit go to this site for this period? Every check, with its numbers.

For a planned deployment (``planned.PlannedDeployment``) each check gives pass, warn or fail,
the numbers behind it and the source of the formula. Dates come from the unit's evaluated
due items (``engine.evaluate_unit``), the same derivation the stored rows hold:

1. Status: a unit that is in the water, quarantined, retired or lost cannot go.
2. Depth: the site's depth against the variant's rating, with a margin.
3. Pressure test: the site's sea pressure (TEOS-10, ``calc.seawater``) × the proof factor
   must not exceed what the last accepted, unvoided test held; a failed or voided test
   fails; the test must still be valid on the start date (warn if it lapses before recovery).
4. Battery: the fitted pack's charge on the start date at the site's bottom temperature must
   cover the planned days at the planned interrogation rate and power step, and keep the
   reserve.
5. Anodes: each stays above its replace-at mass at recovery, with the planned days added to
   its immersed time; a bond fault fails.
6. Seals: each stays within its interval (and shelf life) to recovery; openings left.
7. Release test and sensor checks: valid through recovery; a failed test fails. A sensor
   check that has lapsed (no fault found) is a check to make, not a fail: it spoils data,
   not the unit's return.
8. Recovery buoyancy: the net buoyancy at the least favourable seawater density on the way
   up (the lower of the seabed's and the surface's, TEOS-10) must be at least the larger of
   an absolute minimum and a reserve share of the unit's mass in air.
9. Reply timing: with the unit's turnaround delay and the sound speed at the site, a reply
   from straight below and from the planned horizontal offset must arrive after the
   interrogator's blanking and end before its next interrogation (``calc.ranging``).
10. Acoustic address: no unit now in the water at the site answers to the same address.

A fault found fails its check whatever the start date, today included. The unit's margin
(for ranking in the planner) is the smallest of the normalised margins: battery charge to
spare, anode mass to spare, depth rating to spare.
"""

from __future__ import annotations

import datetime as dt
import gc
from collections import Counter
from collections.abc import Callable, Iterator
from contextlib import contextmanager
from dataclasses import dataclass, field
from enum import StrEnum
from functools import cache, partial
from typing import NamedTuple

from fleet.calc import buoyancy as calc_buoyancy
from fleet.calc import ranging as calc_ranging
from fleet.calc import seawater as calc_seawater
from fleet.formatting import clauses, number, percent, quantity, signed
from fleet.models import (
    AnodeState,
    Deployment,
    DueRow,
    SensorCheck,
    Site,
    Transponder,
    Variant,
)
from fleet.models.functions import plain_columns

from .condition import Condition, annotate_condition, condition_of
from .duty import Duty, duty_of
from .engine import (
    INACTIVE,
    SENSOR_FLAGS,
    VARIANT_PREFETCH,
    AnodeProjection,
    BatteryProjection,
    anode_projection,
    battery_projection,
    evaluate_unit,
    fleet_queryset,
    loaded_unit,
    pressure_tested_words,
    sensor_key,
    state_of,
)
from .facts import (
    ANODE_COLUMNS,
    UNIT_COLUMNS,
    AnodeValues,
    UnitFacts,
    unit_facts_from_values,
    unit_facts_of,
)
from .items import ItemKind
from .planned import PlannedDeployment
from .rules import Rules, rules_for


class Verdict(StrEnum):
    PASS = "pass"
    WARN = "warn"
    FAIL = "fail"

    @property
    def label(self) -> str:
        return {"pass": "Pass", "warn": "Check", "fail": "Fail"}[self.value]

    @property
    def icon(self) -> str:
        return {"pass": "✔", "warn": "!", "fail": "✖"}[self.value]

    @property
    def rank(self) -> int:
        return _RANK[self]


# The members as plain module names: ``Verdict.PASS`` goes through the enum's descriptor on
# every use, a cost the whole-fleet planner pays hundreds of thousands of times.
PASS, WARN, FAIL = Verdict.PASS, Verdict.WARN, Verdict.FAIL
_RANK = {FAIL: 0, WARN: 1, PASS: 2}


Words = str | Callable[[], str]


class CheckResult:
    """One check's name, verdict, sentence and source. The sentence may be given as a
    callable (``Words``) that builds it from the check's figures: it is called once, on first
    reading of ``numbers``, so the whole-fleet planner formats only the rows a page shows
    and a single unit's readiness reads the very same words."""

    __slots__ = ("name", "verdict", "_numbers", "source")

    def __init__(self, name: str, verdict: Verdict, numbers: Words, source: str) -> None:
        self.name = name
        self.verdict = verdict
        self._numbers = numbers
        self.source = source

    @property
    def numbers(self) -> str:
        words = self._numbers
        if not isinstance(words, str):
            words = self._numbers = words()
        return words

    def _key(self) -> tuple[str, Verdict, str, str]:
        return (self.name, self.verdict, self.numbers, self.source)

    def __eq__(self, other: object) -> bool:
        if not isinstance(other, CheckResult):
            return NotImplemented
        return self._key() == other._key()

    def __hash__(self) -> int:
        return hash(self._key())

    def __repr__(self) -> str:
        return (
            f"CheckResult(name={self.name!r}, verdict={self.verdict!r}, "
            f"numbers={self.numbers!r}, source={self.source!r})"
        )


class _OfAPlan:
    """The planned site, start and days, read through from ``planned``."""

    __slots__ = ()
    planned: PlannedDeployment

    @property
    def site(self) -> Site:
        return self.planned.site

    @property
    def start(self) -> dt.date:
        return self.planned.start

    @property
    def days(self) -> int:
        return self.planned.days


@dataclass(slots=True)
class Readiness(_OfAPlan):
    unit: UnitFacts
    planned: PlannedDeployment
    interrogations_per_day: int
    power_step: int
    checks: list[CheckResult] = field(default_factory=list)
    margins: dict[str, float] = field(default_factory=dict)

    @property
    def end(self) -> dt.date:
        return self.planned.end

    @property
    def verdict(self) -> Verdict:
        """The worst of the checks' verdicts (pass when there are none)."""
        worst = PASS
        for c in self.checks:
            if c.verdict is FAIL:
                return FAIL
            if c.verdict is WARN:
                worst = WARN
        return worst

    @property
    def failures(self) -> list[CheckResult]:
        return [c for c in self.checks if c.verdict == FAIL]

    @property
    def first_failure(self) -> CheckResult | None:
        return next(iter(self.failures), None)

    @property
    def margin(self) -> float:
        return min(self.margins.values(), default=0.0)

    @property
    def margin_percent(self) -> float:
        """The margin as a percentage, as the planner prints it (0.37 -> 37.0)."""
        return self.margin * 100.0

    @property
    def margin_by(self) -> str:
        """Which margin is the smallest: "battery", "anodes" or "depth" ("" when none)."""
        return min(self.margins, key=self.margins.__getitem__, default="")


COMMON = "common practice, no published source"


class Dated(NamedTuple):
    """What a check reads of a dated due item (a stored due row or a fresh ``DueItem``)."""

    due_on: dt.date | None
    failed: bool
    basis: str


class Context(NamedTuple):
    """What every check reads, as plain values: the unit, its rules and duty, its anode
    projections and dated items, the plan and the duty it implies."""

    unit: UnitFacts
    rules: Rules
    duty: Duty
    anodes: list[AnodeProjection]
    items: dict[str, Dated]
    steps: dict[int, float]
    planned: PlannedDeployment
    rate: float
    step: int
    site_pressure_dbar: float
    memo: SiteMemo


class SiteMemo:
    """Figures that depend only on the planned site and the variant, not on the unit: worked
    out once per plan and shared by every unit checked for it (the results are frozen)."""

    def __init__(self, planned: PlannedDeployment) -> None:
        site = planned.site
        self.pressure_dbar = calc_seawater.pressure_dbar(site.water_depth_m, site.latitude_deg)
        self._sound_speed: float | None = None
        self.steps: dict[int, dict[int, float]] = {}
        # Per variant: each seal position's check name and item key; each fitted sensor's
        # check name, item key and sources.
        self.seals: dict[int, list[tuple[str, str]]] = {}
        self.sensors: dict[int, list[tuple[str, str, str]]] = {}
        self.buoyancy: dict[int, list[CheckResult]] = {}
        self.ranging: dict[tuple[int, float], list[CheckResult]] = {}

    def sound_speed_m_s(self, site: Site) -> float:
        if self._sound_speed is None:
            self._sound_speed = calc_seawater.sound_speed_m_s(
                site.bottom_temperature_c,
                site.practical_salinity,
                self.pressure_dbar,
                site.latitude_deg,
                site.longitude_deg,
            )
        return self._sound_speed


def _dated_item_check(
    name: str,
    item: Dated | None,
    planned: PlannedDeployment,
    source: str,
    *,
    missing: Verdict,
    lapses: Verdict,
    expired: Verdict = FAIL,
) -> CheckResult:
    """A test or interval item against the planned period: a fault fails; due by the start
    gives ``expired`` (a fail unless the item does not bear on the unit's safe return);
    lapsing before recovery gives ``lapses``; no record gives ``missing``."""
    end = planned.end
    if item is None or item.due_on is None:
        basis = item.basis if item is not None else "nothing recorded"
        return CheckResult(name, missing, basis, source)
    if item.failed:
        return CheckResult(name, FAIL, item.basis, source)
    due, start = item.due_on, planned.start
    if due <= start:
        return CheckResult(name, expired, lambda: f"due {due}, by the start {start}", source)
    if due < end:
        return CheckResult(name, lapses, lambda: f"due {due}, before recovery {end}", source)
    return CheckResult(name, PASS, lambda: f"due {due}, after recovery {end}", source)


def check_status(c: Context) -> list[CheckResult]:
    """The unit's condition today (``condition.py``); a list that annotated it already
    (``annotate_condition``) saves the query."""
    unit = c.unit
    condition = Condition(unit.condition)
    if condition.held:
        verdict, numbers = FAIL, f"unit is {condition.label.lower()}"
        if unit.hold_reason:
            numbers += f": {unit.hold_reason}"
    elif condition == Condition.IN_WATER:
        verdict = FAIL
        numbers = "unit is in the water now; recover and service it first"
    elif condition == Condition.ON_BENCH:
        verdict = WARN
        numbers = "unit is on the bench now; close its bench visit before it goes"
    elif condition == Condition.NEEDS_WORK:
        # The checks below judge each item for this job; the condition is today's summary.
        verdict = PASS
        numbers = "needs work today: an item is overdue or has no data (see below)"
    else:
        verdict, numbers = PASS, condition.label.lower()
    return [CheckResult("Unit condition", verdict, numbers, "—")]


def depth_words(site_m: float, rating_m: float, want_fraction: float) -> str:
    """The depth check in one sentence. Spare depth is the rating less the site's depth, as a
    share of the rating; a site deeper than the rating says by how much instead."""
    site, rating = quantity(site_m, "m"), quantity(rating_m, "m")
    if site_m > rating_m:
        return f"site {site} is {quantity(site_m - rating_m, 'm')} deeper than the {rating} rating"
    spare = (rating_m - site_m) / rating_m
    return (
        f"site {site}, rating {rating}: {quantity(rating_m - site_m, 'm')} to spare, "
        f"{percent(spare)} of the rating (want at least {percent(want_fraction)})"
    )


def check_depth(c: Context, margins: dict[str, float]) -> list[CheckResult]:
    rules, site = c.rules, c.planned.site
    rating = c.unit.variant.depth_rating_m
    spare = (rating - site.water_depth_m) / rating
    margins["depth"] = spare
    want = rules.depth_margin_fraction
    numbers = lambda: depth_words(site.water_depth_m, rating, want)  # noqa: E731
    if site.water_depth_m > rating:
        verdict = FAIL
    elif spare < rules.depth_margin_fraction:
        verdict = WARN
    else:
        verdict = PASS
    return [CheckResult("Depth rating", verdict, numbers, f"margin: {COMMON}")]


@cache
def _pressure_source(proof_factor: float) -> str:
    return f"sea pressure: TEOS-10 (gsw); proof factor {proof_factor:g}: {COMMON}"


def check_pressure_test(c: Context) -> list[CheckResult]:
    rules = c.rules
    state = c.unit.state
    test = state.last_pressure_test if state else None
    needed = c.site_pressure_dbar * rules.proof_factor
    source = _pressure_source(rules.proof_factor)
    name = "Pressure test"
    item = c.items.get("pressure_test")
    if test is None or item is None:
        return [CheckResult(name, FAIL, "no pressure test recorded", source)]
    site_dbar, factor = c.site_pressure_dbar, rules.proof_factor

    # The words are built when read (``CheckResult.numbers``), from these same figures.
    def head() -> str:
        return (
            f"this site needs {quantity(needed, 'dbar', 0)} "
            f"({quantity(site_dbar, 'dbar', 0)} × {factor:g})"
        )

    if item.failed:
        # The item's basis already names the test and what is wrong with it.
        basis = item.basis
        return [CheckResult(name, FAIL, lambda: clauses(head(), basis), source)]
    if test.start_pressure_dbar < needed * (1.0 - rules.gauge_tolerance_percent / 100.0):
        short = needed - test.start_pressure_dbar

        def short_words() -> str:
            tested = pressure_tested_words(test)
            return clauses(head(), f"{tested}, {quantity(short, 'dbar', 0)} short of it")

        return [CheckResult(name, FAIL, short_words, source)]
    dated = _dated_item_check(name, item, c.planned, source, missing=FAIL, lapses=WARN)

    def words() -> str:
        return clauses(head(), pressure_tested_words(test), dated.numbers)

    return [CheckResult(name, dated.verdict, words, source)]


def battery_words(
    battery: BatteryProjection, planned: PlannedDeployment, rate: float, step: int, need: float
) -> str:
    """The battery check in one sentence. The reserve is the share of the usable charge kept
    back for the recovery (the variant's setting); a shortfall says what is short and by
    how much."""
    left = battery.remaining_ah - need
    start = (
        f"{quantity(battery.remaining_ah, 'Ah')} on {planned.start} at "
        f"{quantity(battery.temperature_c, '°C', 1)}; {planned.days} days at "
        f"{number(rate, 0)} replies a day, step {step} "
        f"({quantity(battery.charge_per_reply_as * 1000, 'mA·s', 1)} a reply) need "
        f"{quantity(need, 'Ah')}"
    )
    reserve = f"{quantity(battery.reserve_ah, 'Ah')} reserve kept back"
    if left < 0:
        end = f"short by {quantity(-left, 'Ah')}: the pack runs out before recovery"
    elif left < battery.reserve_ah:
        short = quantity(battery.reserve_ah - left, "Ah")
        end = f"{quantity(left, 'Ah')} left at recovery, {short} short of the {reserve}"
    else:
        end = f"{quantity(left, 'Ah')} left at recovery, above the {reserve}"
    return clauses(start, end)


def check_battery(c: Context, margins: dict[str, float]) -> list[CheckResult]:
    planned = c.planned
    # The capacity-against-temperature figures are recalled from Linden's Handbook (from
    # memory, see calc.battery); the page names the handbook only.
    source = "capacity vs temperature: Linden's Handbook of Batteries; charge = I·t"
    state = c.unit.state
    battery = (
        battery_projection(
            c.unit,
            state,
            c.rules,
            c.duty,
            c.steps,
            on=planned.start,
            temperature_c=planned.site.bottom_temperature_c,
            replies_per_day=c.rate,
            power_step=c.step,
        )
        if state is not None
        else None
    )
    if battery is None:
        margins["battery"] = -1.0
        return [CheckResult("Battery", FAIL, "no pack recorded as fitted", source)]
    days = planned.days
    need = (battery.daily_in_water_ah + battery.self_discharge_daily_ah) * days
    left = battery.remaining_ah - need
    rate, step = c.rate, c.step
    numbers = lambda: battery_words(battery, planned, rate, step, need)  # noqa: E731
    if left < 0:
        verdict = FAIL
    elif left < battery.reserve_ah:
        verdict = WARN
    else:
        verdict = PASS
    margins["battery"] = left / battery.usable_ah if battery.usable_ah else -1.0
    return [CheckResult("Battery", verdict, numbers, source)]


def anode_words(
    p: AnodeProjection, mass_end: float, *, bond_fault: bool = True, fast: bool = False
) -> str:
    """One anode's check in one sentence: the mass projected at recovery against its
    replace-at mass, and a bond fault or fast wear when there is one."""
    numbers = (
        f"{mass_end * 1000:.0f} g projected at recovery, replace at "
        f"{p.threshold_kg * 1000:.0f} g ({p.replace_at_percent:.0f} % of "
        f"{p.new_kg * 1000:.0f} g)"
    )
    if bond_fault:
        return numbers + f"; bond {p.bond_resistance_ohm:g} Ω over the limit"
    if fast:
        return numbers + "; wearing faster than design"
    return numbers


def check_anodes(c: Context, margins: dict[str, float]) -> list[CheckResult]:
    source = "wear fit against immersed days; DNV-RP-B401 (2010) Table 10-6 design rate"
    results = []
    anode_margin = 1.0
    for p in c.anodes:
        name = f"Anode: {p.name}"
        if p.fit is None:
            results.append(CheckResult(name, WARN, "no reading recorded", source))
            continue
        mass_end = p.mass_after_kg(c.planned.days)
        if mass_end is None:
            numbers = "no wear rate yet (one reading and no design current)"
            results.append(CheckResult(name, WARN, numbers, source))
            continue
        spare_kg = mass_end - p.threshold_kg
        if p.bond_fault(c.rules):
            words = partial(anode_words, p, mass_end, bond_fault=True)
            results.append(CheckResult(name, FAIL, words, source))
            anode_margin = min(anode_margin, -1.0)
            continue
        verdict = FAIL if spare_kg < 0 else PASS
        fast = verdict == PASS and p.fit.fast_wear
        if fast:
            verdict = WARN
        words = partial(anode_words, p, mass_end, bond_fault=False, fast=fast)
        results.append(CheckResult(name, verdict, words, source))
        anode_margin = min(anode_margin, spare_kg / p.new_kg)
    margins["anodes"] = anode_margin
    return results


def _with_basis(result: CheckResult, basis: str) -> str:
    return f"{result.numbers}: {basis}"


SEAL_SOURCE = f"intervals: {COMMON}; shelf life ISO 2230:2002"


def check_seals(c: Context) -> list[CheckResult]:
    source = SEAL_SOURCE
    results = []
    seals = c.memo.seals.get(c.unit.variant_id)
    if seals is None:
        seals = c.memo.seals[c.unit.variant_id] = [
            (f"Seal: {seal.name}", f"seal:{seal.pk}")
            for seal in c.unit.variant.seal_positions.all()
        ]
    for name, key in seals:
        item = c.items.get(key)
        if item is None or item.due_on is None:
            results.append(CheckResult(name, WARN, "no seal change recorded", source))
            continue
        result = _dated_item_check(name, item, c.planned, source, missing=WARN, lapses=FAIL)
        if result.verdict == FAIL and not item.failed:
            words = partial(_with_basis, result, item.basis)
            result = CheckResult(name, result.verdict, words, source)
        results.append(result)
    return results


def check_release(c: Context) -> list[CheckResult]:
    if not c.unit.variant.release_fitted:
        return []
    source = f"validity and acceptance: {COMMON}"
    item = c.items.get("release_test")
    if item is None or item.due_on is None:
        return [CheckResult("Release test", FAIL, "no release test recorded", source)]
    return [_dated_item_check("Release test", item, c.planned, source, missing=FAIL, lapses=FAIL)]


def sensor_source(sensor: str) -> str:
    """The sources behind one sensor's check, each for its own quantity: the PT100 standard
    for a temperature element only, TEOS-10 for the pressure sensor's full scale only."""
    source = f"interval and tolerance: {COMMON}"
    if sensor == SensorCheck.Sensor.TEMPERATURE:
        return f"{source}; PT100 element: IEC 60751"
    if sensor == SensorCheck.Sensor.PRESSURE:
        return f"{source}; full scale at the rated depth: TEOS-10 (gsw)"
    return source


def check_sensors(c: Context) -> list[CheckResult]:
    sensors = c.memo.sensors.get(c.unit.variant_id)
    if sensors is None:
        variant = c.unit.variant
        sensors = c.memo.sensors[c.unit.variant_id] = [
            (f"Sensor: {sensor.label}", sensor_key(sensor), sensor_source(sensor))
            for sensor, flag, _attr in SENSOR_FLAGS
            if getattr(variant, flag)
        ]
    return [
        _dated_item_check(
            name,
            c.items.get(key),
            c.planned,
            source,
            missing=WARN,
            lapses=WARN,
            # A lapsed calibration spoils the data, not the unit's return: a check.
            expired=WARN,
        )
        for name, key, source in sensors
    ]


def buoyancy_words(result: calc_buoyancy.RecoveryBuoyancy, mass_kg: float, volume_m3: float) -> str:
    """The buoyancy check in one sentence, each number once: the net lift at the least
    favourable density, what is required, and the shortfall when it is short."""
    net = signed(result.net_buoyancy_kg, "kgf")
    head = (
        f"{net} net at the {result.met_at} ({quantity(result.density_kg_m3, 'kg/m³', 1)}), "
        f"needs {quantity(result.required_kg, 'kgf')} "
        f"({quantity(mass_kg, 'kg')} in air, {number(volume_m3, 4)} m³)"
    )
    if result.passed:
        return head
    if result.net_buoyancy_kg <= 0:
        return clauses(head, "the unit sinks: it will not come up on its own")
    return clauses(head, f"{quantity(result.required_kg - result.net_buoyancy_kg, 'kgf')} short")


def check_buoyancy(c: Context) -> list[CheckResult]:
    """Depends on the variant and the site only: worked out once per variant in a plan."""
    variant_id = c.unit.variant_id
    if variant_id not in c.memo.buoyancy:
        c.memo.buoyancy[variant_id] = _buoyancy(c)
    return c.memo.buoyancy[variant_id]


def _buoyancy(c: Context) -> list[CheckResult]:
    variant, site, rules = c.unit.variant, c.planned.site, c.rules
    source = (
        "Archimedes; density TEOS-10 (gsw) at the seabed and the surface, the lower taken; "
        f"reserve {percent(rules.recovery_reserve_fraction_of_mass)} of the mass in air, at least "
        f"{rules.recovery_min_net_buoyancy_kg:g} kgf: {COMMON}"
    )
    name = "Recovery buoyancy"
    if variant.mass_in_air_kg is None or variant.displaced_volume_m3 is None:
        return [CheckResult(name, WARN, "variant has no mass and volume recorded", source)]
    surface_t = (
        rules.surface_temperature_c
        if site.surface_temperature_c is None
        else site.surface_temperature_c
    )
    result = calc_buoyancy.recovery_buoyancy(
        variant.mass_in_air_kg,
        variant.displaced_volume_m3,
        seabed_temperature_c=site.bottom_temperature_c,
        seabed_practical_salinity=site.practical_salinity,
        seabed_pressure_dbar=c.site_pressure_dbar,
        surface_temperature_c=surface_t,
        surface_practical_salinity=site.practical_salinity,
        latitude_deg=site.latitude_deg,
        longitude_deg=site.longitude_deg,
        min_net_buoyancy_kg=rules.recovery_min_net_buoyancy_kg,
        reserve_fraction_of_mass=rules.recovery_reserve_fraction_of_mass,
    )
    numbers = buoyancy_words(result, variant.mass_in_air_kg, variant.displaced_volume_m3)
    verdict = PASS if result.passed else FAIL
    return [CheckResult(name, verdict, numbers, source)]


def check_ranging(c: Context) -> list[CheckResult]:
    """The reply must arrive after the interrogator's blanking and end before its next
    interrogation, at the farthest planned geometry (and the nearest: straight overhead).
    Depends on the unit only through its turnaround delay (and its variant's rules)."""
    key = (c.unit.variant_id, c.unit.turnaround_delay_ms)
    if key not in c.memo.ranging:
        c.memo.ranging[key] = _ranging(c)
    return c.memo.ranging[key]


def _ranging(c: Context) -> list[CheckResult]:
    unit, site, rules = c.unit, c.planned.site, c.rules
    offset = (
        rules.ranging_horizontal_offset_m
        if c.planned.horizontal_offset_m is None
        else c.planned.horizontal_offset_m
    )
    interval = (
        rules.ranging_ping_interval_s
        if c.planned.ping_interval_s is None
        else c.planned.ping_interval_s
    )
    speed = c.memo.sound_speed_m_s(site)
    source = (
        "two-way travel time 2r/c + turnaround; sound speed TEOS-10 (gsw) at the seabed; "
        f"blanking {rules.ranging_blanking_s:g} s and reply {rules.ranging_reply_pulse_s:g} s: "
        f"{COMMON}"
    )
    depth = max(site.water_depth_m, 1.0)
    far = calc_ranging.slant_range_from_offset_m(depth, offset)
    timings = [
        calc_ranging.reply_timing(
            slant,
            speed,
            unit.turnaround_delay_ms / 1000.0,
            interval,
            rules.ranging_blanking_s,
            rules.ranging_reply_pulse_s,
        )
        for slant in (depth, far)
    ]
    near_t, far_t = timings
    numbers = (
        f"{unit.turnaround_delay_ms:g} ms turnaround, {speed:.0f} m/s; overhead {depth:.0f} m: "
        f"reply at {near_t.arrival_s:.3f} s; {offset:.0f} m off ({far:.0f} m slant): reply at "
        f"{far_t.arrival_s:.3f} s; listening {near_t.window_opens_s:g} s to {interval:g} s"
    )
    reasons = [r for t in timings for r in t.reasons]
    if reasons:
        numbers += "; " + "; ".join(dict.fromkeys(reasons))
    verdict = PASS if all(t.fits for t in timings) else FAIL
    return [CheckResult("Reply timing", verdict, numbers, source)]


def check_address(c: Context, clashes: list[str]) -> list[CheckResult]:
    address, site = c.unit.acoustic_address, c.planned.site
    if clashes:
        used = f"address {address} already used at {site.name} by {', '.join(clashes)}"
        return [CheckResult("Acoustic address", FAIL, used, "—")]
    return [
        CheckResult("Acoustic address", PASS, lambda: f"address {address} free at {site.name}", "—")
    ]


def check_unit(
    unit: UnitFacts,
    rules: Rules,
    items: dict[str, Dated],
    planned: PlannedDeployment,
    *,
    address_clashes: list[str] | None = None,
    memo: SiteMemo | None = None,
) -> Readiness:
    """Every check of ``unit`` for ``planned``, in the order of the module docstring, on
    plain values: the one code path of both a single unit's readiness and the planner.
    ``items``: the unit's dated items by key; ``memo``: the plan's site figures, shared by
    the units of one plan."""
    memo = memo if memo is not None else SiteMemo(planned)
    duty = duty_of(unit, unit.state, rules)
    anodes = [anode_projection(row, rules, duty) for row in unit.anode_rows]
    steps = memo.steps.get(unit.variant_id)
    if steps is None:
        steps = memo.steps[unit.variant_id] = {
            s.step: s.charge_per_reply_as for s in unit.variant.reply_steps.all()
        }
    rate = (
        duty.replies_per_day
        if planned.interrogations_per_day is None
        else planned.interrogations_per_day
    )
    step = unit.transmit_power_step if planned.power_step is None else planned.power_step
    c = Context(
        unit, rules, duty, anodes, items, steps, planned, rate, step, memo.pressure_dbar, memo
    )
    r = Readiness(unit, planned, round(rate), step)
    margins = r.margins
    r.checks = [
        *check_status(c),
        *check_depth(c, margins),
        *check_pressure_test(c),
        *check_battery(c, margins),
        *check_anodes(c, margins),
        *check_seals(c),
        *check_release(c),
        *check_sensors(c),
        *check_buoyancy(c),
        *check_ranging(c),
        *check_address(c, address_clashes or []),
    ]
    return r


def address_clashes_at(site_id: int) -> dict[str, list[str]]:
    """Address → serials of units in the water at the site now (one query)."""
    clashes: dict[str, list[str]] = {}
    for serial, address in Deployment.objects.filter(
        site_id=site_id, recovered_at__isnull=True
    ).values_list("unit__serial", "unit__acoustic_address"):
        clashes.setdefault(address, []).append(serial)
    return clashes


def readiness_for(unit: Transponder, planned: PlannedDeployment, *, on: dt.date) -> Readiness:
    """``unit`` checked for ``planned``, evaluated as of ``on``: its items derived afresh by
    the engine, its state turned into the plain values the checks read."""
    loaded = loaded_unit(unit.pk)
    return _check_loaded(loaded, planned, address_clashes_at(planned.site.pk), on=on)


def _check_loaded(
    loaded: Transponder,
    planned: PlannedDeployment,
    clashes: dict[str, list[str]],
    *,
    on: dt.date,
    memo: SiteMemo | None = None,
    rules_cache: dict[int, Rules] | None = None,
) -> Readiness:
    """A unit loaded with ``fleet_queryset``, its items derived afresh, checked."""
    ev = evaluate_unit(loaded, on=on, rules_cache=rules_cache)
    condition = getattr(loaded, "condition", None) or condition_of(loaded, on)
    facts = unit_facts_of(loaded, state_of(loaded), condition)
    items = {i.key: Dated(i.due_on, i.failed, i.basis) for i in ev.items}
    others = [s for s in clashes.get(loaded.acoustic_address, []) if s != loaded.serial]
    return check_unit(facts, ev.rules, items, planned, address_clashes=others, memo=memo)


@dataclass(frozen=True, slots=True)
class RejectedGroup:
    """Units that cannot go, grouped by the name of their first failed check."""

    reason: str
    units: list[Readiness]


@dataclass(frozen=True, slots=True)
class Plan(_OfAPlan):
    planned: PlannedDeployment
    wanted: int
    ready: list[Readiness]
    rejected: list[Readiness]

    def drop_rows(self) -> None:
        """Empty the plan's lists once its page is drawn. Django's template engine keeps a
        rendered context in a reference cycle (each of its dicts points back at it), which
        only the cyclic collector frees, walking everything the context reaches: for a
        whole-fleet plan half a million objects, some 150 ms. Emptied, the rows are freed
        at once by reference counting."""
        self.ready.clear()
        self.rejected.clear()

    @property
    def shortfall(self) -> int:
        return max(0, self.wanted - len(self.ready))

    @property
    def blockers(self) -> list[tuple[str, int]]:
        """What keeps units back, most common first: the work that would free the most."""
        counts = Counter(c.name.split(":")[0] for r in self.rejected for c in r.failures)
        return counts.most_common()

    @property
    def rejected_groups(self) -> list[RejectedGroup]:
        """The rejected units grouped by their first reason (the check's name up to a colon),
        largest group first, each in serial order."""
        groups: dict[str, list[Readiness]] = {}
        for r in self.rejected:
            first = r.first_failure
            groups.setdefault(first.name.split(":")[0] if first else "", []).append(r)
        return [
            RejectedGroup(reason, units)
            for reason, units in sorted(groups.items(), key=lambda g: (-len(g[1]), g[0]))
        ]


# Units the planner reads at once: the same queries for any fleet up to this size, and
# that many more for each further chunk; the memory of one chunk's rows at a time.
PLAN_CHUNK = 2000
# The due rows a readiness check reads (the anodes and the battery are projected afresh).
DATED_KINDS = (
    ItemKind.SEAL,
    ItemKind.PRESSURE_TEST,
    ItemKind.RELEASE_TEST,
    ItemKind.SENSOR_CHECK,
)


def chunk_rows(
    ids: list[int],
) -> tuple[dict[int, dict[int, AnodeValues]], dict[int, dict[str, Dated]]]:
    """The anode state rows and the dated due rows of the units ``ids``, as plain values
    (two queries; dates and date-times read as ``plain_columns`` reads them).

    Each query asks for the range from the lowest id to the highest, and the rows of units not
    in ``ids`` (lost or retired ones between) are passed over here: a list of 2,000 ids
    made each query 2,000 parameters that Django prepared one by one and psycopg split out
    of the statement's text again every time (it keeps the split only of statements up to
    4 KiB): 9 ms a query on a slow minute, for the split alone."""
    if not ids:
        return {}, {}
    wanted = set(ids)
    among = {"unit_id__gte": min(ids), "unit_id__lte": max(ids)}
    anodes: dict[int, dict[int, AnodeValues]] = {}
    for unit_id, position_id, *values in AnodeState.objects.filter(**among).values_list(
        *plain_columns(AnodeState, ANODE_COLUMNS)
    ):
        if unit_id in wanted:
            anodes.setdefault(unit_id, {})[position_id] = tuple(values)
    dated: dict[int, dict[str, Dated]] = {}
    # Unordered: the rows are looked up by key, and the model's default order cost SQLite a
    # sort of the chunk's rows (a sixth of this read, 2,000 units).
    rows = DueRow.objects.filter(**among, kind__in=DATED_KINDS).order_by()
    for unit_id, key, due_on, failed, basis in rows.values_list(
        *plain_columns(DueRow, ("unit_id", "key", "due_on", "failed", "basis"))
    ):
        if unit_id in wanted:
            dated.setdefault(unit_id, {})[key] = Dated(due_on, failed, basis)
    return anodes, dated


@contextmanager
def cyclic_gc_paused() -> Iterator[None]:
    """The cyclic garbage collector held off while a plan is built, and restored after (as it
    was; run by hand on the way out). Checking a whole fleet allocates a few hundred thousand
    small objects that all stay alive until the page is drawn, and each automatic collection
    walks every one of them again: measured, a third of the planner's time on the 5,000-unit
    fleet. Reference counting still frees what the checks drop.

    On the way out the objects made meanwhile are moved to the oldest generation
    (``_promote_young``): left in the youngest, the first allocation after the collector is
    back would walk them all (measured, 160 ms after a whole-fleet plan)."""
    was_enabled = gc.isenabled()
    gc.disable()
    try:
        yield
    finally:
        if was_enabled:
            _promote_young()
            gc.enable()


def _promote_young() -> None:
    """Every object the collector tracks moved to its oldest generation, without walking them,
    and the allocation count that triggers the next young collection reset: ``gc.freeze``
    moves them all to the permanent generation and ``gc.unfreeze`` moves that to the oldest.
    Cyclic garbage among them is found by the next full collection. Skipped when some
    objects are frozen already (a server that froze its start-up objects keeps them so)."""
    if gc.get_freeze_count() == 0:
        gc.freeze()
        gc.unfreeze()


def plan_campaign(planned: PlannedDeployment, *, wanted: int, on: dt.date) -> Plan:
    """See ``_plan_campaign``; built with the cyclic collector paused (``cyclic_gc_paused``)."""
    with cyclic_gc_paused():
        return _plan_campaign(planned, wanted=wanted, on=on)


def _plan_campaign(planned: PlannedDeployment, *, wanted: int, on: dt.date) -> Plan:
    """Every active unit checked for the job; those that pass, most margin first.

    Read from the stored rows as plain values, by chunks of ``PLAN_CHUNK`` units: the units
    with their state columns and condition (one ``values_list``), their anode state rows
    and dated due rows (one each); the variants with their positions once each. The checks
    are ``check_unit``'s, the code a single unit's readiness runs; the site's seawater
    figures are worked out once (``SiteMemo``). A unit with no state row yet has no stored
    rows and is derived afresh (``readiness_for``)."""
    clashes = address_clashes_at(planned.site.pk)
    memo = SiteMemo(planned)
    variants = {v.pk: v for v in Variant.objects.prefetch_related(*VARIANT_PREFETCH)}
    rules = {pk: rules_for(v) for pk, v in variants.items()}
    positions = {pk: list(v.anode_positions.all()) for pk, v in variants.items()}
    active = Transponder.objects.exclude(hold__in=INACTIVE)
    units = (
        annotate_condition(active, on)
        .order_by("pk")
        .values_list(*plain_columns(Transponder, UNIT_COLUMNS))
    )
    results = []
    chunk: list[tuple[object, ...]] = []
    stateless: list[int] = []

    def check(chunk: list[tuple[object, ...]]) -> None:
        anodes, dated = chunk_rows([row[0] for row in chunk])  # type: ignore[misc]
        for row in chunk:
            pk, variant_id = row[0], row[3]
            variant = variants[variant_id]  # type: ignore[index]
            facts = unit_facts_from_values(
                row,
                variant,
                positions[variant_id],  # type: ignore[index]
                anodes.get(pk, {}),  # type: ignore[call-overload]
            )
            others = [s for s in clashes.get(facts.acoustic_address, []) if s != facts.serial]
            if facts.state is None:
                stateless.append(facts.pk)
                continue
            results.append(
                check_unit(
                    facts,
                    rules[facts.variant_id],
                    dated.get(facts.pk, {}),
                    planned,
                    address_clashes=others,
                    memo=memo,
                )
            )

    for row in units.iterator(chunk_size=PLAN_CHUNK):
        chunk.append(row)
        if len(chunk) == PLAN_CHUNK:
            check(chunk)
            chunk = []
    if chunk:
        check(chunk)
    # Units never written have no stored rows: derived afresh, all at once.
    if stateless:
        cache: dict[int, Rules] = {}
        loaded = fleet_queryset(annotate_condition(active.filter(pk__in=stateless), on))
        for unit in loaded:
            results.append(
                _check_loaded(unit, planned, clashes, on=on, memo=memo, rules_cache=cache)
            )
    ready, rejected = _ranked(results)
    return Plan(planned, wanted, ready, rejected)


def _ranked(results: list[Readiness]) -> tuple[list[Readiness], list[Readiness]]:
    """The units that can go, most margin first, and those that cannot, by serial. Units
    picked for the same job must answer to different addresses: the better-ranked unit keeps
    its address and a later one with the same address is set aside."""
    # Each unit's verdict worked out once (it walks the unit's checks).
    rejected: list[Readiness] = []
    ranked: list[tuple[int, float, str, Readiness]] = []
    for r in results:
        verdict = r.verdict
        if verdict is FAIL:
            rejected.append(r)
        else:
            ranked.append((-_RANK[verdict], -r.margin, r.unit.serial, r))
    ranked.sort(key=lambda k: k[:3])
    candidates = [k[3] for k in ranked]
    ready: list[Readiness] = []
    taken: dict[str, str] = {}
    for r in candidates:
        address = r.unit.acoustic_address
        if address in taken:
            clash = CheckResult(
                "Acoustic address",
                FAIL,
                f"address {address} is also {taken[address]}'s, ranked higher in this plan",
                "—",
            )
            r.checks.insert(0, clash)
            rejected.append(r)
            continue
        taken[address] = r.unit.serial
        ready.append(r)
    rejected.sort(key=lambda r: r.unit.serial)
    return ready, rejected
