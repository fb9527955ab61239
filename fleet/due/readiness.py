"""Readiness: can this unit go to this site for this period? Every check, with its numbers.

For a planned deployment (site, start date, days) each check gives pass, warn or fail, the
numbers behind it and the source of the formula:

1. Status: a unit that is in the water, quarantined, retired or lost cannot go.
2. Depth: the site's depth against the variant's rating, with a margin.
3. Pressure test: the site's sea pressure (TEOS-10, ``calc.seawater``) × the proof factor
   must not exceed what the last accepted, unvoided test held; the test must still be valid
   on the start date (warn if it lapses before recovery).
4. Battery: the fitted pack's charge on the start date (self-discharge to then) at the
   site's bottom temperature must cover the planned days at the planned interrogation rate
   and power step, and keep the reserve.
5. Anodes: each stays above its replace-at mass at recovery, with the planned days added to
   its immersed time.
6. Seals: each stays within its interval (and shelf life) to recovery; openings left.
7. Release test and sensor checks: valid through recovery; a failed test fails.
8. Recovery buoyancy: positive with a margin at the seabed's seawater density.
9. Acoustic address: no unit now in the water at the site answers to the same address.

The unit's margin (for ranking in the planner) is the smallest of the normalised margins:
battery charge to spare, anode mass to spare, depth rating to spare.
"""

from __future__ import annotations

import datetime as dt
from collections import Counter
from dataclasses import dataclass, field
from enum import StrEnum

from fleet.calc import buoyancy as calc_buoyancy
from fleet.calc import seals as calc_seals
from fleet.calc import seawater as calc_seawater
from fleet.models import Deployment, Site, Transponder

from .condition import Condition, condition_of
from .engine import (
    SENSOR_FLAGS,
    ItemKind,
    UnitEvaluation,
    _seal_item,
    _state,
    battery_projection,
    evaluate_unit,
    fleet_queryset,
    release_test_failures,
    sensor_check_failures,
)


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


@dataclass(slots=True)
class Readiness:
    unit: Transponder
    site: Site
    start: dt.date
    days: int
    interrogations_per_day: int
    power_step: int
    checks: list[CheckResult] = field(default_factory=list)
    margins: dict[str, float] = field(default_factory=dict)

    @property
    def end(self) -> dt.date:
        return self.start + dt.timedelta(days=self.days)

    @property
    def verdict(self) -> Verdict:
        return min((c.verdict for c in self.checks), key=lambda v: v.rank, default=Verdict.PASS)

    @property
    def first_failure(self) -> CheckResult | None:
        return next((c for c in self.checks if c.verdict == Verdict.FAIL), None)

    @property
    def margin(self) -> float:
        return min(self.margins.values(), default=0.0)


COMMON = "common practice, no published source"


