"""fleet.calc.buoyancy: Archimedes with gsw density, recovery margin, drag-equation ascent."""

from __future__ import annotations

import math
from collections.abc import Callable

import gsw
import pytest
from hypothesis import given, settings
from hypothesis import strategies as st

from fleet.calc import buoyancy

SETTINGS = settings(max_examples=100, deadline=None)
RHO_4000 = float(gsw.rho(35.16504, 2.0, 4000.0))  # gsw 3.6.23: 1045.95883 kg/m^3


@pytest.mark.parametrize(
    ("rho", "expected"),
    [
        (RHO_4000, 17.758),  # check case 30: Archimedes + gsw 3.6.23
        (1025.0, 16.500),  # check case 30 at the surface
    ],
)
def test_it_gives_the_net_buoyancy(rho: float, expected: float) -> None:
    assert buoyancy.net_buoyancy_kg(45.0, 0.060, rho) == pytest.approx(expected, abs=1e-3)


def test_it_converts_kgf_to_newtons() -> None:
    # reference 7: 16.50 kgf = 161.8 N with standard gravity 9.80665 (CGPM 1901)
    assert buoyancy.kgf_to_n(16.5) == pytest.approx(161.81, abs=0.01)
    assert buoyancy.kgf_to_n(1.0, 9.8062) == pytest.approx(9.8062)  # gsw.grav(45, 0)


def test_it_gives_the_ascent_speed_of_the_worked_example() -> None:
    # reference 7: B 174.1 N, C_d 1, A 0.05 m^2 at 1045.96 kg/m^3 -> v ~ 2.6 m/s (drag equation)
    b = buoyancy.kgf_to_n(buoyancy.net_buoyancy_kg(45.0, 0.060, RHO_4000))
    assert b == pytest.approx(174.1, abs=0.1)
    assert buoyancy.ascent_speed_m_s(b, RHO_4000, 1.0, 0.05) == pytest.approx(2.58, abs=0.01)


@SETTINGS
@given(b=st.floats(0.1, 5000.0), cd=st.floats(0.1, 2.0), area=st.floats(0.001, 2.0))
def test_drag_at_the_ascent_speed_balances_buoyancy(b: float, cd: float, area: float) -> None:
    # drag equation: 0.5 rho C_d A v^2 = B at terminal speed
    v = buoyancy.ascent_speed_m_s(b, 1025.0, cd, area)
    assert 0.5 * 1025.0 * cd * area * v * v == pytest.approx(b, rel=1e-12)


def _package() -> list[buoyancy.BuoyancyPart]:
    return [
        buoyancy.BuoyancyPart(30.0, 0.012, "transponder body"),
        buoyancy.BuoyancyPart(15.0, 0.048, "flotation collar"),
    ]


def test_it_splits_weight_and_uplift() -> None:
    # Archimedes per part at 1025 kg/m^3: body -17.70 kgf, collar +34.20 kgf
    margin = buoyancy.recovery_margin(_package(), 1025.0)
    assert margin.in_water_weight_kg == pytest.approx(17.70)
    assert margin.uplift_kg == pytest.approx(34.20)
    assert margin.net_buoyancy_kg == pytest.approx(16.50)
    assert margin.margin_fraction == pytest.approx(16.50 / 17.70)
    assert margin.passed and margin.anchor_ratio is None


@pytest.mark.parametrize(
    ("kwargs", "fragment"),
    [
        # thresholds are common practice, no published source (reference 7)
        ({"min_net_buoyancy_kg": 20.0}, "net buoyancy"),
        ({"min_margin_fraction": 1.0}, "reserve"),
        ({"anchor_in_water_weight_kg": 20.0}, "anchor"),  # 1.21 x < 1.5 x
    ],
)
def test_it_fails_a_package_below_a_threshold(kwargs: dict[str, float], fragment: str) -> None:
    margin = buoyancy.recovery_margin(_package(), 1025.0, **kwargs)
    assert not margin.passed
    assert any(r.startswith(fragment) for r in margin.reasons)


