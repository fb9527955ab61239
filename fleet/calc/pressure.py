"""Hydrostatic proof testing of pressure housings (external pressure).

Safety first: test **hydrostatically only**.  Water is nearly incompressible, so a
water-filled test vessel stores little energy; gas stores far more.  An air-filled
housing under external pressure can *implode* and release roughly p x V of energy inside
the vessel: fill the chamber with water, vent trapped air, keep people clear of the
vessel and its closures, and never use a pneumatic test in place of a hydrostatic one
without an engineered procedure.  A housing that comes back from a test or from depth
may hold internal pressure (a leak at depth, a vented lithium cell): vent it behind a
shield before removing an end cap and never stand in line with one.  Local codes,
company procedures and licensed practice take precedence (ASME PCC-2 Art. 501 as the
general reference).

Test pressure: proof_factor x the sea pressure at the rated depth (TEOS-10).  Pressure
hulls for manned vehicles are tested to 1.25 x design depth (classification-society
rules for underwater vehicles); for instrument housings 1.1-1.5 x is common practice, so
the factor is an argument, default 1.25.

Hold evaluation (``evaluate_hold``) collects *every* reason a hold fails:

1. start pressure below the required test pressure;
2. hold shorter than ``min_hold_minutes``.  There is **no minimum hold in this module**:
   the number is workshop practice (common practice, no published source; ASME B31.3
   holds a piping leak test >= 10 min, instrument housings are often held 30-60 min), so
   it is the operator's setting and the caller must pass it (the rules layer reads it from
   ``settings.HOLDFAST["PRESSURE_HOLD_MIN_MINUTES"]``).  One number, one place;
3. the signed change end - start is judged against the gauge:
   - a fall of more than ``allowable_drop_percent`` of the start pressure fails
     (default 1 %, common practice);
   - a rise of more than ``gauge_tolerance_percent`` of the start pressure fails on its
     own reason: a closed hold cannot gain pressure, so the reading is a gauge or
     temperature effect, or a leak in the test rig, and the test must be repeated;
   - a rise within the gauge tolerance counts as no drop (``drop_dbar`` 0);
   ``gauge_tolerance_percent`` default 0.25 % of reading is common practice (a test gauge
   of accuracy class 0.25), no published source;
4. water found inside the housing;
5. water temperature changed by more than ``max_temperature_change_c`` (default 1 degC,
   common practice): in a closed water-filled vessel a temperature change alone moves the
   pressure by several dbar per degC, so the hold is inconclusive; the reason says so
   when a fall in temperature could explain a drop.

Domains (module constants, so forms can offer the same limits):
``WATER_TEMPERATURE_RANGE_C`` (-2, 40) degC: test water from the freezing point of
seawater (about -1.9 degC at SP 35, TEOS-10 ``gsw.t_freezing``) to a warm workshop;
``TEST_PRESSURE_RANGE_DBAR`` (0, 20000) dbar: a test vessel is not the sea, so a
full-depth housing proofed at 1.25 x ~11000 dbar still fits; ``PROOF_FACTOR_RANGE``.

``pressure_test_plausibility`` lists what looks wrong in a recorded test before it is
judged (start not at the test pressure within the gauge tolerance, a rise, a test
pressure far above the rating, zero pressures or minutes).
"""

from __future__ import annotations

from dataclasses import dataclass
from typing import Final

from fleet.calc._checks import require_non_negative, require_positive, require_range
from fleet.calc.seawater import MAX_PRESSURE_DBAR, pressure_dbar

DEFAULT_PROOF_FACTOR: Final = 1.25  # common practice, no published source for housings
DEFAULT_ALLOWABLE_DROP_PERCENT: Final = 1.0  # common practice, no published source
DEFAULT_MAX_TEMPERATURE_CHANGE_C: Final = 1.0  # common practice, no published source
DEFAULT_GAUGE_TOLERANCE_PERCENT: Final = 0.25  # common practice (class 0.25 test gauge)
# Connector and housing proofs run at 1.1-2 x rating (common practice, no published
# source); a recorded test pressure above 2 x the rating is more likely a typing slip.
DEFAULT_MAX_OVER_RATING_FACTOR: Final = 2.0

