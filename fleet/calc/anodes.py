"""Sacrificial anodes: design tables, mass and life, resistance, wear from readings.

Source: DNV-RP-B401 "Cathodic protection design" (2010 edition; section and table
numbers are the 2010 ones).  The design equations are in Sec. 7 and are the same in
ISO 15589-2 and DNV-RP-F103.

Wear from readings (``fit_wear``)
---------------------------------
An anode only wears while it is in water, so the clock is the *cumulative immersed days*
of the anode, not calendar days.  Given readings (immersed_days, mass_kg):

1. Fit mass = intercept - rate * days by ordinary least squares.  ``rate`` > 0 means the
   anode is losing mass.
2. ``residual_kg`` is the RMS of the fit residuals (0 for two points).
3. With a single reading, or readings all at the same immersed days, the slope cannot be
   fitted: if a design rate is given, the line through the mean reading with the design
   rate is used (``rate_source="design"``); otherwise ``rate_kg_per_day`` and
   ``intercept_kg`` are ``None`` (``rate_source="none"``).
4. ``fast_wear`` is set when a *fitted* rate exceeds ``design_rate_kg_per_day *
   flag_factor``: more current is leaving the anode than the design expects, a sign of a
   bonding fault or contact with a dissimilar metal.

The same fit can be kept as running sums (``WearSums``) that a database updates one
reading at a time; ``fit_wear_from_sums`` turns them into the same ``WearFit``.
"""

from __future__ import annotations

import functools
import math
from collections.abc import Iterable
from dataclasses import dataclass
from typing import Final, Literal, NamedTuple

from fleet.calc._checks import (
    require_choice,
    require_int,
    require_non_negative,
    require_positive,
    require_range,
)

FARADAY_C_PER_MOL: Final = 96485.33212  # CODATA 2018, exact since the 2019 SI
HOURS_PER_YEAR: Final = 8760.0  # DNV-RP-B401 Sec. 7 uses 8760 h per year
DEFAULT_WEAR_FLAG_FACTOR: Final = 1.5  # common practice, no published source

Confidence = Literal["confirmed", "conflicting", "from memory"]


@dataclass(frozen=True, slots=True)
class AnodeAlloy:
    """Design electrochemical capacity and closed-circuit potential of an anode alloy."""

    metal: str
    environment: str
    capacity_ah_per_kg: float
    closed_circuit_potential_v: float  # vs Ag/AgCl/seawater
    source: str
    confidence: Confidence
    note: str = ""


# DNV-RP-B401 (2010) Table 10-6.  Where secondary copies disagree on the potential, the
# less negative value (smaller driving voltage, so the more conservative) is used.
ALLOYS: Final[dict[tuple[str, str], AnodeAlloy]] = {
    ("Al-Zn-In", "seawater"): AnodeAlloy(
        "Al-Zn-In", "seawater", 2000.0, -1.05, "DNV-RP-B401 (2010) Table 10-6", "confirmed"
    ),
    ("Al-Zn-In", "sediment"): AnodeAlloy(
        "Al-Zn-In",
        "sediment",
        1500.0,
        -0.95,
        "DNV-RP-B401 (2010) Table 10-6",
        "conflicting",
        "capacity confirmed; potential -1.00 V from memory, -0.95 V in a secondary copy",
    ),
    ("Zn", "seawater"): AnodeAlloy(
        "Zn",
        "seawater",
        780.0,
        -1.00,
        "DNV-RP-B401 (2010) Table 10-6",
        "conflicting",
        "capacity confirmed; potential -1.03 V from memory, -1.00 V in a secondary copy",
    ),
    ("Zn", "sediment"): AnodeAlloy(
        "Zn",
        "sediment",
        700.0,
        -0.95,
        "DNV-RP-B401 (2010) Table 10-6",
        "conflicting",
        "capacity confirmed; potential -0.98 V from memory, -0.95 V in a secondary copy",
    ),
    ("Mg", "seawater"): AnodeAlloy(
        "Mg",
        "seawater",
        1100.0,
        -1.50,
        "EN 12496 / general CP texts (B401 does not cover Mg)",
        "from memory",
        "practical capacity 1100-1230 Ah/kg; the low end is used",
    ),
    ("Mg-high-potential", "seawater"): AnodeAlloy(
        "Mg-high-potential",
        "seawater",
        1100.0,
        -1.70,
        "EN 12496 / general CP texts (B401 does not cover Mg)",
        "from memory",
        "practical capacity 1100-1230 Ah/kg; the low end is used",
    ),
}


