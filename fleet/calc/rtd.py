"""Industrial platinum resistance thermometers, IEC 60751 (2008/2022).

Callendar-Van Dusen (CVD) equation with the standard's coefficients:

- 0 <= t <= 850 degC:   R(t) = R0 (1 + A t + B t^2)
- -200 <= t < 0 degC:   R(t) = R0 (1 + A t + B t^2 + C (t - 100) t^3)

A = 3.9083e-3 /degC, B = -5.775e-7 /degC^2, C = -4.183e-12 /degC^4.  A Pt100 has
R0 = 100 ohm, a Pt1000 R0 = 1000 ohm.  The inverse is closed-form at and above 0 degC and
solved by Newton iteration below.
"""

from __future__ import annotations

import math
from typing import Final, Literal

from fleet.calc._checks import require_choice, require_positive, require_range

A: Final = 3.9083e-3
B: Final = -5.775e-7
C: Final = -4.183e-12
T_MIN_C: Final = -200.0
T_MAX_C: Final = 850.0
PT100_R0_OHM: Final = 100.0

ToleranceClass = Literal["AA", "A", "B", "C"]
ElementType = Literal["wire_wound", "film"]

# IEC 60751:2008 Table 3: tolerance = fixed + slope * |t| (degC).
_TOLERANCE: Final[dict[str, tuple[float, float]]] = {
    "AA": (0.10, 0.0017),
    "A": (0.15, 0.002),
    "B": (0.30, 0.005),
    "C": (0.60, 0.01),
}

# Validity range of each class, degC.  From memory of IEC 60751:2008 Table 3; not
# confirmed against the standard (see the reference notes).
_VALIDITY: Final[dict[tuple[str, str], tuple[float, float]]] = {
    ("AA", "wire_wound"): (-50.0, 250.0),
    ("AA", "film"): (0.0, 150.0),
    ("A", "wire_wound"): (-100.0, 450.0),
    ("A", "film"): (-30.0, 300.0),
    ("B", "wire_wound"): (-196.0, 600.0),
    ("B", "film"): (-50.0, 500.0),
    ("C", "wire_wound"): (-196.0, 600.0),
    ("C", "film"): (-50.0, 600.0),
}


def _cvd(t: float) -> float:
    """R/R0 at ``t`` degC."""
    ratio = 1.0 + A * t + B * t * t
    if t < 0.0:
        ratio += C * (t - 100.0) * t**3
    return ratio


# Domains forms can import (lo, hi): the CVD equation's range and a Pt100's resistance
# over it, 18.5201-390.4811 ohm (IEC 60751 Table 1 prints 18.52 and 390.48).
TEMPERATURE_RANGE_C: Final = (T_MIN_C, T_MAX_C)
PT100_RESISTANCE_RANGE_OHM: Final = (PT100_R0_OHM * _cvd(T_MIN_C), PT100_R0_OHM * _cvd(T_MAX_C))


def resistance_range_ohm(r0_ohm: float = PT100_R0_OHM) -> tuple[float, float]:
    """(lo, hi) resistance an element of nominal ``r0_ohm`` spans over -200..850 degC.

    Example: Pt1000 -> (185.201, 3904.811) ohm.
    """
    r0 = require_positive("r0_ohm", r0_ohm, unit="ohm")
    return r0 * _cvd(T_MIN_C), r0 * _cvd(T_MAX_C)


def resistance_ohm(temperature_c: float, r0_ohm: float = PT100_R0_OHM) -> float:
    """Resistance of an IEC 60751 platinum element at ``temperature_c``.

    Example: Pt100 at 100 degC -> 100 (1 + 0.39083 - 0.005775) = 138.5055 ohm.
    """
    t = require_range("temperature_c", temperature_c, *TEMPERATURE_RANGE_C, unit="degC")
    r0 = require_positive("r0_ohm", r0_ohm, unit="ohm")
    return r0 * _cvd(t)


def temperature_c(resistance_ohm: float, r0_ohm: float = PT100_R0_OHM) -> float:
    """Temperature from resistance, inverse CVD (IEC 60751).

    At or above R0: t = (-A + sqrt(A^2 - 4B(1 - R/R0))) / (2B).  Below R0, Newton's method
    on the full equation, started from the quadratic root, to |dt| < 1e-12 degC.
    Example: 108.5 ohm on a Pt100 -> 21.8189 degC.
    """
    r0 = require_positive("r0_ohm", r0_ohm, unit="ohm")
    lo, hi = resistance_range_ohm(r0)
    r = require_range("resistance_ohm", resistance_ohm, lo, hi, unit="ohm")
    ratio = r / r0
    t = (-A + math.sqrt(A * A - 4.0 * B * (1.0 - ratio))) / (2.0 * B)
    if ratio >= 1.0:
        return t
    for _ in range(50):
        f = _cvd(t) - ratio
        dfdt = A + 2.0 * B * t + C * (4.0 * t**3 - 300.0 * t * t)
        step = f / dfdt
        t -= step
        if abs(step) < 1e-12:
            break
    return t


def tolerance_c(
    temperature_c: float,
    tolerance_class: ToleranceClass | str,
    element: ElementType | str = "wire_wound",
) -> float:
    """Permitted deviation (+/- degC) for an IEC 60751 tolerance class at ``temperature_c``.

    IEC 60751:2008 Table 3: AA 0.10 + 0.0017|t|, A 0.15 + 0.002|t|, B 0.30 + 0.005|t|,
    C 0.60 + 0.01|t|.  Each class is valid only over its range, which depends on the
    element (wire-wound or film); the ranges are from memory.  Example: class A at 4 degC
    -> 0.158 degC.
    """
    cls = require_choice("tolerance_class", tolerance_class, _TOLERANCE)
    kind = require_choice("element", element, ("wire_wound", "film"))
    lo, hi = _VALIDITY[(cls, kind)]
    t = require_range("temperature_c", temperature_c, lo, hi, unit="degC")
    fixed, slope = _TOLERANCE[cls]
    return fixed + slope * abs(t)