def check_unit(
    ev: UnitEvaluation,
    *,
    site: Site,
    start: dt.date,
    days: int,
    interrogations_per_day: int | None = None,
    power_step: int | None = None,
    on: dt.date,
    at: dt.datetime,
    address_clashes: list[str] | None = None,
) -> Readiness:
    unit, rules, duty = ev.unit, ev.rules, ev.duty
    if days < 1 or days > 3650:
        raise ValueError(f"days must be in [1, 3650], got {days}")
    if start < on:
        raise ValueError(f"start must be today ({on}) or later, got {start}")
    rate = duty.replies_per_day if interrogations_per_day is None else interrogations_per_day
    step = unit.transmit_power_step if power_step is None else power_step
    r = Readiness(unit, site, start, days, round(rate), step)
    end = r.end
    add = r.checks.append
    variant = unit.variant
    state = _state(unit)

    # 1. Status: the unit's condition today (``condition.py``); a list that annotated it
    # already (``annotate_condition``) saves the query.
    condition = Condition(getattr(unit, "condition", None) or condition_of(unit, on))
    if condition.held:
        status_verdict, status_numbers = Verdict.FAIL, f"unit is {condition.label.lower()}"
        if unit.hold_reason:
            status_numbers += f": {unit.hold_reason}"
    elif condition == Condition.IN_WATER:
        status_verdict = Verdict.FAIL
        status_numbers = "unit is in the water now; recover and service it first"
    elif condition == Condition.ON_BENCH:
        status_verdict = Verdict.WARN
        status_numbers = "unit is on the bench now; close its bench visit before it goes"
    elif condition == Condition.NEEDS_WORK:
        # The checks below judge each item for this job; the condition is today's summary.
        status_verdict = Verdict.PASS
        status_numbers = "needs work today: an item is overdue or has no data (see below)"
    else:
        status_verdict, status_numbers = Verdict.PASS, condition.label.lower()
    add(CheckResult("Unit condition", status_verdict, status_numbers, "—"))

    # 2. Depth
    rating = variant.depth_rating_m
    spare = (rating - site.water_depth_m) / rating
    depth_numbers = (
        f"site {site.water_depth_m:.0f} m, rating {rating:.0f} m, "
        f"{spare:.0%} to spare (want {rules.depth_margin_fraction:.0%})"
    )
    if site.water_depth_m > rating:
        depth_verdict = Verdict.FAIL
    elif spare < rules.depth_margin_fraction:
        depth_verdict = Verdict.WARN
    else:
        depth_verdict = Verdict.PASS
    add(CheckResult("Depth rating", depth_verdict, depth_numbers, f"margin: {COMMON}"))
    r.margins["depth"] = spare

    # 3. Pressure test
    site_p = calc_seawater.pressure_dbar(site.water_depth_m, site.latitude_deg)
    needed = site_p * rules.proof_factor
    test = state.last_pressure_test if state else None
    source = f"sea pressure: TEOS-10 (gsw); proof factor {rules.proof_factor:g}: {COMMON}"
    due_on, basis = _due_of(ev, ItemKind.PRESSURE_TEST)
    if test is None:
        add(CheckResult("Pressure test", Verdict.FAIL, "no pressure test recorded", source))
    else:
        numbers = (
            f"site {site_p:.0f} dbar × {rules.proof_factor:g} = {needed:.0f} dbar; "
            f"tested {test.tested_on} at {test.start_pressure_dbar:.0f} dbar"
        )
        if state.test_voided_by_opening:
            verdict, numbers = Verdict.FAIL, numbers + "; void: the housing was opened since"
        elif test.ingress_found or test.start_pressure_dbar < needed * (
            1.0 - rules.gauge_tolerance_percent / 100.0
        ):
            verdict = Verdict.FAIL
            numbers += "; ingress found" if test.ingress_found else "; held less than needed"
        elif due_on is None or due_on < start:
            verdict, numbers = Verdict.FAIL, numbers + f"; {basis}"
        elif due_on < end:
            verdict, numbers = Verdict.WARN, numbers + f"; lapses {due_on}, before recovery {end}"
        else:
            verdict, numbers = Verdict.PASS, numbers + f"; valid to {due_on}"
        add(CheckResult("Pressure test", verdict, numbers, source))

    # 4. Battery
    steps = {s.step: s.charge_per_reply_as for s in variant.reply_steps.all()}
    b_source = "capacity vs temperature: Linden's Handbook of Batteries (from memory); charge = I·t"
    battery = (
        battery_projection(
            unit,
            state,
            rules,
            duty,
            start,
            at,
            steps,
            temperature_c=site.bottom_temperature_c,
            replies_per_day=rate,
            power_step=step,
        )
        if state is not None
        else None
    )
    if battery is None:
        add(CheckResult("Battery", Verdict.FAIL, "no pack recorded as fitted", b_source))
        r.margins["battery"] = -1.0
    else:
        need = battery.daily_in_water_ah * days + battery.self_discharge_daily_ah * days
        left = battery.remaining_ah - need
        numbers = (
            f"{battery.remaining_ah:.1f} Ah on {start} at {battery.temperature_c:g} °C; "
            f"{days} days at {rate:.0f} replies a day, step {step} "
            f"({battery.charge_per_reply_as * 1000:.1f} mA·s a reply) need {need:.1f} Ah; "
            f"{left:.1f} Ah left at recovery, reserve {battery.reserve_ah:.1f} Ah"
        )
        verdict = (
            Verdict.FAIL
            if left < 0
            else Verdict.WARN
            if left < battery.reserve_ah
            else Verdict.PASS
        )
        add(CheckResult("Battery", verdict, numbers, b_source))
        r.margins["battery"] = left / battery.usable_ah if battery.usable_ah else -1.0

    # 5. Anodes
    a_source = "wear fit against immersed days; DNV-RP-B401 (2010) Table 10-6 design rate"
    anode_margin = 1.0
    for p in ev.anodes:
        if p.fit is None:
            add(CheckResult(f"Anode: {p.name}", Verdict.WARN, "no reading recorded", a_source))
            continue
        mass_end = p.mass_after_kg(days)
        if mass_end is None:
            add(
                CheckResult(
                    f"Anode: {p.name}",
                    Verdict.WARN,
                    "no wear rate yet (one reading and no design current)",
                    a_source,
                )
            )
            continue
        spare_kg = mass_end - p.threshold_kg
        numbers = (
            f"{mass_end * 1000:.0f} g projected at recovery, replace at "
            f"{p.threshold_kg * 1000:.0f} g "
            f"({p.replace_at_percent:.0f} % of {p.new_kg * 1000:.0f} g)"
        )
        if (
            p.bond_resistance_ohm is not None
            and p.bond_resistance_ohm > rules.bond_resistance_limit_ohm
        ):
            add(
                CheckResult(
                    f"Anode: {p.name}",
                    Verdict.FAIL,
                    numbers + f"; bond {p.bond_resistance_ohm:g} Ω over the limit",
                    a_source,
                )
            )
            anode_margin = min(anode_margin, -1.0)
            continue
        verdict = Verdict.FAIL if spare_kg < 0 else Verdict.PASS
        if verdict == Verdict.PASS and p.fit.fast_wear:
            verdict, numbers = Verdict.WARN, numbers + "; wearing faster than design"
        add(CheckResult(f"Anode: {p.name}", verdict, numbers, a_source))
        anode_margin = min(anode_margin, spare_kg / p.new_kg)
    r.margins["anodes"] = anode_margin

    # 6. Seals
    s_source = f"intervals: {COMMON}; shelf life ISO 2230:2002"
    seal_rows = {row.position_id: row for row in unit.seal_states.all()}
    for seal in variant.seal_positions.all():
        row = seal_rows.get(seal.pk)
        if row is None or row.fitted_at is None:
            add(
                CheckResult(f"Seal: {seal.name}", Verdict.WARN, "no seal change recorded", s_source)
            )
            continue
        row.position = seal
        due_on, _, basis, _ = _seal_item(row, rules, on)
        if due_on is None or due_on < end:
            verdict = Verdict.FAIL
            numbers = f"due {due_on}, before recovery {end}: {basis}"
        else:
            verdict, numbers = Verdict.PASS, f"due {due_on}, after recovery {end}"
        add(CheckResult(f"Seal: {seal.name}", verdict, numbers, s_source))

    # 7. Release test and sensors
    if variant.release_fitted:
        test = state.last_release_test if state else None
        rel_source = f"validity and acceptance: {COMMON}"
        if test is None:
            add(CheckResult("Release test", Verdict.FAIL, "no release test recorded", rel_source))
        else:
            failures = release_test_failures(test, rules)
            valid_to = test.tested_on + dt.timedelta(days=rules.release_test_valid_days)
            if failures:
                add(CheckResult("Release test", Verdict.FAIL, "; ".join(failures), rel_source))
            elif valid_to < end:
                add(
                    CheckResult(
                        "Release test",
                        Verdict.FAIL,
                        f"tested {test.tested_on}, valid to {valid_to}, before recovery {end}",
                        rel_source,
                    )
                )
            else:
                add(
                    CheckResult(
                        "Release test",
                        Verdict.PASS,
                        f"tested {test.tested_on}, valid to {valid_to}",
                        rel_source,
                    )
                )
    for sensor, flag, attr in SENSOR_FLAGS:
        if not getattr(variant, flag):
            continue
        check = getattr(state, attr) if state else None
        name = f"Sensor: {sensor.label}"
        src = f"interval and tolerance: {COMMON}; PT100: IEC 60751"
        if check is None:
            add(CheckResult(name, Verdict.WARN, "no check recorded", src))
            continue
        failures = sensor_check_failures(check, unit, rules)
        valid_to = calc_seals.add_months(check.checked_on, rules.sensor_check_interval_months)
        if failures:
            add(CheckResult(name, Verdict.FAIL, "; ".join(failures), src))
        elif valid_to < end:
            add(
                CheckResult(
                    name,
                    Verdict.WARN,
                    f"checked {check.checked_on}, due {valid_to}, before recovery",
                    src,
                )
            )
        else:
            add(CheckResult(name, Verdict.PASS, f"checked {check.checked_on}, due {valid_to}", src))

    # 8. Recovery buoyancy
    buoy_src = f"Archimedes; density TEOS-10 (gsw); margins {COMMON}"
    if variant.mass_in_air_kg is None or variant.displaced_volume_m3 is None:
        add(
            CheckResult(
                "Recovery buoyancy",
                Verdict.WARN,
                "variant has no mass and volume recorded",
                buoy_src,
            )
        )
    else:
        rho = calc_seawater.density_kg_m3(
            site.bottom_temperature_c,
            site.practical_salinity,
            site_p,
            site.latitude_deg,
            site.longitude_deg,
        )
        result = calc_buoyancy.recovery_margin(
            [calc_buoyancy.BuoyancyPart(variant.mass_in_air_kg, variant.displaced_volume_m3)],
            rho,
            rules.recovery_min_margin_fraction,
            rules.recovery_min_net_buoyancy_kg,
        )
        numbers = (
            f"{result.net_buoyancy_kg:+.1f} kgf net at {rho:.1f} kg/m³ "
            f"({variant.mass_in_air_kg:g} kg in air, {variant.displaced_volume_m3:g} m³)"
        )
        if not result.passed:
            numbers += "; " + "; ".join(result.reasons)
        add(
            CheckResult(
                "Recovery buoyancy",
                Verdict.PASS if result.passed else Verdict.FAIL,
                numbers,
                buoy_src,
            )
        )

    # 9. Acoustic address
    clashes = address_clashes or []
    if clashes:
        add(
            CheckResult(
                "Acoustic address",
                Verdict.FAIL,
                f"address {unit.acoustic_address} already used at {site.name} by "
                f"{', '.join(clashes)}",
                "—",
            )
        )
    else:
        add(
            CheckResult(
                "Acoustic address",
                Verdict.PASS,
                f"address {unit.acoustic_address} free at {site.name}",
                "—",
            )
        )
    return r