def alloy(metal: str, environment: str = "seawater") -> AnodeAlloy:
    """Look up an alloy row, e.g. ``alloy("Al-Zn-In")`` -> 2000 Ah/kg, -1.05 V."""
    key = (metal, environment)
    if key not in ALLOYS:
        require_choice("metal", metal, {m for m, _ in ALLOYS})
        allowed = {e for m, e in ALLOYS if m == metal}
        require_choice("environment", environment, allowed)
    return ALLOYS[key]


# (valence, molar mass g/mol); IUPAC standard atomic weights (Zn 65.38, Mg 24.305
# conventional, Al 26.9815385).
_METALS: Final[dict[str, tuple[int, float]]] = {
    "Al": (3, 26.9815385),
    "Zn": (2, 65.38),
    "Mg": (2, 24.305),
}


def theoretical_capacity_ah_per_kg(metal: str) -> float:
    """Faraday capacity eps_th = n F / (3.6 M) Ah/kg (M in g/mol).

    Example: Al, n = 3, M = 26.98 g/mol -> 2979.98 Ah/kg.
    """
    n, molar_mass = _METALS[require_choice("metal", metal, _METALS)]
    return n * FARADAY_C_PER_MOL / (3.6 * molar_mass)


# --- design current density, DNV-RP-B401 (2010) Tables 10-1 (initial/final), 10-2 (mean)
Climate = Literal["tropical", "sub-tropical", "temperate", "arctic"]
Phase = Literal["initial", "mean", "final"]
CLIMATES: Final = ("tropical", "sub-tropical", "temperate", "arctic")
PHASES: Final = ("initial", "mean", "final")
_DEPTH_BINS_M: Final = (30.0, 100.0, 300.0)  # upper edges of 0-30, >30-100, >100-300; >300
_CURRENT_DENSITY: Final[dict[str, tuple[tuple[float, float, float], ...]]] = {
    # rows by depth bin, each (initial, mean, final) A/m^2
    "tropical": ((0.150, 0.070, 0.100), (0.120, 0.060, 0.080), (0.140, 0.070, 0.090),
                 (0.180, 0.090, 0.130)),
    "sub-tropical": ((0.170, 0.080, 0.110), (0.140, 0.070, 0.090), (0.160, 0.080, 0.110),
                     (0.200, 0.100, 0.150)),
    "temperate": ((0.200, 0.100, 0.130), (0.170, 0.080, 0.110), (0.190, 0.090, 0.140),
                  (0.220, 0.110, 0.170)),
    "arctic": ((0.250, 0.120, 0.170), (0.200, 0.100, 0.130), (0.220, 0.110, 0.170),
               (0.220, 0.110, 0.170)),
}  # fmt: skip
BURIED_CURRENT_DENSITY_A_M2: Final = 0.020  # DNV-RP-B401 (2010) Sec. 6.3, all phases


def climate_for_surface_temperature(temperature_c: float) -> Climate:
    """Climatic region from annual mean surface water temperature, DNV-RP-B401 Table 10-1.

    Tropical > 20 degC, sub-tropical 12-20, temperate 7-12 (Table 10-2 edge), arctic < 7.
    Example: 15 degC -> "sub-tropical".
    """
    t = require_range("temperature_c", temperature_c, -2.5, 40.0, unit="degC")
    if t > 20.0:
        return "tropical"
    if t >= 12.0:
        return "sub-tropical"
    if t >= 7.0:
        return "temperate"
    return "arctic"


