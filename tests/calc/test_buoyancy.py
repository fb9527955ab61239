"""fleet.calc.buoyancy: Archimedes with gsw density, recovery margin, drag-equation ascent."""

from __future__ import annotations

import math
from collections.abc import Callable

import gsw
import numpy as np
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


# --- recovery buoyancy of one unit: reserve on the mass in air, least favourable density ----
THRESHOLDS = {"min_net_buoyancy_kg": 5.0, "reserve_fraction_of_mass": 0.10}  # common practice


@pytest.mark.parametrize(
    ("mass", "volume", "required", "net", "passed"),
    [
        # Archimedes at 1025 kg/m^3, worked by hand; thresholds common practice, no source
        (45.0, 0.060, 5.0, 16.50, True),  # 61.5 - 45; R = max(5, 4.5)
        (20.0, 0.022, 5.0, 2.55, False),  # 22.55 - 20: below the absolute minimum
        (200.0, 0.250, 20.0, 56.25, True),  # 256.25 - 200; R = max(5, 20)
        (200.0, 0.210, 20.0, 15.25, False),  # 215.25 - 200: below 10 % of the mass
        (50.0, 0.010, 5.0, -39.75, False),  # 10.25 - 50: sinks
        (50.0, 0.0537, 5.0, 5.0425, True),  # 55.0425 - 50: just above the minimum
    ],
)
def test_it_requires_the_larger_of_the_minimum_and_a_fraction_of_the_mass(
    mass: float, volume: float, required: float, net: float, passed: bool
) -> None:
    result = buoyancy.recovery_buoyancy_at_density(mass, volume, 1025.0, **THRESHOLDS)
    assert result.required_kg == pytest.approx(required)
    assert result.net_buoyancy_kg == pytest.approx(net, abs=1e-6)
    assert result.margin_kg == pytest.approx(net - required, abs=1e-6)
    assert result.passed is passed and (result.reasons == ()) is passed
    assert (result.met_at, result.met_at_pressure_dbar) == ("as given", None)


def test_a_floating_unit_is_held_to_the_reserve() -> None:
    # The in-water-weight rule cannot test a unit that floats on its own: 200 kg, 0.210 m^3
    # at 1025 (Archimedes +15.25 kgf) passes recovery_margin but is below 10 % of 200 kg.
    old = buoyancy.recovery_margin([buoyancy.BuoyancyPart(200.0, 0.210)], 1025.0, 0.10, 5.0)
    assert old.passed and old.margin_fraction is None
    new = buoyancy.recovery_buoyancy_at_density(200.0, 0.210, 1025.0, **THRESHOLDS)
    assert not new.passed
    assert new.reasons[0].startswith("net buoyancy +15.25 kgf at the density given")
    assert "10% of the 200 kg mass in air" in new.reasons[0]


def test_a_sinking_unit_says_so() -> None:
    result = buoyancy.recovery_buoyancy_at_density(50.0, 0.010, 1025.0, **THRESHOLDS)
    assert result.reasons[0].startswith("unit sinks at the density given")
    assert len(result.reasons) == 2


def _gsw_rho(t: float, sp: float, p: float, lat: float, lon: float) -> float:
    # TEOS-10 via gsw: SP -> SA, t -> CT, then rho
    sa = gsw.SA_from_SP(sp, p, lon, lat)
    return float(gsw.rho(sa, gsw.CT_from_t(sa, t, p), p))


@pytest.mark.parametrize(
    ("column", "met_at"),
    [
        # TEOS-10 via gsw: warm surface over cold deep water, open ocean -> the surface
        ({"seabed_temperature_c": 2.0, "seabed_practical_salinity": 34.7,
          "seabed_pressure_dbar": 4000.0, "surface_temperature_c": 15.0,
          "surface_practical_salinity": 35.0, "latitude_deg": 0.0}, "surface"),
        # TEOS-10 via gsw: a tropical shelf, 28 degC surface, 60 m
        ({"seabed_temperature_c": 24.0, "seabed_practical_salinity": 35.5,
          "seabed_pressure_dbar": 60.0, "surface_temperature_c": 28.0,
          "surface_practical_salinity": 34.0, "latitude_deg": 10.0, "longitude_deg": 120.0},
         "surface"),
        # TEOS-10 via gsw: cold salty surface over warm fresh water (contrived) -> the seabed
        ({"seabed_temperature_c": 30.0, "seabed_practical_salinity": 5.0,
          "seabed_pressure_dbar": 50.0, "surface_temperature_c": -1.5,
          "surface_practical_salinity": 40.0, "latitude_deg": 0.0}, "seabed"),
        # no water column: the seabed is the surface
        ({"seabed_temperature_c": 10.0, "seabed_practical_salinity": 35.0,
          "seabed_pressure_dbar": 0.0, "surface_temperature_c": 10.0,
          "surface_practical_salinity": 35.0, "latitude_deg": 45.0}, "surface"),
    ],
)  # fmt: skip
def test_it_judges_at_the_least_favourable_density(column: dict[str, float], met_at: str) -> None:
    lat, lon = column["latitude_deg"], column.get("longitude_deg", 0.0)
    top = _gsw_rho(column["surface_temperature_c"], column["surface_practical_salinity"],
                   0.0, lat, lon)  # fmt: skip
    bed = _gsw_rho(column["seabed_temperature_c"], column["seabed_practical_salinity"],
                   column["seabed_pressure_dbar"], lat, lon)  # fmt: skip
    result = buoyancy.recovery_buoyancy(45.0, 0.060, **column, **THRESHOLDS)  # type: ignore[arg-type]
    expected_rho = top if met_at == "surface" else bed
    assert result.met_at == met_at
    assert result.density_kg_m3 == pytest.approx(min(top, bed), rel=1e-12)
    assert result.density_kg_m3 == pytest.approx(expected_rho, rel=1e-12)
    bed_pressure = column["seabed_pressure_dbar"]
    assert result.met_at_pressure_dbar == (0.0 if met_at == "surface" else bed_pressure)
    # Archimedes with the gsw density, by hand: V rho - m
    assert result.net_buoyancy_kg == pytest.approx(0.060 * expected_rho - 45.0, rel=1e-12)
    assert result.required_kg == 5.0  # max(5 kgf, 10 % of 45 kg)


