"""Acceptance rules for the tests and checks a bench visit records, each written once.

The engine (due items), readiness (before a deployment), the record page and the
release-test certificate all ask these functions whether a test passed; none of them
restates a limit.

- **Pressure test**: the hold (``calc.pressure.evaluate_hold``) judged at the proof pressure
  for the variant's rated depth (``calc.pressure.required_test_pressure_dbar``), the start
  pressure allowed the gauge tolerance below it.
- **Release test**: the limit switch and the acoustic command confirmed; time to release and
  peak motor current within the variant's limits (``rules.Rules``).
- **Sensor check**: the unit's reading within tolerance of the reference; a temperature
  element's raw resistance also within its IEC 60751 class (``calc.rtd``).
"""

from __future__ import annotations

import datetime as dt
from dataclasses import dataclass

from fleet.calc import pressure as calc_pressure
from fleet.calc import rtd as calc_rtd
from fleet.calc import seawater as calc_seawater
from fleet.models import PressureTest, ReleaseTest, SensorCheck, Variant

from .rules import Rules


@dataclass(frozen=True, slots=True)
class PressureAcceptance:
    """One pressure test judged against the variant's proof pressure."""

    required_dbar: float
    accepted_from_dbar: float  # required less the gauge tolerance
    hold: calc_pressure.HoldVerdict

    @property
    def passed(self) -> bool:
        return self.hold.passed

    @property
    def reasons(self) -> tuple[str, ...]:
        return self.hold.reasons


def rated_test_pressure_dbar(variant: Variant, rules: Rules, latitude_deg: float) -> float:
    """The proof pressure for the variant's rated depth at ``latitude_deg``."""
    return calc_pressure.required_test_pressure_dbar(
        variant.depth_rating_m, latitude_deg, rules.proof_factor
    )


def pressure_test_acceptance(
    test: PressureTest, variant: Variant, rules: Rules
) -> PressureAcceptance:
    """The test judged at the proof pressure for the variant's rating, worked out at the
    workshop's reference latitude: a property of the housing, not of where it last went."""
    required = rated_test_pressure_dbar(variant, rules, rules.default_latitude_deg)
    accepted_from = required * (1.0 - rules.gauge_tolerance_percent / 100.0)
    hold = calc_pressure.evaluate_hold(
        test.start_pressure_dbar,
        test.end_pressure_dbar,
        # A zero hold (refused at entry, possible in old records) fails on the minimum.
        max(test.hold_minutes, 1e-9),
        test.water_temperature_start_c,
        test.water_temperature_end_c,
        test.ingress_found,
        accepted_from,
        min_hold_minutes=rules.hold_min_minutes,
        allowable_drop_percent=rules.allowable_drop_percent,
        gauge_tolerance_percent=rules.gauge_tolerance_percent,
    )
    return PressureAcceptance(required, accepted_from, hold)


def release_test_failures(test: ReleaseTest, rules: Rules) -> list[str]:
    """Every reason a release test failed; empty when it passed."""
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


def release_valid_to(tested_on: dt.date, rules: Rules) -> dt.date:
    """The last day a passed release test covers: the configured days from the test."""
    return tested_on + dt.timedelta(days=rules.release_test_valid_days)


@dataclass(frozen=True, slots=True)
class SensorTolerance:
    limit: float
    unit_label: str
    source: str


def sensor_tolerance(check: SensorCheck, variant: Variant, rules: Rules) -> SensorTolerance:
    """The tolerance a sensor's reading is judged against, with its unit and source."""
    if check.sensor == SensorCheck.Sensor.TEMPERATURE:
        return SensorTolerance(rules.temperature_tolerance_c, "°C", "tolerance: common practice")
    if check.sensor == SensorCheck.Sensor.PRESSURE:
        # Full scale is the sea pressure at the rated depth (TEOS-10 via gsw).
        full_scale = calc_seawater.pressure_dbar(variant.depth_rating_m, rules.default_latitude_deg)
        return SensorTolerance(
            rules.pressure_tolerance_fraction_of_rating * full_scale,
            "dbar",
            "tolerance: common practice, as a fraction of the rated depth's pressure (TEOS-10)",
        )
    return SensorTolerance(rules.tilt_tolerance_deg, "°", "tolerance: common practice")