def _depth_bin(depth_m: float) -> int:
    for i, edge in enumerate(_DEPTH_BINS_M):
        if depth_m <= edge:
            return i
    return len(_DEPTH_BINS_M)


def design_current_density_a_m2(climate: str, depth_m: float, phase: str) -> float:
    """Design current density for bare steel in seawater, DNV-RP-B401 (2010) Tables
    10-1 (initial, final) and 10-2 (mean).

    Depth bins 0-30, >30-100, >100-300, >300 m.  Example: tropical, 20 m, mean -> 0.070.
    """
    rows = _CURRENT_DENSITY[require_choice("climate", climate, CLIMATES)]
    d = require_range("depth_m", depth_m, 0.0, 11000.0, unit="m")
    col = PHASES.index(require_choice("phase", phase, PHASES))
    return rows[_depth_bin(d)][col]


# --- coating breakdown, DNV-RP-B401 (2010) Table 10-4: f = a + b t, capped at 1.0
_COATING: Final[dict[str, tuple[float, float, float]]] = {
    # category: (a, b for 0-30 m, b for > 30 m)
    "I": (0.10, 0.10, 0.05),
    "II": (0.05, 0.025, 0.015),
    "III": (0.02, 0.012, 0.008),
}


@dataclass(frozen=True, slots=True)
class CoatingBreakdown:
    mean: float
    final: float


def coating_breakdown(category: str, depth_m: float, years: float) -> CoatingBreakdown:
    """Mean and final coating breakdown factors, DNV-RP-B401 (2010) Table 10-4.

    f_cm = a + b t_f / 2, f_cf = a + b t_f, each capped at 1.0; ``category`` "bare"
    gives 1.0 for both.  Example: category III, 20 m, 22 years -> mean 0.152, final 0.284.
    """
    require_choice("category", category, (*_COATING, "bare"))
    d = require_range("depth_m", depth_m, 0.0, 11000.0, unit="m")
    t = require_range("years", years, 0.0, 100.0, unit="years")
    if category == "bare":
        return CoatingBreakdown(1.0, 1.0)
    a, b_shallow, b_deep = _COATING[category]
    b = b_shallow if d <= 30.0 else b_deep
    return CoatingBreakdown(min(1.0, a + b * t / 2.0), min(1.0, a + b * t))


# --- utilisation factor, DNV-RP-B401 (2010) Table 10-8
UTILISATION_FACTORS: Final[dict[str, float]] = {
    "long_slender_standoff": 0.90,  # L >= 4r
    "short_slender_standoff": 0.85,  # L < 4r
    "long_flush": 0.85,  # L >= 4 width and L >= 4 thickness
    "short_flush": 0.80,
    "bracelet_half_shell": 0.80,
    "other": 0.80,
    "bracelet_segmented": 0.75,  # from memory (ISO 15589-2 / DNV-RP-F103), not B401
}


def utilisation_factor(anode_type: str) -> float:
    """Utilisation factor u, DNV-RP-B401 (2010) Table 10-8.

    Example: "long_slender_standoff" -> 0.90; small transponder discs and bracelets 0.80.
    """
    return UTILISATION_FACTORS[require_choice("anode_type", anode_type, UTILISATION_FACTORS)]


def _u(value: float) -> float:
    return require_range("utilisation_factor", value, 0.0, 1.0, lo_open=True)


def _eps(value: float) -> float:
    return require_range("capacity_ah_per_kg", value, 0.0, 3000.0, lo_open=True, unit="Ah/kg")


def current_demand_a(
    area_m2: float, current_density_a_m2: float, coating_breakdown: float = 1.0
) -> float:
    """Current demand I_c = A_c i_c f_c, DNV-RP-B401 (2010) Sec. 7.

    Example: 0.05 m^2 bare at 0.110 A/m^2 -> 5.5 mA.
    """
    area = require_non_negative("area_m2", area_m2, unit="m^2")
    i_c = require_range("current_density_a_m2", current_density_a_m2, 0.0, 1.0, unit="A/m^2")
    f_c = require_range("coating_breakdown", coating_breakdown, 0.0, 1.0, lo_open=True)
    return area * i_c * f_c