def test_a_heavy_enough_anchor_passes() -> None:
    margin = buoyancy.recovery_margin(_package(), 1025.0, anchor_in_water_weight_kg=30.0)
    assert margin.passed and margin.anchor_ratio == pytest.approx(30.0 / 16.5)


def test_a_sinking_package_fails_even_without_thresholds() -> None:
    parts = [buoyancy.BuoyancyPart(50.0, 0.01)]
    margin = buoyancy.recovery_margin(parts, 1025.0, None, None)
    assert not margin.passed and margin.reasons[0].startswith("package sinks")


def test_a_package_with_nothing_sinking_has_no_fraction() -> None:
    margin = buoyancy.recovery_margin([buoyancy.BuoyancyPart(5.0, 0.02)], 1025.0)
    assert margin.margin_fraction is None and margin.passed


def test_buoyancy_is_larger_in_denser_deep_water() -> None:
    # reference 7: 16.50 kgf at 1025, 17.76 kgf at 1045.96 (same displaced volume)
    assert buoyancy.net_buoyancy_kg(45.0, 0.060, RHO_4000) > buoyancy.net_buoyancy_kg(
        45.0, 0.060, 1025.0
    )


@pytest.mark.parametrize(
    ("call", "name"),
    [
        (lambda: buoyancy.net_buoyancy_kg(-1.0, 0.06, 1025.0), "mass_in_air_kg"),
        (lambda: buoyancy.net_buoyancy_kg(45.0, -0.06, 1025.0), "displaced_volume_m3"),
        (lambda: buoyancy.net_buoyancy_kg(45.0, 0.06, 1200.0), "seawater_density_kg_m3"),
        (lambda: buoyancy.net_buoyancy_kg(45.0, 0.06, math.nan), "seawater_density_kg_m3"),
        (lambda: buoyancy.kgf_to_n(math.inf), "force_kgf"),
        (lambda: buoyancy.kgf_to_n(1.0, 1.62), "gravity_m_s2"),
        (lambda: buoyancy.BuoyancyPart(-1.0, 0.01), "mass_in_air_kg"),
        (lambda: buoyancy.BuoyancyPart(1.0, -0.01), "displaced_volume_m3"),
        (lambda: buoyancy.recovery_margin([], 1025.0), "parts"),
        (lambda: buoyancy.recovery_margin(_package(), 900.0), "seawater_density_kg_m3"),
        (lambda: buoyancy.recovery_margin(_package(), 1025.0, -0.1), "min_margin_fraction"),
        (lambda: buoyancy.recovery_margin(_package(), 1025.0, 0.1, -5.0), "min_net_buoyancy_kg"),
        (lambda: buoyancy.recovery_margin(_package(), 1025.0, 0.1, 5.0, -1.0),
         "anchor_in_water_weight_kg"),
        (lambda: buoyancy.recovery_margin(_package(), 1025.0, 0.1, 5.0, 30.0, 0.5),
         "min_anchor_ratio"),
        (lambda: buoyancy.ascent_speed_m_s(0.0, 1025.0, 1.0, 0.05), "net_buoyancy_n"),
        (lambda: buoyancy.ascent_speed_m_s(-10.0, 1025.0, 1.0, 0.05), "net_buoyancy_n"),
        (lambda: buoyancy.ascent_speed_m_s(10.0, 0.0, 1.0, 0.05), "seawater_density_kg_m3"),
        (lambda: buoyancy.ascent_speed_m_s(10.0, 1025.0, 0.0, 0.05), "drag_coefficient"),
        (lambda: buoyancy.ascent_speed_m_s(10.0, 1025.0, 1.0, 0.0), "frontal_area_m2"),
    ],
)  # fmt: skip
def test_it_rejects_out_of_range_arguments_by_name(call: Callable[[], object], name: str) -> None:
    with pytest.raises(ValueError, match=rf"^{name} must"):
        call()
