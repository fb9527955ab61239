"""Buoyancy, recovery margin and ascent speed.

Archimedes: net buoyancy (kgf) = V_displaced x rho_sw - m_dry; positive floats.  Use the
seawater density at the site (``seawater.density_kg_m3``): ~1025 kg/m^3 at the surface,
~1046 kg/m^3 at 4000 dbar and 2 degC.  Flotation shrinks and foam takes up water at
depth, so a volume should be the one at depth where that matters.

Recovery margin (``recovery_margin``), all thresholds common practice, no published
source, so every one is an argument:

1. Split the recovered package into parts; a part with negative net buoyancy adds to the
   *in-water weight* W, a positive one to the *uplift*.
2. Net buoyancy B = uplift - W.
3. Pass when B >= ``min_net_buoyancy_kg`` (default 5 kgf) and B / W >= ``min_margin_fraction``
   (default 0.10), each check skipped when its threshold is None.
4. If the anchor's in-water weight is given, it must be >= ``min_anchor_ratio`` (default
   1.5) x B so the package stays on the seabed until released.

``recovery_margin`` suits a package of parts with an anchor.  For a unit that floats on
its own it has no in-water weight, so step 3's reserve is never tested and only the
absolute minimum is; use ``recovery_buoyancy`` for that.

Recovery buoyancy of one unit (``recovery_buoyancy``), common practice, no published
source (so both thresholds are arguments with no default here; the rules layer holds them):

1. Required net positive buoyancy R = max(``min_net_buoyancy_kg``,
   ``reserve_fraction_of_mass`` x the unit's mass in air).  Why the mass in air: a
   recovered unit must lift its own mass plus fouling and entrained water, which grow
   roughly with its size; and a fraction of the mass in air is defined for floating and
   sinking units alike, where a fraction of the in-water weight is zero for a unit that
   floats.  The absolute minimum keeps a small unit visible and liftable.
2. The least favourable density on the way up: net buoyancy V rho - m falls with rho, so
   for a rising unit the worst point is where the seawater is lightest, normally at the
   surface.  Between the seabed (T, SP, p) and the surface (T, SP, 0 dbar) temperature,
   salinity and pressure are taken linear in each other; along such a line in-situ
   density is concave (a mixture of two waters is denser than the mean of their
   densities, the cabbeling and thermobaric effects described in TEOS-10 Manual 56; and
   compressibility falls with pressure), so its minimum lies at one end.  That is
   checked numerically, not proven: a test compares the result with the minimum of a
   101-point gsw profile for profiles drawn across the input domain.  The two ends are
   evaluated (TEOS-10 through ``seawater.density_kg_m3``: ``gsw.SA_from_SP``,
   ``gsw.CT_from_t``, ``gsw.rho``) and the lower is used, the surface on a tie.
3. Net buoyancy B = V rho_min - m (kgf); margin = B - R; passed when B > 0 and margin >= 0.
   The displaced volume is taken as constant: a compressible float loses volume at depth,
   which matters on the way down, not at the surface where rho is least.
Example: 45 kg, 0.060 m^3; surface 15 degC SP 35, seabed 2 degC SP 34.7 at 4000 dbar,
0 N 0 E -> lightest water at the surface, 1025.976 kg/m^3, B = +16.56 kgf; with a 5 kgf
minimum and 10 % of the mass (4.5 kgf) R = 5 kgf, margin +11.56 kgf.

Ascent speed: terminal velocity from the drag equation, v = sqrt(2 B / (rho C_d A)), with
B in newtons.
"""

from __future__ import annotations

import math
from collections.abc import Iterable
from dataclasses import dataclass
from typing import Final

from fleet.calc._checks import require_non_negative, require_positive, require_range
from fleet.calc.seawater import (
    PRACTICAL_SALINITY_RANGE,
    PRESSURE_RANGE_DBAR,
    STANDARD_GRAVITY_M_S2,
    TEMPERATURE_RANGE_C,
    density_kg_m3,
)

DEFAULT_MIN_MARGIN_FRACTION: Final = 0.10  # common practice, no published source
DEFAULT_MIN_NET_BUOYANCY_KG: Final = 5.0  # common practice, no published source
DEFAULT_MIN_ANCHOR_RATIO: Final = 1.5  # common practice, no published source