def required_net_mass_kg(
    mean_current_a: float,
    design_life_years: float,
    utilisation_factor: float,
    capacity_ah_per_kg: float,
) -> float:
    """Net anode mass M = I_cm t_f 8760 / (u eps), DNV-RP-B401 (2010) Sec. 7.

    Example: 1 A for 25 years, u 0.90, 2000 Ah/kg -> 121.667 kg.
    """
    current = require_non_negative("mean_current_a", mean_current_a, unit="A")
    life = require_non_negative("design_life_years", design_life_years, unit="years")
    u = _u(utilisation_factor)
    eps = _eps(capacity_ah_per_kg)
    return current * life * HOURS_PER_YEAR / (u * eps)


def design_life_years(
    net_mass_kg: float,
    mean_current_a: float,
    utilisation_factor: float,
    capacity_ah_per_kg: float,
) -> float:
    """Design life t_f = M u eps / (I_cm 8760), the inverse of DNV-RP-B401 Sec. 7.

    Example: 0.2433 kg, 10 mA, u 0.90, 2000 Ah/kg -> 5.0 years.
    """
    mass = require_non_negative("net_mass_kg", net_mass_kg, unit="kg")
    current = require_positive("mean_current_a", mean_current_a, unit="A")
    u = _u(utilisation_factor)
    eps = _eps(capacity_ah_per_kg)
    return mass * u * eps / (current * HOURS_PER_YEAR)


def consumed_mass_kg(current_a: float, years: float, capacity_ah_per_kg: float) -> float:
    """Metal consumed m = I t 8760 / eps (no utilisation factor; DNV-RP-B401 Sec. 7 terms).

    Example: 5.5 mA for 1 year at 2000 Ah/kg -> 0.02409 kg.
    """
    current = require_non_negative("current_a", current_a, unit="A")
    t = require_non_negative("years", years, unit="years")
    return current * t * HOURS_PER_YEAR / _eps(capacity_ah_per_kg)


def design_wear_rate_kg_per_day(current_a: float, capacity_ah_per_kg: float) -> float:
    """Mass loss per immersed day at a steady current: I 24 / eps.

    Example: 5.5 mA at 2000 Ah/kg -> 6.6e-5 kg/day.
    """
    current = require_non_negative("current_a", current_a, unit="A")
    return current * 24.0 / _eps(capacity_ah_per_kg)


def replacement_mass_kg(net_mass_kg: float, utilisation_factor: float) -> float:
    """Mass left when the utilisation factor is used up: M (1 - u) (DNV-RP-B401 Sec. 7 u).

    Example: 0.50 kg anode with u 0.80 -> replace at 0.10 kg.
    """
    mass = require_non_negative("net_mass_kg", net_mass_kg, unit="kg")
    return mass * (1.0 - _u(utilisation_factor))


def anode_current_a(driving_voltage_v: float, resistance_ohm: float) -> float:
    """Anode output I_a = (E_c - E_a) / R_a (Ohm's law, DNV-RP-B401 Sec. 7).

    Example: 0.25 V through 0.07244 ohm -> 3.45 A.
    """
    v = require_non_negative("driving_voltage_v", driving_voltage_v, unit="V")
    return v / require_positive("resistance_ohm", resistance_ohm, unit="ohm")


# --- anode resistance, DNV-RP-B401 (2010) Table 10-7
_STANDOFF_FACTOR: Final = 1.3  # Table 10-7 note: stand-off 0.15-0.30 m


def _resistivity(value: float) -> float:
    return require_range("resistivity_ohm_m", value, 0.0, 100.0, lo_open=True, unit="ohm m")