def sensor_check_failures(check: SensorCheck, variant: Variant, rules: Rules) -> list[str]:
    """Every reason a sensor check failed; empty when it passed."""
    tolerance = sensor_tolerance(check, variant, rules)
    error = check.unit_reading - check.reference_value
    reasons = []
    if abs(error) > tolerance.limit:
        label = tolerance.unit_label
        reasons.append(f"reads {error:+.3g} {label} off, tolerance ±{tolerance.limit:.3g} {label}")
    if check.sensor == SensorCheck.Sensor.TEMPERATURE and check.raw_resistance_ohm is not None:
        element_t = calc_rtd.temperature_c(check.raw_resistance_ohm)
        element_tol = calc_rtd.tolerance_c(check.reference_value, rules.pt100_class)
        if abs(element_t - check.reference_value) > element_tol:
            reasons.append(
                f"PT100 element at {check.raw_resistance_ohm:g} Ω is {element_t:.2f} °C, outside "
                f"IEC 60751 class {rules.pt100_class} ±{element_tol:.2f} °C"
            )
    return reasons


def pressure_failed_fields(
    test: PressureTest, acceptance: PressureAcceptance, rules: Rules
) -> tuple[str, ...]:
    """The recorded values behind each reason the hold failed, in the form's order."""
    hold = acceptance.hold
    failed = {
        "start_pressure_dbar": test.start_pressure_dbar < acceptance.accepted_from_dbar,
        "hold_minutes": test.hold_minutes < rules.hold_min_minutes,
        "end_pressure_dbar": hold.drop_percent > rules.allowable_drop_percent
        or hold.rose_beyond_gauge,
        "water_temperature_end_c": abs(hold.temperature_change_c)
        > calc_pressure.DEFAULT_MAX_TEMPERATURE_CHANGE_C,
        "ingress_found": test.ingress_found,
    }
    return tuple(name for name, bad in failed.items() if bad)


def release_failed_fields(test: ReleaseTest, rules: Rules) -> tuple[str, ...]:
    """The recorded values behind each of ``release_test_failures``' reasons."""
    failed = {
        "seconds_to_release": test.seconds_to_release > rules.release_max_seconds,
        "motor_current_a": test.motor_current_a > rules.release_max_motor_current_a,
        "limit_switch_ok": not test.limit_switch_ok,
        "acoustic_command_ok": not test.acoustic_command_ok,
    }
    return tuple(name for name, bad in failed.items() if bad)


def sensor_failed_fields(check: SensorCheck, variant: Variant, rules: Rules) -> tuple[str, ...]:
    """The recorded values behind each of ``sensor_check_failures``' reasons."""
    failed = []
    for reason in sensor_check_failures(check, variant, rules):
        failed.append("raw_resistance_ohm" if reason.startswith("PT100") else "unit_reading")
    return tuple(failed)


@dataclass(frozen=True, slots=True)
class EntryVerdict:
    """A test's verdict as the record page, the unit history and the service report show it
    beside the entry: the word and a shape, so a black-and-white print still reads."""

    passed: bool
    reasons: tuple[str, ...]
    failed_fields: tuple[str, ...] = ()

    @property
    def label(self) -> str:
        return "Pass" if self.passed else "FAIL"

    @property
    def icon(self) -> str:
        return "✔" if self.passed else "✖"

    @property
    def value(self) -> str:
        return "pass" if self.passed else "fail"

    @property
    def words(self) -> str:
        """The verdict in one line: "✖ FAIL: limit switch not confirmed"."""
        head = f"{self.icon} {self.label}"
        return f"{head}: {'; '.join(self.reasons)}" if self.reasons else head


def entry_verdict(entry: object, variant: Variant, rules: Rules) -> EntryVerdict | None:
    """The verdict of a pressure test, release test or sensor check (the same rules the due
    items and readiness apply); None for an entry that is not a test."""
    if isinstance(entry, PressureTest):
        acceptance = pressure_test_acceptance(entry, variant, rules)
        return EntryVerdict(
            acceptance.passed,
            acceptance.reasons,
            pressure_failed_fields(entry, acceptance, rules),
        )
    if isinstance(entry, ReleaseTest):
        failures = release_test_failures(entry, rules)
        return EntryVerdict(not failures, tuple(failures), release_failed_fields(entry, rules))
    if isinstance(entry, SensorCheck):
        failures = sensor_check_failures(entry, variant, rules)
        return EntryVerdict(
            not failures, tuple(failures), sensor_failed_fields(entry, variant, rules)
        )
    return None
