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
from collections import Counter
from collections.abc import Callable
from dataclasses import dataclass, field
from enum import StrEnum

from fleet.calc import buoyancy as calc_buoyancy
from fleet.calc import ranging as calc_ranging
from fleet.calc import seawater as calc_seawater
from fleet.models import Deployment, Site, Transponder

from .condition import Condition, annotate_condition, condition_of
from .engine import (
    SENSOR_FLAGS,
    UnitEvaluation,
    battery_projection,
    evaluate_fleet,
    evaluate_unit,
    fleet_queryset,
    sensor_key,
    state_of,
)
from .items import DueItem
from .planned import PlannedDeployment


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
        return {"fail": 0, "warn": 1, "pass": 2}[self.value]


@dataclass(frozen=True, slots=True)
class CheckResult:
    name: str
    verdict: Verdict
    numbers: str
    source: str


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
    unit: Transponder
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
        return min((c.verdict for c in self.checks), key=lambda v: v.rank, default=Verdict.PASS)

    @property
    def failures(self) -> list[CheckResult]:
        return [c for c in self.checks if c.verdict == Verdict.FAIL]

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


@dataclass(frozen=True, slots=True)
class Context:
    """What every check reads: the evaluation, the plan and the duty it implies."""

    ev: UnitEvaluation
    planned: PlannedDeployment
    rate: float
    step: int
    site_pressure_dbar: float


def _dated_item_check(
    name: str,
    item: DueItem | None,
    planned: PlannedDeployment,
    source: str,
    *,
    missing: Verdict,
    lapses: Verdict,
    expired: Verdict = Verdict.FAIL,
) -> CheckResult:
    """A test or interval item against the planned period: a fault fails; due by the start
    gives ``expired`` (a fail unless the item does not bear on the unit's safe return);
    lapsing before recovery gives ``lapses``; no record gives ``missing``."""
    if item is None or item.due_on is None:
        basis = item.basis if item is not None else "nothing recorded"
        return CheckResult(name, missing, basis, source)
    if item.failed:
        return CheckResult(name, Verdict.FAIL, item.basis, source)
    if item.due_on <= planned.start:
        return CheckResult(
            name, expired, f"due {item.due_on}, by the start {planned.start}", source
        )
    if item.due_on < planned.end:
        return CheckResult(
            name, lapses, f"due {item.due_on}, before recovery {planned.end}", source
        )
    return CheckResult(
        name, Verdict.PASS, f"due {item.due_on}, after recovery {planned.end}", source
    )


def check_status(c: Context) -> list[CheckResult]:
    """The unit's condition today (``condition.py``); a list that annotated it already
    (``annotate_condition``) saves the query."""
    unit = c.ev.unit
    condition = Condition(getattr(unit, "condition", None) or condition_of(unit, c.ev.on))
    if condition.held:
        verdict, numbers = Verdict.FAIL, f"unit is {condition.label.lower()}"
        if unit.hold_reason:
            numbers += f": {unit.hold_reason}"
    elif condition == Condition.IN_WATER:
        verdict = Verdict.FAIL
        numbers = "unit is in the water now; recover and service it first"
    elif condition == Condition.ON_BENCH:
        verdict = Verdict.WARN
        numbers = "unit is on the bench now; close its bench visit before it goes"
    elif condition == Condition.NEEDS_WORK:
        # The checks below judge each item for this job; the condition is today's summary.
        verdict = Verdict.PASS
        numbers = "needs work today: an item is overdue or has no data (see below)"
    else:
        verdict, numbers = Verdict.PASS, condition.label.lower()
    return [CheckResult("Unit condition", verdict, numbers, "—")]


def check_depth(c: Context, margins: dict[str, float]) -> list[CheckResult]:
    rules, site = c.ev.rules, c.planned.site
    rating = c.ev.unit.variant.depth_rating_m
    spare = (rating - site.water_depth_m) / rating
    margins["depth"] = spare
    numbers = (
        f"site {site.water_depth_m:.0f} m, rating {rating:.0f} m, "
        f"{spare:.0%} to spare (want {rules.depth_margin_fraction:.0%})"
    )
    if site.water_depth_m > rating:
        verdict = Verdict.FAIL
    elif spare < rules.depth_margin_fraction:
        verdict = Verdict.WARN
    else:
        verdict = Verdict.PASS
    return [CheckResult("Depth rating", verdict, numbers, f"margin: {COMMON}")]