def resistance_long_slender_ohm(
    resistivity_ohm_m: float, length_m: float, radius_m: float, *, close_standoff: bool = False
) -> float:
    """Long slender stand-off anode (L >= 4r), modified Dwight, DNV-RP-B401 Table 10-7:
    R_a = rho / (2 pi L) (ln(4L/r) - 1); x1.3 if the stand-off is 0.15-0.30 m.

    For a non-cylindrical section use r = periphery / (2 pi).
    Example: rho 0.22, L 1.53 m, r 0.095 m -> 0.07244 ohm.
    """
    rho = _resistivity(resistivity_ohm_m)
    r = require_positive("radius_m", radius_m, unit="m")
    length = require_range("length_m", length_m, 4.0 * r, None, unit="m (L >= 4 r)")
    resistance = rho / (2.0 * math.pi * length) * (math.log(4.0 * length / r) - 1.0)
    return resistance * (_STANDOFF_FACTOR if close_standoff else 1.0)


def resistance_short_slender_ohm(
    resistivity_ohm_m: float, length_m: float, radius_m: float, *, close_standoff: bool = False
) -> float:
    """Short slender stand-off anode (L < 4r), DNV-RP-B401 (2010) Table 10-7:
    R_a = rho/(2 pi L) [ln{(2L/r)(1 + sqrt(1 + (r/2L)^2))} + r/(2L) - sqrt(1 + (r/2L)^2)].

    Example: rho 0.25, L 0.10 m, r 0.05 m -> 0.5228 ohm.
    """
    rho = _resistivity(resistivity_ohm_m)
    r = require_positive("radius_m", radius_m, unit="m")
    length = require_range(
        "length_m", length_m, 0.0, 4.0 * r, lo_open=True, hi_open=True, unit="m (L < 4 r)"
    )
    k = r / (2.0 * length)
    root = math.sqrt(1.0 + k * k)
    resistance = rho / (2.0 * math.pi * length) * (math.log((1.0 / k) * (1.0 + root)) + k - root)
    return resistance * (_STANDOFF_FACTOR if close_standoff else 1.0)


def resistance_flush_ohm(resistivity_ohm_m: float, length_m: float, width_m: float) -> float:
    """Long flush-mounted anode, DNV-RP-B401 (2010) Table 10-7: R_a = rho / (2 S), S the
    arithmetic mean of length and width.

    Example: rho 0.25, L 0.60 m, W 0.10 m -> S 0.35 m, 0.3571 ohm.
    """
    rho = _resistivity(resistivity_ohm_m)
    width = require_positive("width_m", width_m, unit="m")
    length = require_positive("length_m", length_m, unit="m")
    return rho / (2.0 * (length + width) / 2.0)


def resistance_mccoy_ohm(resistivity_ohm_m: float, exposed_area_m2: float) -> float:
    """Short flush, bracelet and other anodes, McCoy's formula, DNV-RP-B401 (2010)
    Table 10-7: R_a = 0.315 rho / sqrt(A).

    Example: rho 0.25, A 0.01 m^2 -> 0.7875 ohm.
    """
    rho = _resistivity(resistivity_ohm_m)
    area = require_positive("exposed_area_m2", exposed_area_m2, unit="m^2")
    return 0.315 * rho / math.sqrt(area)


_new_tuple = tuple.__new__

# --- wear fit -----------------------------------------------------------------------------
RateSource = Literal["fit", "design", "none"]
# Relative spread of immersed days below which the slope is treated as undetermined.
_DEGENERATE_SPREAD: Final = 1e-12


class WearFit(NamedTuple):
    """Straight-line wear of one anode against cumulative immersed days (a named tuple: made
    for every anode of every unit a whole-fleet plan checks)."""

    rate_kg_per_day: float | None  # positive = losing mass; None when unknown
    intercept_kg: float | None  # fitted mass at 0 immersed days
    residual_kg: float  # RMS residual of the fit
    n_points: int
    fast_wear: bool
    rate_source: RateSource

    def mass_at_kg(self, immersed_days: float) -> float | None:
        """Fitted mass after ``immersed_days``; None if the rate is unknown."""
        days = require_non_negative("immersed_days", immersed_days, unit="days")
        if self.rate_kg_per_day is None or self.intercept_kg is None:
            return None
        return self.intercept_kg - self.rate_kg_per_day * days

    def days_to_mass(self, mass_kg: float) -> float | None:
        """Immersed days at which the fit reaches ``mass_kg``; None if rate is unknown or
        the anode is not losing mass (rate <= 0)."""
        target = require_non_negative("mass_kg", mass_kg, unit="kg")
        if self.rate_kg_per_day is None or self.intercept_kg is None:
            return None
        if self.rate_kg_per_day <= 0.0:
            return None
        return (self.intercept_kg - target) / self.rate_kg_per_day


