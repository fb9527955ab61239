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

Ascent speed: terminal velocity from the drag equation, v = sqrt(2 B / (rho C_d A)), with
B in newtons.
"""

from __future__ import annotations

import math
from collections.abc import Iterable
from dataclasses import dataclass
from typing import Final

from fleet.calc._checks import require_non_negative, require_positive, require_range
from fleet.calc.seawater import STANDARD_GRAVITY_M_S2

DEFAULT_MIN_MARGIN_FRACTION: Final = 0.10  # common practice, no published source
DEFAULT_MIN_NET_BUOYANCY_KG: Final = 5.0  # common practice, no published source
DEFAULT_MIN_ANCHOR_RATIO: Final = 1.5  # common practice, no published source


def _density(value: float) -> float:
    return require_range("seawater_density_kg_m3", value, 990.0, 1100.0, unit="kg/m^3")


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