def _due_of(ev: UnitEvaluation, kind: ItemKind) -> tuple[dt.date | None, str]:
    item = next((i for i in ev.items if i.kind == kind), None)
    return (None, "") if item is None else (item.due_on, item.basis)


def address_clashes_at(site: Site) -> dict[str, list[str]]:
    """Address → serials of units in the water at ``site`` now (one query)."""
    clashes: dict[str, list[str]] = {}
    for serial, address in Deployment.objects.filter(
        site=site, recovered_at__isnull=True
    ).values_list("unit__serial", "unit__acoustic_address"):
        clashes.setdefault(address, []).append(serial)
    return clashes


def readiness_for(
    unit: Transponder,
    *,
    site: Site,
    start: dt.date,
    days: int,
    interrogations_per_day: int | None = None,
    power_step: int | None = None,
    on: dt.date,
    at: dt.datetime,
) -> Readiness:
    loaded = fleet_queryset(Transponder.objects.filter(pk=unit.pk)).get()
    ev = evaluate_unit(loaded, on=on, at=at)
    others = [
        s for s in address_clashes_at(site).get(loaded.acoustic_address, []) if s != loaded.serial
    ]
    return check_unit(
        ev,
        site=site,
        start=start,
        days=days,
        interrogations_per_day=interrogations_per_day,
        power_step=power_step,
        on=on,
        at=at,
        address_clashes=others,
    )