def check_pressure_test(c: Context) -> list[CheckResult]:
    rules = c.ev.rules
    state = state_of(c.ev.unit)
    test = state.last_pressure_test if state else None
    needed = c.site_pressure_dbar * rules.proof_factor
    source = f"sea pressure: TEOS-10 (gsw); proof factor {rules.proof_factor:g}: {COMMON}"
    name = "Pressure test"
    item = c.ev.item("pressure_test")
    if test is None or item is None:
        return [CheckResult(name, Verdict.FAIL, "no pressure test recorded", source)]
    head = f"site {c.site_pressure_dbar:.0f} dbar × {rules.proof_factor:g} = {needed:.0f} dbar"
    if item.failed:
        return [CheckResult(name, Verdict.FAIL, f"{head}; {item.basis}", source)]
    tested = f"tested {test.tested_on} at {test.start_pressure_dbar:.0f} dbar"
    if test.start_pressure_dbar < needed * (1.0 - rules.gauge_tolerance_percent / 100.0):
        return [CheckResult(name, Verdict.FAIL, f"{head}; {tested}: held less than needed", source)]
    dated = _dated_item_check(
        name, item, c.planned, source, missing=Verdict.FAIL, lapses=Verdict.WARN
    )
    return [CheckResult(name, dated.verdict, f"{head}; {tested}; {dated.numbers}", source)]