WATER_TEMPERATURE_RANGE_C: Final = (-2.0, 40.0)
TEST_PRESSURE_RANGE_DBAR: Final = (0.0, 20000.0)
PROOF_FACTOR_RANGE: Final = (1.0, 3.0)
GAUGE_TOLERANCE_PERCENT_RANGE: Final = (0.0, 10.0)


def _test_pressure(name: str, value: float) -> float:
    return require_range(name, value, *TEST_PRESSURE_RANGE_DBAR, unit="dbar")


def _water_temperature(name: str, value: float) -> float:
    return require_range(name, value, *WATER_TEMPERATURE_RANGE_C, unit="degC")


def _gauge_tolerance(value: float) -> float:
    return require_range("gauge_tolerance_percent", value, *GAUGE_TOLERANCE_PERCENT_RANGE, unit="%")


def required_test_pressure_dbar(
    rated_depth_m: float, latitude_deg: float, proof_factor: float = DEFAULT_PROOF_FACTOR
) -> float:
    """Proof pressure = proof_factor x gsw sea pressure at the rated depth.

    ``proof_factor`` default 1.25 is common practice for instrument housings (the same
    factor as manned pressure hulls); it must be in [1.0, 3.0].
    Example: 1350 m at 45 deg, x1.25 -> 1.25 x 1365.511 = 1706.889 dbar.
    """
    factor = require_range("proof_factor", proof_factor, *PROOF_FACTOR_RANGE)
    return factor * pressure_dbar(rated_depth_m, latitude_deg)


@dataclass(frozen=True, slots=True)
class HoldVerdict:
    passed: bool
    reasons: tuple[str, ...]  # every reason it failed; empty when passed
    drop_dbar: float  # start - end when the pressure fell, else 0
    drop_percent: float  # drop_dbar as % of the start pressure (0 when it did not fall)
    temperature_change_c: float  # end - start
    change_dbar: float  # signed end - start (positive: the pressure rose)
    change_percent: float  # change_dbar as % of the start pressure
    rose_beyond_gauge: bool  # a rise larger than the gauge tolerance


def evaluate_hold(
    start_pressure_dbar: float,
    end_pressure_dbar: float,
    hold_minutes: float,
    water_temperature_start_c: float,
    water_temperature_end_c: float,
    ingress_found: bool,
    required_pressure_dbar: float,
    min_hold_minutes: float,
    allowable_drop_percent: float = DEFAULT_ALLOWABLE_DROP_PERCENT,
    max_temperature_change_c: float = DEFAULT_MAX_TEMPERATURE_CHANGE_C,
    *,
    gauge_tolerance_percent: float = DEFAULT_GAUGE_TOLERANCE_PERCENT,
) -> HoldVerdict:
    """Judge one pressure hold; see the module docstring for the rules and defaults.

    ``min_hold_minutes`` has no default: it is the operator's setting.
    Example: 1710 -> 1700 dbar over 60 min (minimum 30), 4.0 -> 4.2 degC, dry, required
    1706.9 dbar: drop 0.585 % -> passed.  3810 -> 9500 dbar: rose 149 % -> failed.
    """
    p0 = _test_pressure("start_pressure_dbar", start_pressure_dbar)
    p1 = _test_pressure("end_pressure_dbar", end_pressure_dbar)
    minutes = require_positive("hold_minutes", hold_minutes, unit="min")
    t0 = _water_temperature("water_temperature_start_c", water_temperature_start_c)
    t1 = _water_temperature("water_temperature_end_c", water_temperature_end_c)
    if not isinstance(ingress_found, bool):
        raise TypeError(f"ingress_found must be a bool, got {type(ingress_found).__name__}")
    required = require_range(
        "required_pressure_dbar",
        required_pressure_dbar,
        *TEST_PRESSURE_RANGE_DBAR,
        lo_open=True,
        unit="dbar",
    )
    min_minutes = require_non_negative("min_hold_minutes", min_hold_minutes, unit="min")
    allowable = require_range("allowable_drop_percent", allowable_drop_percent, 0.0, 100.0)
    max_dt = require_non_negative("max_temperature_change_c", max_temperature_change_c)
    tolerance = _gauge_tolerance(gauge_tolerance_percent)

    change = p1 - p0
    change_percent = change / p0 * 100.0 if p0 > 0.0 else 0.0
    drop = max(0.0, -change)
    drop_percent = max(0.0, -change_percent)
    rose = change_percent > tolerance
    dt_c = t1 - t0
    reasons: list[str] = []
    if p0 < required:
        reasons.append(f"start pressure {p0:.1f} dbar is below the required {required:.1f} dbar")
    if minutes < min_minutes:
        reasons.append(f"hold of {minutes:g} min is shorter than the minimum {min_minutes:g} min")
    if drop_percent > allowable:
        reasons.append(
            f"pressure fell {drop:.1f} dbar ({drop_percent:.2f} %), more than the allowed "
            f"{allowable:g} %"
        )
    if rose:
        reasons.append(
            f"pressure rose {change:.1f} dbar ({change_percent:.2f} %) during the hold, more "
            f"than the gauge tolerance {tolerance:g} %: a gauge or temperature effect, or a "
            "leak in the test rig; repeat the test"
        )
    if ingress_found:
        reasons.append("water found inside the housing")
    if abs(dt_c) > max_dt:
        if dt_c < 0.0 and drop > 0.0:
            reasons.append(
                f"water temperature fell {-dt_c:.1f} degC during the hold, enough to explain "
                "a pressure drop; repeat once the temperature is steady"
            )
        else:
            reasons.append(
                f"water temperature changed {dt_c:+.1f} degC during the hold (limit "
                f"{max_dt:g} degC), which can mask a leak; repeat once the temperature is steady"
            )
    return HoldVerdict(
        not reasons, tuple(reasons), drop, drop_percent, dt_c, change, change_percent, rose
    )