def _check_point(x: float, y: float) -> tuple[float, float]:
    return (
        require_non_negative("immersed_days", x, unit="days"),
        require_non_negative("mass_kg", y, unit="kg"),
    )


@functools.lru_cache(maxsize=256)  # a fleet has few positions: the same pair again and again
def _design_and_flag(
    design_rate_kg_per_day: float | None, flag_factor: float
) -> tuple[float | None, float]:
    rate = (
        None
        if design_rate_kg_per_day is None
        else require_non_negative("design_rate_kg_per_day", design_rate_kg_per_day)
    )
    return rate, require_range("flag_factor", flag_factor, 1.0, 100.0)


def _finish(
    slope: float | None,
    mean_x: float,
    mean_y: float,
    sse: float,
    n: int,
    design_rate: float | None,
    flag_factor: float,
) -> WearFit:
    residual = math.sqrt(max(sse, 0.0) / n)
    if slope is not None:
        rate = -slope
        fast = design_rate is not None and rate > design_rate * flag_factor
        return WearFit(rate, mean_y + rate * mean_x, residual, n, fast, "fit")
    if design_rate is not None:
        return WearFit(design_rate, mean_y + design_rate * mean_x, residual, n, False, "design")
    return WearFit(None, None, residual, n, False, "none")


def fit_wear(
    points: Iterable[tuple[float, float]],
    design_rate_kg_per_day: float | None = None,
    flag_factor: float = DEFAULT_WEAR_FLAG_FACTOR,
) -> WearFit:
    """Least-squares wear line through (immersed_days, mass_kg) readings (see module doc).

    ``flag_factor`` default 1.5 is common practice, no published source.
    Example: (0, 1.00), (100, 0.99), (200, 0.98) -> rate 1e-4 kg/day, intercept 1.00 kg,
    ``days_to_mass(0.20)`` = 8000 days.
    """
    design_rate, factor = _design_and_flag(design_rate_kg_per_day, flag_factor)
    pts = [_check_point(x, y) for x, y in points]
    n = len(pts)
    if n == 0:
        raise ValueError("points must hold at least one (immersed_days, mass_kg) reading")
    mean_x = math.fsum(x for x, _ in pts) / n
    mean_y = math.fsum(y for _, y in pts) / n
    sxx = math.fsum((x - mean_x) ** 2 for x, _ in pts)
    sxy = math.fsum((x - mean_x) * (y - mean_y) for x, y in pts)
    syy = math.fsum((y - mean_y) ** 2 for _, y in pts)
    sum_xx = math.fsum(x * x for x, _ in pts)
    if n < 2 or sxx <= _DEGENERATE_SPREAD * sum_xx:
        return _finish(None, mean_x, mean_y, syy, n, design_rate, factor)
    slope = sxy / sxx
    return _finish(slope, mean_x, mean_y, syy - slope * sxy, n, design_rate, factor)


class _Sums(NamedTuple):
    n: int = 0
    sum_x: float = 0.0
    sum_y: float = 0.0
    sum_xx: float = 0.0
    sum_xy: float = 0.0
    sum_yy: float = 0.0