def check_battery(c: Context, margins: dict[str, float]) -> list[CheckResult]:
    ev, planned = c.ev, c.planned
    source = "capacity vs temperature: Linden's Handbook of Batteries (from memory); charge = I·t"
    state = state_of(ev.unit)
    battery = (
        battery_projection(
            ev.unit,
            state,
            ev.rules,
            ev.duty,
            ev.steps,
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
        return [CheckResult("Battery", Verdict.FAIL, "no pack recorded as fitted", source)]
    days = planned.days
    need = (battery.daily_in_water_ah + battery.self_discharge_daily_ah) * days
    left = battery.remaining_ah - need
    numbers = (
        f"{battery.remaining_ah:.1f} Ah on {planned.start} at {battery.temperature_c:g} °C; "
        f"{days} days at {c.rate:.0f} replies a day, step {c.step} "
        f"({battery.charge_per_reply_as * 1000:.1f} mA·s a reply) need {need:.1f} Ah; "
        f"{left:.1f} Ah left at recovery, reserve {battery.reserve_ah:.1f} Ah"
    )
    if left < 0:
        verdict = Verdict.FAIL
    elif left < battery.reserve_ah:
        verdict = Verdict.WARN
    else:
        verdict = Verdict.PASS
    margins["battery"] = left / battery.usable_ah if battery.usable_ah else -1.0
    return [CheckResult("Battery", verdict, numbers, source)]


def check_anodes(c: Context, margins: dict[str, float]) -> list[CheckResult]:
    source = "wear fit against immersed days; DNV-RP-B401 (2010) Table 10-6 design rate"
    results = []
    anode_margin = 1.0
    for p in c.ev.anodes:
        name = f"Anode: {p.name}"
        if p.fit is None:
            results.append(CheckResult(name, Verdict.WARN, "no reading recorded", source))
            continue
        mass_end = p.mass_after_kg(c.planned.days)
        if mass_end is None:
            numbers = "no wear rate yet (one reading and no design current)"
            results.append(CheckResult(name, Verdict.WARN, numbers, source))
            continue
        spare_kg = mass_end - p.threshold_kg
        numbers = (
            f"{mass_end * 1000:.0f} g projected at recovery, replace at "
            f"{p.threshold_kg * 1000:.0f} g ({p.replace_at_percent:.0f} % of "
            f"{p.new_kg * 1000:.0f} g)"
        )
        if p.bond_fault(c.ev.rules):
            numbers += f"; bond {p.bond_resistance_ohm:g} Ω over the limit"
            results.append(CheckResult(name, Verdict.FAIL, numbers, source))
            anode_margin = min(anode_margin, -1.0)
            continue
        verdict = Verdict.FAIL if spare_kg < 0 else Verdict.PASS
        if verdict == Verdict.PASS and p.fit.fast_wear:
            verdict, numbers = Verdict.WARN, numbers + "; wearing faster than design"
        results.append(CheckResult(name, verdict, numbers, source))
        anode_margin = min(anode_margin, spare_kg / p.new_kg)
    margins["anodes"] = anode_margin
    return results


def check_seals(c: Context) -> list[CheckResult]:
    source = f"intervals: {COMMON}; shelf life ISO 2230:2002"
    results = []
    for seal in c.ev.unit.variant.seal_positions.all():
        name = f"Seal: {seal.name}"
        item = c.ev.item(f"seal:{seal.pk}")
        if item is None or item.due_on is None:
            results.append(CheckResult(name, Verdict.WARN, "no seal change recorded", source))
            continue
        result = _dated_item_check(
            name, item, c.planned, source, missing=Verdict.WARN, lapses=Verdict.FAIL
        )
        if result.verdict == Verdict.FAIL and not item.failed:
            result = CheckResult(name, result.verdict, f"{result.numbers}: {item.basis}", source)
        results.append(result)
    return results


def check_release(c: Context) -> list[CheckResult]:
    if not c.ev.unit.variant.release_fitted:
        return []
    source = f"validity and acceptance: {COMMON}"
    item = c.ev.item("release_test")
    if item is None or item.due_on is None:
        return [CheckResult("Release test", Verdict.FAIL, "no release test recorded", source)]
    return [
        _dated_item_check(
            "Release test", item, c.planned, source, missing=Verdict.FAIL, lapses=Verdict.FAIL
        )
    ]


def check_sensors(c: Context) -> list[CheckResult]:
    results = []
    for sensor, flag, _attr in SENSOR_FLAGS:
        if not getattr(c.ev.unit.variant, flag):
            continue
        source = f"interval and tolerance: {COMMON}"
        if sensor == sensor.TEMPERATURE:
            source += "; PT100 element: IEC 60751"
        elif sensor == sensor.PRESSURE:
            source += "; full scale at the rated depth: TEOS-10 (gsw)"
        item = c.ev.item(sensor_key(sensor))
        results.append(
            _dated_item_check(
                f"Sensor: {sensor.label}",
                item,
                c.planned,
                source,
                missing=Verdict.WARN,
                lapses=Verdict.WARN,
                # A lapsed calibration spoils the data, not the unit's return: a check.
                expired=Verdict.WARN,
            )
        )
    return results


def check_buoyancy(c: Context) -> list[CheckResult]:
    variant, site, rules = c.ev.unit.variant, c.planned.site, c.ev.rules
    source = (
        "Archimedes; density TEOS-10 (gsw) at the seabed and the surface, the lower taken; "
        f"reserve {rules.recovery_reserve_fraction_of_mass:.0%} of the mass in air, at least "
        f"{rules.recovery_min_net_buoyancy_kg:g} kgf: {COMMON}"
    )
    name = "Recovery buoyancy"
    if variant.mass_in_air_kg is None or variant.displaced_volume_m3 is None:
        return [CheckResult(name, Verdict.WARN, "variant has no mass and volume recorded", source)]
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
    numbers = (
        f"{result.net_buoyancy_kg:+.1f} kgf net at the {result.met_at} "
        f"({result.density_kg_m3:.1f} kg/m³), needs {result.required_kg:.1f} kgf "
        f"({variant.mass_in_air_kg:g} kg in air, {variant.displaced_volume_m3:g} m³)"
    )
    if not result.passed:
        numbers += "; " + "; ".join(result.reasons)
    verdict = Verdict.PASS if result.passed else Verdict.FAIL
    return [CheckResult(name, verdict, numbers, source)]


def check_ranging(c: Context) -> list[CheckResult]:
    """The reply must arrive after the interrogator's blanking and end before its next
    interrogation, at the farthest planned geometry (and the nearest: straight overhead)."""
    unit, site, rules = c.ev.unit, c.planned.site, c.ev.rules
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
    speed = calc_seawater.sound_speed_m_s(
        site.bottom_temperature_c,
        site.practical_salinity,
        c.site_pressure_dbar,
        site.latitude_deg,
        site.longitude_deg,
    )
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
    verdict = Verdict.PASS if all(t.fits for t in timings) else Verdict.FAIL
    return [CheckResult("Reply timing", verdict, numbers, source)]


def check_address(c: Context, clashes: list[str]) -> list[CheckResult]:
    unit, site = c.ev.unit, c.planned.site
    if clashes:
        numbers = (
            f"address {unit.acoustic_address} already used at {site.name} by {', '.join(clashes)}"
        )
        return [CheckResult("Acoustic address", Verdict.FAIL, numbers, "—")]
    numbers = f"address {unit.acoustic_address} free at {site.name}"
    return [CheckResult("Acoustic address", Verdict.PASS, numbers, "—")]


def check_unit(
    ev: UnitEvaluation,
    planned: PlannedDeployment,
    *,
    address_clashes: list[str] | None = None,
) -> Readiness:
    """Every check of ``ev``'s unit for ``planned``, in the order of the module docstring."""
    unit = ev.unit
    rate = (
        ev.duty.replies_per_day
        if planned.interrogations_per_day is None
        else planned.interrogations_per_day
    )
    step = unit.transmit_power_step if planned.power_step is None else planned.power_step
    site = planned.site
    site_p = calc_seawater.pressure_dbar(site.water_depth_m, site.latitude_deg)
    c = Context(ev, planned, rate, step, site_p)
    r = Readiness(unit, planned, round(rate), step)
    checks: tuple[Callable[[], list[CheckResult]], ...] = (
        lambda: check_status(c),
        lambda: check_depth(c, r.margins),
        lambda: check_pressure_test(c),
        lambda: check_battery(c, r.margins),
        lambda: check_anodes(c, r.margins),
        lambda: check_seals(c),
        lambda: check_release(c),
        lambda: check_sensors(c),
        lambda: check_buoyancy(c),
        lambda: check_ranging(c),
        lambda: check_address(c, address_clashes or []),
    )
    for check in checks:
        r.checks.extend(check())
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
    """``unit`` checked for ``planned``, evaluated as of ``on``."""
    loaded = fleet_queryset(Transponder.objects.filter(pk=unit.pk)).get()
    ev = evaluate_unit(loaded, on=on)
    others = [
        s
        for s in address_clashes_at(planned.site.pk).get(loaded.acoustic_address, [])
        if s != loaded.serial
    ]
    return check_unit(ev, planned, address_clashes=others)


@dataclass(frozen=True, slots=True)
class Plan(_OfAPlan):
    planned: PlannedDeployment
    wanted: int
    ready: list[Readiness]
    rejected: list[Readiness]

    @property
    def shortfall(self) -> int:
        return max(0, self.wanted - len(self.ready))

    @property
    def blockers(self) -> list[tuple[str, int]]:
        """What keeps units back, most common first: the work that would free the most."""
        counts = Counter(c.name.split(":")[0] for r in self.rejected for c in r.failures)
        return counts.most_common()


def plan_campaign(planned: PlannedDeployment, *, wanted: int, on: dt.date) -> Plan:
    """Every active unit checked for the job; those that pass, most margin first."""
    clashes = address_clashes_at(planned.site.pk)
    results = []
    # The condition comes with the units (one SQL expression), not one query per unit.
    units = annotate_condition(Transponder.objects.all(), on)
    for ev in evaluate_fleet(on=on, queryset=units):
        others = [s for s in clashes.get(ev.unit.acoustic_address, []) if s != ev.unit.serial]
        results.append(check_unit(ev, planned, address_clashes=others))
    candidates = sorted(
        (r for r in results if r.verdict != Verdict.FAIL),
        key=lambda r: (-r.verdict.rank, -r.margin, r.unit.serial),
    )
    # Units picked for the same job must answer to different addresses: the better-ranked
    # unit keeps its address and a later one with the same address is set aside.
    ready: list[Readiness] = []
    taken: dict[str, str] = {}
    rejected = [r for r in results if r.verdict == Verdict.FAIL]
    for r in candidates:
        address = r.unit.acoustic_address
        if address in taken:
            clash = CheckResult(
                "Acoustic address",
                Verdict.FAIL,
                f"address {address} is also {taken[address]}'s, ranked higher in this plan",
                "—",
            )
            r.checks.insert(0, clash)
            rejected.append(r)
            continue
        taken[address] = r.unit.serial
        ready.append(r)
    rejected.sort(key=lambda r: r.unit.serial)
    return Plan(planned, wanted, ready, rejected)