# Domains forms can import (lo, hi).
SEAWATER_DENSITY_RANGE_KG_M3: Final = (990.0, 1100.0)
RESERVE_FRACTION_OF_MASS_RANGE: Final = (0.0, 2.0)


def _density(value: float) -> float:
    return require_range(
        "seawater_density_kg_m3", value, *SEAWATER_DENSITY_RANGE_KG_M3, unit="kg/m^3"
    )


def net_buoyancy_kg(
    mass_in_air_kg: float, displaced_volume_m3: float, seawater_density_kg_m3: float
) -> float:
    """Net buoyancy in kgf = V rho - m (Archimedes); positive floats.

    Example: 0.060 m^3, 45 kg, 1025 kg/m^3 -> +16.50 kgf.
    """
    mass = require_non_negative("mass_in_air_kg", mass_in_air_kg, unit="kg")
    volume = require_non_negative("displaced_volume_m3", displaced_volume_m3, unit="m^3")
    return volume * _density(seawater_density_kg_m3) - mass


def kgf_to_n(force_kgf: float, gravity_m_s2: float = STANDARD_GRAVITY_M_S2) -> float:
    """kgf -> N with standard gravity 9.80665 m/s^2 (CGPM 1901) unless a local g is given.

    Example: 16.50 kgf -> 161.81 N.
    """
    kgf = require_range("force_kgf", force_kgf)
    g = require_range("gravity_m_s2", gravity_m_s2, 9.7, 9.9, unit="m/s^2")
    return kgf * g


@dataclass(frozen=True, slots=True)
class BuoyancyPart:
    mass_in_air_kg: float
    displaced_volume_m3: float
    name: str = ""

    def __post_init__(self) -> None:
        require_non_negative("mass_in_air_kg", self.mass_in_air_kg, unit="kg")
        require_non_negative("displaced_volume_m3", self.displaced_volume_m3, unit="m^3")


@dataclass(frozen=True, slots=True)
class RecoveryMargin:
    passed: bool
    net_buoyancy_kg: float
    uplift_kg: float
    in_water_weight_kg: float
    margin_fraction: float | None  # B / W; None when nothing in the package sinks
    anchor_ratio: float | None  # anchor in-water weight / B; None if no anchor given
    reasons: tuple[str, ...]


def recovery_margin(
    parts: Iterable[BuoyancyPart],
    seawater_density_kg_m3: float,
    min_margin_fraction: float | None = DEFAULT_MIN_MARGIN_FRACTION,
    min_net_buoyancy_kg: float | None = DEFAULT_MIN_NET_BUOYANCY_KG,
    anchor_in_water_weight_kg: float | None = None,
    min_anchor_ratio: float = DEFAULT_MIN_ANCHOR_RATIO,
) -> RecoveryMargin:
    """Does the recovered package float up with a margin? (rules in the module docstring)

    Example: a 30 kg / 0.012 m^3 body and a 15 kg / 0.048 m^3 float at 1025 kg/m^3 ->
    W 17.70 kgf, uplift 34.20 kgf, B 16.50 kgf, margin 0.93: passes.
    """
    rho = _density(seawater_density_kg_m3)
    frac = (
        None
        if min_margin_fraction is None
        else require_range("min_margin_fraction", min_margin_fraction, 0.0, 10.0)
    )
    floor = (
        None
        if min_net_buoyancy_kg is None
        else require_non_negative("min_net_buoyancy_kg", min_net_buoyancy_kg, unit="kgf")
    )
    anchor = (
        None
        if anchor_in_water_weight_kg is None
        else require_non_negative("anchor_in_water_weight_kg", anchor_in_water_weight_kg)
    )
    ratio_min = require_range("min_anchor_ratio", min_anchor_ratio, 1.0, 100.0)

    items = list(parts)
    if not items:
        raise ValueError("parts must hold at least one BuoyancyPart, got none")
    nets = [p.displaced_volume_m3 * rho - p.mass_in_air_kg for p in items]
    uplift = math.fsum(b for b in nets if b > 0.0)
    weight = math.fsum(-b for b in nets if b < 0.0)
    net = uplift - weight
    margin = net / weight if weight > 0.0 else None
    reasons: list[str] = []
    if net <= 0.0:
        reasons.append(f"package sinks: net buoyancy {net:.2f} kgf")
    if floor is not None and net < floor:
        reasons.append(f"net buoyancy {net:.2f} kgf is below the minimum {floor:g} kgf")
    if frac is not None and margin is not None and margin < frac:
        reasons.append(
            f"reserve {margin:.1%} of the in-water weight is below the minimum {frac:.0%}"
        )
    anchor_ratio: float | None = None
    if anchor is not None and net > 0.0:
        anchor_ratio = anchor / net
        if anchor_ratio < ratio_min:
            reasons.append(
                f"anchor weighs {anchor_ratio:.2f} x the package buoyancy, below "
                f"{ratio_min:g} x: the package may lift off before release"
            )
    return RecoveryMargin(not reasons, net, uplift, weight, margin, anchor_ratio, tuple(reasons))