class WearSums(_Sums):
    """Running sums for the wear fit, to be kept per anode and updated per reading.

    x is cumulative immersed days, y the mass in kg.  ``add`` a new reading, ``extend``
    with several. There is no removal: subtracting a reading back out leaves rounding residue
    that can turn a degenerate spread (every reading on one day) into a false fit, so a
    corrected or deleted reading means summing again from the history (``fleet/due/state.py``).

    An immutable named tuple, checked when made: ``n`` a whole number from 0, each sum finite.
    """

    __slots__ = ()

    def __new__(
        cls,
        n: int = 0,
        sum_x: float = 0.0,
        sum_y: float = 0.0,
        sum_xx: float = 0.0,
        sum_xy: float = 0.0,
        sum_yy: float = 0.0,
    ) -> WearSums:
        if type(n) is not int or n < 0:
            require_int("n", n, 0)
        # Finite floats pass as they are (the common case, read from stored sums); anything
        # else goes through the guard, which names what is wrong.
        floats = (
            type(sum_x) is float
            and type(sum_y) is float
            and type(sum_xx) is float
            and type(sum_xy) is float
            and type(sum_yy) is float
        )
        if not (floats and math.isfinite(sum_x + sum_y + sum_xx + sum_xy + sum_yy)):
            for name, value in zip(
                cls._fields[1:], (sum_x, sum_y, sum_xx, sum_xy, sum_yy), strict=True
            ):
                require_range(name, value)
        return _new_tuple(cls, (n, sum_x, sum_y, sum_xx, sum_xy, sum_yy))

    @classmethod
    def empty(cls) -> WearSums:
        """Sums of no readings."""
        return cls()

    @classmethod
    def of(cls, points: Iterable[tuple[float, float]]) -> WearSums:
        """Sums of (immersed_days, mass_kg) readings, added one by one."""
        sums = cls.empty()
        for x, y in points:
            sums = sums.add(x, y)
        return sums

    def add(self, x: float, y: float) -> WearSums:
        """Sums with one more reading (x immersed days, y kg)."""
        x, y = _check_point(x, y)
        return WearSums(
            self.n + 1,
            self.sum_x + x,
            self.sum_y + y,
            self.sum_xx + x * x,
            self.sum_xy + x * y,
            self.sum_yy + y * y,
        )

    def extend(self, points: Iterable[tuple[float, float]]) -> WearSums:
        """Sums with every reading of ``points`` added in order: the same floats as calling
        ``add`` for each, without a new object per reading (a long history in one step)."""
        n, sx, sy, sxx, sxy, syy = (
            self.n, self.sum_x, self.sum_y, self.sum_xx, self.sum_xy, self.sum_yy
        )  # fmt: skip
        for x, y in points:
            if not (math.isfinite(x) and math.isfinite(y) and x >= 0.0 and y >= 0.0):
                x, y = _check_point(x, y)  # raises, naming the bad value
            n += 1
            sx += x
            sy += y
            sxx += x * x
            sxy += x * y
            syy += y * y
        return WearSums(n, sx, sy, sxx, sxy, syy)


def fit_wear_from_sums(
    sums: WearSums,
    design_rate_kg_per_day: float | None = None,
    flag_factor: float = DEFAULT_WEAR_FLAG_FACTOR,
) -> WearFit:
    """``fit_wear`` from running sums (same result to rounding; same rules for one point).

    Sxx = sum_xx - sum_x^2/n, Sxy = sum_xy - sum_x sum_y / n, slope = Sxy / Sxx.
    Example: sums of (0, 1.00), (100, 0.99), (200, 0.98) -> rate 1e-4 kg/day.
    """
    design_rate, factor = _design_and_flag(design_rate_kg_per_day, flag_factor)
    n = sums.n
    if n == 0:
        raise ValueError("sums.n must be at least 1 (no readings), got 0")
    mean_x = sums.sum_x / n
    mean_y = sums.sum_y / n
    sxx = sums.sum_xx - sums.sum_x * mean_x
    sxy = sums.sum_xy - sums.sum_x * mean_y
    syy = sums.sum_yy - sums.sum_y * mean_y
    if n < 2 or sxx <= _DEGENERATE_SPREAD * sums.sum_xx:
        return _finish(None, mean_x, mean_y, syy, n, design_rate, factor)
    slope = sxy / sxx
    return _finish(slope, mean_x, mean_y, syy - slope * sxy, n, design_rate, factor)