@dataclass(frozen=True, slots=True)
class Plan:
    site: Site
    start: dt.date
    days: int
    wanted: int
    ready: list[Readiness]
    rejected: list[Readiness]

    @property
    def shortfall(self) -> int:
        return max(0, self.wanted - len(self.ready))

    @property
    def blockers(self) -> list[tuple[str, int]]:
        """What keeps units back, most common first: the work that would free the most."""
        counts = Counter(
            c.name.split(":")[0]
            for r in self.rejected
            for c in r.checks
            if c.verdict == Verdict.FAIL
        )
        return counts.most_common()


def plan_campaign(
    *,
    site: Site,
    start: dt.date,
    days: int,
    wanted: int,
    interrogations_per_day: int | None = None,
    on: dt.date,
    at: dt.datetime,
) -> Plan:
    """Every active unit checked for the job; those that pass, most margin first."""
    from .engine import evaluate_fleet

    clashes = address_clashes_at(site)
    results = []
    for ev in evaluate_fleet(on=on, at=at):
        others = [s for s in clashes.get(ev.unit.acoustic_address, []) if s != ev.unit.serial]
        results.append(
            check_unit(
                ev,
                site=site,
                start=start,
                days=days,
                interrogations_per_day=interrogations_per_day,
                on=on,
                at=at,
                address_clashes=others,
            )
        )
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
    return Plan(site, start, days, wanted, ready, rejected)