def ascent_speed_m_s(
    net_buoyancy_n: float,
    seawater_density_kg_m3: float,
    drag_coefficient: float,
    frontal_area_m2: float,
) -> float:
    """Terminal ascent speed v = sqrt(2 B / (rho C_d A)) (drag equation).

    Example: B 174.1 N, rho 1045.96, C_d 1.0, A 0.05 m^2 -> 2.58 m/s.
    """
    b = require_positive("net_buoyancy_n", net_buoyancy_n, unit="N")
    rho = _density(seawater_density_kg_m3)
    cd = require_range("drag_coefficient", drag_coefficient, 0.0, 10.0, lo_open=True)
    area = require_positive("frontal_area_m2", frontal_area_m2, unit="m^2")
    return math.sqrt(2.0 * b / (rho * cd * area))


def required_net_buoyancy_kg(
    mass_in_air_kg: float, *, min_net_buoyancy_kg: float, reserve_fraction_of_mass: float
) -> float:
    """Required net positive buoyancy R = max(absolute minimum, fraction x mass in air).

    Common practice, no published source (module docstring).  Example: 200 kg with a
    5 kgf minimum and 10 % -> max(5, 20) = 20 kgf; 45 kg -> max(5, 4.5) = 5 kgf.
    """
    mass = require_non_negative("mass_in_air_kg", mass_in_air_kg, unit="kg")
    floor = require_non_negative("min_net_buoyancy_kg", min_net_buoyancy_kg, unit="kgf")
    frac = require_range(
        "reserve_fraction_of_mass", reserve_fraction_of_mass, *RESERVE_FRACTION_OF_MASS_RANGE
    )
    return max(floor, frac * mass)


@dataclass(frozen=True, slots=True)
class RecoveryBuoyancy:
    passed: bool
    density_kg_m3: float  # the least favourable (lowest) density used
    met_at: str  # "surface", "seabed" or "as given"
    met_at_pressure_dbar: float | None  # None when the density was given directly
    net_buoyancy_kg: float  # V rho - m at that density, kgf
    required_kg: float  # max(minimum, reserve fraction x mass in air), kgf
    margin_kg: float  # net - required, kgf
    reasons: tuple[str, ...]


def _judge(
    mass: float,
    volume: float,
    rho: float,
    met_at: str,
    met_at_p: float | None,
    floor: float,
    frac: float,
) -> RecoveryBuoyancy:
    required = required_net_buoyancy_kg(
        mass, min_net_buoyancy_kg=floor, reserve_fraction_of_mass=frac
    )
    net = volume * rho - mass
    margin = net - required
    where = "at the density given" if met_at == "as given" else f"at the {met_at}"
    reasons: list[str] = []
    if net <= 0.0:
        reasons.append(f"unit sinks {where} ({rho:.2f} kg/m^3): net buoyancy {net:+.2f} kgf")
    if margin < 0.0:
        reasons.append(
            f"net buoyancy {net:+.2f} kgf {where} ({rho:.2f} kg/m^3) is below the required "
            f"{required:.2f} kgf (the larger of {floor:g} kgf and {frac:.0%} of the "
            f"{mass:g} kg mass in air)"
        )
    return RecoveryBuoyancy(
        not reasons, rho, met_at, met_at_p, net, required, margin, tuple(reasons)
    )