def pressure_test_plausibility(
    test_pressure_dbar: float,
    start_pressure_dbar: float,
    end_pressure_dbar: float,
    hold_minutes: float,
    rated_pressure_dbar: float,
    *,
    gauge_tolerance_percent: float = DEFAULT_GAUGE_TOLERANCE_PERCENT,
    max_over_rating_factor: float = DEFAULT_MAX_OVER_RATING_FACTOR,
) -> tuple[str, ...]:
    """Every reason a recorded pressure test looks implausible; empty when it looks sound.

    Checks (thresholds common practice, no published source): a zero test, start, end or
    rated pressure, or zero minutes; the start not within ``gauge_tolerance_percent`` of
    the test pressure; the end above the start by more than that tolerance; the test
    pressure above ``max_over_rating_factor`` x the rated pressure.
    Example: test 1707, start 1710, end 1700 dbar, 60 min, rated 1365.5 dbar -> () ;
    test 3810, start 3810, end 9500 -> ("end pressure 9500.0 dbar is 149.34 % above ...",).
    """
    test = _test_pressure("test_pressure_dbar", test_pressure_dbar)
    p0 = _test_pressure("start_pressure_dbar", start_pressure_dbar)
    p1 = _test_pressure("end_pressure_dbar", end_pressure_dbar)
    minutes = require_non_negative("hold_minutes", hold_minutes, unit="min")
    rated = require_range("rated_pressure_dbar", rated_pressure_dbar, 0.0, MAX_PRESSURE_DBAR)
    tolerance = _gauge_tolerance(gauge_tolerance_percent)
    factor = require_range("max_over_rating_factor", max_over_rating_factor, 1.0, 10.0)

    reasons: list[str] = []
    for label, value in (
        ("test pressure", test),
        ("start pressure", p0),
        ("end pressure", p1),
        ("rated pressure", rated),
    ):
        if value == 0.0:
            reasons.append(f"{label} is zero")
    if minutes == 0.0:
        reasons.append("hold of 0 min")
    if test > 0.0 and abs(p0 - test) > tolerance / 100.0 * test:
        off = (p0 - test) / test * 100.0
        reasons.append(
            f"start pressure {p0:.1f} dbar is {off:+.2f} % off the test pressure "
            f"{test:.1f} dbar, beyond the gauge tolerance {tolerance:g} %"
        )
    if p0 > 0.0 and p1 - p0 > tolerance / 100.0 * p0:
        reasons.append(
            f"end pressure {p1:.1f} dbar is {(p1 - p0) / p0 * 100.0:.2f} % above the start "
            f"{p0:.1f} dbar, beyond the gauge tolerance {tolerance:g} %"
        )
    if rated > 0.0 and test > factor * rated:
        reasons.append(
            f"test pressure {test:.1f} dbar is {test / rated:.2f} x the rated "
            f"{rated:.1f} dbar, above {factor:g} x"
        )
    return tuple(reasons)