def test_the_worked_example_of_the_module() -> None:
    # TEOS-10 via gsw 3.6.23 at 15 degC, SP 35, 0 dbar, 0 N 0 E: 1025.976 kg/m^3
    result = buoyancy.recovery_buoyancy(
        45.0, 0.060, seabed_temperature_c=2.0, seabed_practical_salinity=34.7,
        seabed_pressure_dbar=4000.0, surface_temperature_c=15.0,
        surface_practical_salinity=35.0, latitude_deg=0.0, **THRESHOLDS,
    )  # fmt: skip
    assert result.density_kg_m3 == pytest.approx(1025.976, abs=1e-3)
    assert result.net_buoyancy_kg == pytest.approx(16.56, abs=0.01)
    assert result.margin_kg == pytest.approx(11.56, abs=0.01)
    assert result.passed


@SETTINGS
@given(
    t_bed=st.floats(-2.5, 40.0),
    t_top=st.floats(-2.5, 40.0),
    sp_bed=st.floats(0.0, 42.0),
    sp_top=st.floats(0.0, 42.0),
    p_bed=st.floats(0.0, 12000.0),
    lat=st.floats(-80.0, 80.0),
)
def test_the_lowest_density_of_a_linear_profile_is_at_one_end(
    t_bed: float, t_top: float, sp_bed: float, sp_top: float, p_bed: float, lat: float
) -> None:
    # TEOS-10 via gsw: an independent 101-point profile, T, SP and p linear between the ends
    w = np.linspace(0.0, 1.0, 101)
    p, t, sp = w * p_bed, t_top + w * (t_bed - t_top), sp_top + w * (sp_bed - sp_top)
    sa = gsw.SA_from_SP(sp, p, 0.0, lat)
    profile_min = float(np.min(gsw.rho(sa, gsw.CT_from_t(sa, t, p), p)))
    rho, _ = buoyancy.least_favourable_density(
        seabed_temperature_c=t_bed, seabed_practical_salinity=sp_bed, seabed_pressure_dbar=p_bed,
        surface_temperature_c=t_top, surface_practical_salinity=sp_top, latitude_deg=lat,
    )  # fmt: skip
    assert rho == pytest.approx(profile_min, rel=1e-12)


def _column(mass: float = 45.0, **changes: float) -> buoyancy.RecoveryBuoyancy:
    args = {
        "seabed_temperature_c": 2.0,
        "seabed_practical_salinity": 34.7,
        "seabed_pressure_dbar": 4000.0,
        "surface_temperature_c": 15.0,
        "surface_practical_salinity": 35.0,
        "latitude_deg": 0.0,
        **THRESHOLDS,
        **changes,
    }
    return buoyancy.recovery_buoyancy(mass, 0.060, **args)  # type: ignore[arg-type]


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
        (lambda: buoyancy.required_net_buoyancy_kg(-1.0, **THRESHOLDS), "mass_in_air_kg"),
        (lambda: buoyancy.required_net_buoyancy_kg(
            10.0, min_net_buoyancy_kg=-1.0, reserve_fraction_of_mass=0.1),
         "min_net_buoyancy_kg"),
        (lambda: buoyancy.required_net_buoyancy_kg(
            10.0, min_net_buoyancy_kg=5.0, reserve_fraction_of_mass=2.5),
         "reserve_fraction_of_mass"),
        (lambda: buoyancy.recovery_buoyancy_at_density(45.0, 0.06, 980.0, **THRESHOLDS),
         "seawater_density_kg_m3"),
        (lambda: buoyancy.recovery_buoyancy_at_density(45.0, -0.06, 1025.0, **THRESHOLDS),
         "displaced_volume_m3"),
        (lambda: _column(seabed_temperature_c=41.0), "seabed_temperature_c"),
        (lambda: _column(surface_temperature_c=-3.0), "surface_temperature_c"),
        (lambda: _column(seabed_practical_salinity=43.0), "seabed_practical_salinity"),
        (lambda: _column(surface_practical_salinity=math.nan), "surface_practical_salinity"),
        (lambda: _column(seabed_pressure_dbar=12001.0), "seabed_pressure_dbar"),
        (lambda: _column(latitude_deg=91.0), "latitude_deg"),
        (lambda: _column(longitude_deg=400.0), "longitude_deg"),
        (lambda: _column(mass=-1.0), "mass_in_air_kg"),
        (lambda: _column(reserve_fraction_of_mass=-0.1), "reserve_fraction_of_mass"),
    ],
)  # fmt: skip
def test_it_rejects_out_of_range_arguments_by_name(call: Callable[[], object], name: str) -> None:
    with pytest.raises(ValueError, match=rf"^{name} must"):
        call()