def recovery_buoyancy_at_density(
    mass_in_air_kg: float,
    displaced_volume_m3: float,
    seawater_density_kg_m3: float,
    *,
    min_net_buoyancy_kg: float,
    reserve_fraction_of_mass: float,
) -> RecoveryBuoyancy:
    """Judge a unit's recovery buoyancy at one given density (rules in the module
    docstring).

    Example: 45 kg, 0.060 m^3 at 1025 kg/m^3 (Archimedes: +16.50 kgf), minimum 5 kgf,
    10 % of mass -> required 5 kgf, margin +11.50 kgf: passes.
    """
    mass = require_non_negative("mass_in_air_kg", mass_in_air_kg, unit="kg")
    volume = require_non_negative("displaced_volume_m3", displaced_volume_m3, unit="m^3")
    rho = _density(seawater_density_kg_m3)
    floor = require_non_negative("min_net_buoyancy_kg", min_net_buoyancy_kg, unit="kgf")
    frac = require_range(
        "reserve_fraction_of_mass", reserve_fraction_of_mass, *RESERVE_FRACTION_OF_MASS_RANGE
    )
    return _judge(mass, volume, rho, "as given", None, floor, frac)


def least_favourable_density(
    *,
    seabed_temperature_c: float,
    seabed_practical_salinity: float,
    seabed_pressure_dbar: float,
    surface_temperature_c: float,
    surface_practical_salinity: float,
    latitude_deg: float,
    longitude_deg: float = 0.0,
) -> tuple[float, float]:
    """(lowest in-situ density kg/m^3, sea pressure dbar where it is met) between the
    seabed and the surface: the lower of the two ends (module docstring, step 2).

    Example: surface 15 degC SP 35, seabed 2 degC SP 34.7 at 4000 dbar, 0 N 0 E ->
    (1025.976, 0.0): the surface.
    """
    p_bed = require_range(
        "seabed_pressure_dbar", seabed_pressure_dbar, *PRESSURE_RANGE_DBAR, unit="dbar"
    )
    t_bed = require_range("seabed_temperature_c", seabed_temperature_c, *TEMPERATURE_RANGE_C)
    t_top = require_range("surface_temperature_c", surface_temperature_c, *TEMPERATURE_RANGE_C)
    sp_bed = require_range(
        "seabed_practical_salinity", seabed_practical_salinity, *PRACTICAL_SALINITY_RANGE
    )
    sp_top = require_range(
        "surface_practical_salinity", surface_practical_salinity, *PRACTICAL_SALINITY_RANGE
    )
    rho_top = density_kg_m3(t_top, sp_top, 0.0, latitude_deg, longitude_deg)
    rho_bed = density_kg_m3(t_bed, sp_bed, p_bed, latitude_deg, longitude_deg)
    return (rho_bed, p_bed) if rho_bed < rho_top else (rho_top, 0.0)


def recovery_buoyancy(
    mass_in_air_kg: float,
    displaced_volume_m3: float,
    *,
    seabed_temperature_c: float,
    seabed_practical_salinity: float,
    seabed_pressure_dbar: float,
    surface_temperature_c: float,
    surface_practical_salinity: float,
    latitude_deg: float,
    longitude_deg: float = 0.0,
    min_net_buoyancy_kg: float,
    reserve_fraction_of_mass: float,
) -> RecoveryBuoyancy:
    """Judge a unit's recovery buoyancy at the least favourable density on the way up
    (rules and worked example in the module docstring).

    Example: 45 kg, 0.060 m^3; surface 15 degC SP 35; seabed 2 degC SP 34.7, 4000 dbar;
    minimum 5 kgf, 10 % of mass -> surface, 1025.976 kg/m^3, +16.56 kgf, margin +11.56 kgf.
    """
    mass = require_non_negative("mass_in_air_kg", mass_in_air_kg, unit="kg")
    volume = require_non_negative("displaced_volume_m3", displaced_volume_m3, unit="m^3")
    floor = require_non_negative("min_net_buoyancy_kg", min_net_buoyancy_kg, unit="kgf")
    frac = require_range(
        "reserve_fraction_of_mass", reserve_fraction_of_mass, *RESERVE_FRACTION_OF_MASS_RANGE
    )
    rho, p = least_favourable_density(
        seabed_temperature_c=seabed_temperature_c,
        seabed_practical_salinity=seabed_practical_salinity,
        seabed_pressure_dbar=seabed_pressure_dbar,
        surface_temperature_c=surface_temperature_c,
        surface_practical_salinity=surface_practical_salinity,
        latitude_deg=latitude_deg,
        longitude_deg=longitude_deg,
    )
    met_at = "surface" if p == 0.0 else "seabed"
    return _judge(mass, volume, rho, met_at, p, floor, frac)
