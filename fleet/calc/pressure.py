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
2. hold shorter than ``min_hold_minutes`` (default 60 min, common practice);
3. pressure drop over the hold above ``allowable_drop_percent`` of the start pressure
   (default 1 %, common practice);
4. water found inside the housing;
5. water temperature changed by more than ``max_temperature_change_c`` (default 1 degC,
   common practice): in a closed water-filled vessel a temperature change alone moves the
   pressure by several dbar per degC, so the hold is inconclusive; the reason says so
   when a fall in temperature could explain a drop.
"""

from __future__ import annotations

from dataclasses import dataclass
from typing import Final

from fleet.calc._checks import require_non_negative, require_positive, require_range
from fleet.calc.seawater import MAX_PRESSURE_DBAR, pressure_dbar

DEFAULT_PROOF_FACTOR: Final = 1.25  # common practice, no published source for housings
DEFAULT_MIN_HOLD_MINUTES: Final = 60.0  # common practice, no published source
DEFAULT_ALLOWABLE_DROP_PERCENT: Final = 1.0  # common practice, no published source
DEFAULT_MAX_TEMPERATURE_CHANGE_C: Final = 1.0  # common practice, no published source


def required_test_pressure_dbar(
    rated_depth_m: float, latitude_deg: float, proof_factor: float = DEFAULT_PROOF_FACTOR
) -> float:
    """Proof pressure = proof_factor x gsw sea pressure at the rated depth.

    ``proof_factor`` default 1.25 is common practice for instrument housings (the same
    factor as manned pressure hulls); it must be in [1.0, 3.0].
    Example: 1350 m at 45 deg, x1.25 -> 1.25 x 1365.511 = 1706.889 dbar.
    """
    factor = require_range("proof_factor", proof_factor, 1.0, 3.0)
    return factor * pressure_dbar(rated_depth_m, latitude_deg)


@dataclass(frozen=True, slots=True)
class HoldVerdict:
    passed: bool
    reasons: tuple[str, ...]  # every reason it failed; empty when passed
    drop_dbar: float  # start - end (negative: pressure rose)
    drop_percent: float  # of the start pressure
    temperature_change_c: float  # end - start


def evaluate_hold(
    start_pressure_dbar: float,
    end_pressure_dbar: float,
    hold_minutes: float,
    water_temperature_start_c: float,
    water_temperature_end_c: float,
    ingress_found: bool,
    required_pressure_dbar: float,
    min_hold_minutes: float = DEFAULT_MIN_HOLD_MINUTES,
    allowable_drop_percent: float = DEFAULT_ALLOWABLE_DROP_PERCENT,
    max_temperature_change_c: float = DEFAULT_MAX_TEMPERATURE_CHANGE_C,
) -> HoldVerdict:
    """Judge one pressure hold; see the module docstring for the rules and defaults.

    Example: 1710 -> 1700 dbar over 60 min, 4.0 -> 4.2 degC, dry, required 1706.9 dbar:
    drop 0.585 % -> passed.
    """
    p0 = require_range("start_pressure_dbar", start_pressure_dbar, 0.0, MAX_PRESSURE_DBAR)
    p1 = require_range("end_pressure_dbar", end_pressure_dbar, 0.0, MAX_PRESSURE_DBAR)
    minutes = require_positive("hold_minutes", hold_minutes, unit="min")
    t0 = require_range("water_temperature_start_c", water_temperature_start_c, -2.5, 40.0)
    t1 = require_range("water_temperature_end_c", water_temperature_end_c, -2.5, 40.0)
    if not isinstance(ingress_found, bool):
        raise TypeError(f"ingress_found must be a bool, got {type(ingress_found).__name__}")
    required = require_range(
        "required_pressure_dbar", required_pressure_dbar, 0.0, MAX_PRESSURE_DBAR, lo_open=True
    )
    min_minutes = require_non_negative("min_hold_minutes", min_hold_minutes, unit="min")
    allowable = require_range("allowable_drop_percent", allowable_drop_percent, 0.0, 100.0)
    max_dt = require_non_negative("max_temperature_change_c", max_temperature_change_c)

    drop = p0 - p1
    drop_percent = drop / p0 * 100.0 if p0 > 0.0 else 0.0
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
    return HoldVerdict(not reasons, tuple(reasons), drop, drop_percent, dt_c)
