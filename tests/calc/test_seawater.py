"""fleet.calc.seawater against TEOS-10 (gsw), UNESCO 1983 check values and EOS-80 (seawater)."""

from __future__ import annotations

import math
import warnings
from collections.abc import Callable

import gsw
import pytest
from hypothesis import given, settings
from hypothesis import strategies as st

from fleet.calc import seawater as sw

with warnings.catch_warnings():
    warnings.simplefilter("ignore")  # the EOS-80 package warns that it is deprecated
    import seawater as eos80

SETTINGS = settings(max_examples=60, deadline=None)


# --- pressure <-> depth (TEOS-10) ----------------------------------------------------------
@pytest.mark.parametrize(
    ("depth_m", "latitude_deg", "expected_dbar"),
    [
        (1000.0, 30.0, 1009.29922),  # reference 3.2, gsw 3.6.23 p_from_z; check case 3
        (1000.0, 0.0, 1007.96438),  # reference 3.2, gsw 3.6.23
        (1000.0, 45.0, 1010.63699),  # reference 3.2, gsw 3.6.23
        (1000.0, 60.0, 1011.97770),  # reference 3.2, gsw 3.6.23
        (10.0, 30.0, 10.06875),  # reference 3.2, gsw 3.6.23
        (100.0, 30.0, 100.70969),  # reference 3.2, gsw 3.6.23
        (1350.0, 45.0, 1365.51109),  # reference 3.2, gsw 3.6.23; check case 5
        (3000.0, 45.0, 3046.39249),  # reference 3.2, gsw 3.6.23
        (4000.0, 45.0, 4071.34492),  # reference 3.2, gsw 3.6.23
        (6000.0, 45.0, 6134.98127),  # reference 3.2, gsw 3.6.23
    ],
)
def test_it_gives_teos10_pressure_for_a_depth(
    depth_m: float, latitude_deg: float, expected_dbar: float
) -> None:
    assert sw.pressure_dbar(depth_m, latitude_deg) == pytest.approx(expected_dbar, abs=1e-3)


@pytest.mark.parametrize(
    ("pressure_dbar", "latitude_deg", "expected_m"),
    [
        (10000.0, 30.0, 9713.73518),  # reference 3.2, gsw 3.6.23 z_from_p; check case 4
        (1000.0, 30.0, 990.80843),  # reference 3.2, gsw 3.6.23
        (3000.0, 45.0, 2954.62907),  # reference 3.2, gsw 3.6.23
        (4000.0, 45.0, 3930.53812),  # reference 3.2, gsw 3.6.23
    ],
)
def test_it_gives_teos10_depth_for_a_pressure(
    pressure_dbar: float, latitude_deg: float, expected_m: float
) -> None:
    assert sw.depth_m(pressure_dbar, latitude_deg) == pytest.approx(expected_m, abs=1e-2)


def test_it_gives_zero_depth_at_zero_pressure() -> None:
    assert sw.depth_m(0.0, 45.0) == 0.0  # definition of sea pressure (gsw)
    assert math.copysign(1.0, sw.depth_m(0.0, 45.0)) == 1.0  # no -0.0 leaks out
    assert sw.pressure_dbar(0.0, 45.0) == 0.0


def test_1350_m_is_about_2000_psi() -> None:
    # check case 5: gsw 3.6.23 p_from_z(-1350, 45) = 1365.511 dbar = 1980.5 psi (NIST SP 811)
    psi = sw.dbar_to_psi(sw.pressure_dbar(1350.0, 45.0))
    assert psi == pytest.approx(1980.5, abs=0.5)
    assert psi == pytest.approx(2000.0, rel=0.01)  # the trade's "1350 m = 2000 psi", 1 %


def test_3500_m_matches_the_rounded_housing_test_figure() -> None:
    # reference 3.4: gsw gives 3558.3 dbar = 5161 psi; a housing-test page quotes 5200 psi
    psi = sw.dbar_to_psi(sw.pressure_dbar(3500.0, 45.0))
    assert psi == pytest.approx(5161.0, abs=1.0)
    assert psi == pytest.approx(5200.0, rel=0.01)


@SETTINGS
@given(
    depth=st.floats(0.0, 11000.0),
    latitude=st.floats(-90.0, 90.0),
)
def test_depth_to_pressure_round_trips(depth: float, latitude: float) -> None:
    p = sw.pressure_dbar(depth, latitude)
    assert sw.depth_m(p, latitude) == pytest.approx(depth, abs=1e-6)


@SETTINGS
@given(
    depth=st.floats(0.0, 10999.0),
    step=st.floats(0.5, 1000.0),
    latitude=st.floats(-90.0, 90.0),
)
def test_pressure_grows_with_depth(depth: float, step: float, latitude: float) -> None:
    deeper = min(depth + step, 11000.0)
    assert sw.pressure_dbar(deeper, latitude) > sw.pressure_dbar(depth, latitude)


def test_one_dbar_is_about_one_metre_down_to_4000_m() -> None:
    # reference 3.4 rule of thumb: within ~1-1.5 % down to 4000 m
    for depth in (100.0, 1000.0, 2000.0, 4000.0):
        assert sw.pressure_dbar(depth, 45.0) / depth == pytest.approx(1.0, abs=0.02)


@SETTINGS
@given(pressure=st.floats(0.0, 12000.0), latitude=st.floats(-90.0, 90.0))
def test_teos10_depth_agrees_with_eos80_depth(pressure: float, latitude: float) -> None:
    # seawater 3.3.5 dpth (UNESCO 1983); the two differ by ~1.1 m at 10000 dbar (reference 3.2)
    expected = float(eos80.dpth(pressure, latitude))
    assert sw.depth_m(pressure, latitude) == pytest.approx(expected, rel=2e-4, abs=1e-6)


# --- UNESCO 1983 depth ----------------------------------------------------------------------
@pytest.mark.parametrize(
    ("pressure_dbar", "latitude_deg", "expected_m", "tol"),
    [
        (10000.0, 30.0, 9712.653, 1e-3),  # UNESCO 44 check value; check case 1
        (5000.0, 36.0, 4906.08, 1e-2),  # UNESCO 44 (Fofonoff & Millard); check case 2
        (500.0, 0.0, 496.653, 1e-3),  # UNESCO 44 p. 30 table
        (500.0, 30.0, 495.998, 1e-3),  # UNESCO 44 p. 30 table
        (500.0, 45.0, 495.343, 1e-3),  # UNESCO 44 p. 30 table
        (500.0, 90.0, 494.034, 1e-3),  # UNESCO 44 p. 30 table
        (5000.0, 0.0, 4915.041, 1e-3),  # UNESCO 44 p. 30 table
        (5000.0, 30.0, 4908.560, 1e-3),  # UNESCO 44 p. 30 table
        (5000.0, 45.0, 4902.081, 1e-3),  # UNESCO 44 p. 30 table
        (5000.0, 90.0, 4889.131, 1e-3),  # UNESCO 44 p. 30 table
        (10000.0, 0.0, 9725.471, 1e-3),  # UNESCO 44 p. 30 table
        (10000.0, 45.0, 9699.841, 1e-3),  # UNESCO 44 p. 30 table
        (10000.0, 90.0, 9674.231, 1e-3),  # UNESCO 44 p. 30 table
    ],
)
def test_it_reproduces_the_unesco_depth_table(
    pressure_dbar: float, latitude_deg: float, expected_m: float, tol: float
) -> None:
    assert sw.depth_unesco_m(pressure_dbar, latitude_deg) == pytest.approx(expected_m, abs=tol)


@SETTINGS
@given(pressure=st.floats(0.0, 12000.0), latitude=st.floats(-90.0, 90.0))
def test_unesco_depth_matches_the_eos80_package(pressure: float, latitude: float) -> None:
    # seawater 3.3.5 dpth implements the same UNESCO 1983 algorithm
    expected = float(eos80.dpth(pressure, latitude))
    assert sw.depth_unesco_m(pressure, latitude) == pytest.approx(expected, rel=1e-9, abs=1e-9)


def test_gravity_at_45_degrees() -> None:
    assert sw.gravity_m_s2(45.0) == pytest.approx(9.8062, abs=1e-4)  # reference 7, gsw.grav


# --- density and sound speed ----------------------------------------------------------------
def _insitu_for(sa: float, ct: float, p: float) -> tuple[float, float]:
    """Practical salinity and in-situ t that give (SA, CT) at 0 N 0 E (gsw 3.6.23 inverses)."""
    sp = float(gsw.SP_from_SA(sa, p, 0.0, 0.0))
    t = float(gsw.t_from_CT(sa, ct, p))
    return t, sp


@pytest.mark.parametrize(
    ("sa", "ct", "p", "rho", "c"),
    [
        (35.16504, 2.0, 4000.0, 1045.95883, 1526.19069),  # gsw 3.6.23; check cases 7 and 8
        (35.16504, 0.0, 0.0, 1028.10702, 1449.00627),  # reference 3.2, gsw 3.6.23
        (35.16504, 10.0, 0.0, 1026.95237, 1489.85427),  # reference 3.2, gsw 3.6.23
        (35.16504, 4.0, 1000.0, 1032.38351, 1483.15302),  # reference 3.2, gsw 3.6.23
        (35.16504, 2.0, 2000.0, 1037.17094, 1491.40619),  # reference 3.2, gsw 3.6.23
    ],
)
def test_it_converts_sp_and_t_then_gives_teos10_density_and_sound_speed(
    sa: float, ct: float, p: float, rho: float, c: float
) -> None:
    t, sp = _insitu_for(sa, ct, p)
    assert sw.density_kg_m3(t, sp, p, 0.0, 0.0) == pytest.approx(rho, abs=1e-3)
    assert sw.sound_speed_m_s(t, sp, p, 0.0, 0.0) == pytest.approx(c, abs=1e-3)


def test_it_uses_the_absolute_salinity_anomaly_of_the_position() -> None:
    # gsw 3.6.23: SA_from_SP(35, 4000, 0, 0) = 35.17233 g/kg (reference 3.2), not 35.16504
    assert float(gsw.SA_from_SP(35.0, 4000.0, 0.0, 0.0)) == pytest.approx(35.17233, abs=1e-5)
    here = sw.density_kg_m3(2.0, 35.0, 4000.0, 0.0, 0.0)
    north_pacific = sw.density_kg_m3(2.0, 35.0, 4000.0, 40.0, 180.0)
    assert here != north_pacific  # the anomaly differs by place (TEOS-10 SA_from_SP)


def test_deep_seabed_density_is_about_1046() -> None:
    # reference 7: ~1046 kg/m^3 at 4000 dbar, 2 degC (gsw 3.6.23)
    assert sw.density_kg_m3(2.0, 34.9, 4000.0, 45.0) == pytest.approx(1046.0, abs=0.2)


def test_it_is_close_to_the_unesco_check_values_at_the_corner() -> None:
    # UNESCO 44 check values at S 40, T68 40 degC, 10000 dbar (T90 = T68 / 1.00024):
    # density 1059.82037 kg/m^3 (EOS-80, check case 10), sound speed 1731.995 m/s
    # (Chen & Millero, check case 9).  TEOS-10's 75-term fit is outside its oceanographic
    # range here, so only an agreement of ~0.1 kg/m^3 and ~3 m/s is expected.
    t90 = 40.0 / 1.00024
    assert sw.density_kg_m3(t90, 40.0, 10000.0, 0.0) == pytest.approx(1059.82037, abs=0.1)
    assert sw.sound_speed_m_s(t90, 40.0, 10000.0, 0.0) == pytest.approx(1731.995, abs=3.0)


ocean = {
    "temperature_c": st.floats(-2.0, 30.0),
    "salinity": st.floats(30.0, 40.0),
    "pressure": st.floats(0.0, 6000.0),
    "latitude": st.floats(-80.0, 80.0),
}


@SETTINGS
@given(**ocean)
def test_density_agrees_with_eos80(
    temperature_c: float, salinity: float, pressure: float, latitude: float
) -> None:
    # seawater 3.3.5 dens (EOS-80, UNESCO 1983); TEOS-10 differs by < 0.03 kg/m^3 in the ocean
    expected = float(eos80.dens(salinity, temperature_c, pressure))
    got = sw.density_kg_m3(temperature_c, salinity, pressure, latitude)
    assert got == pytest.approx(expected, abs=0.03)


@SETTINGS
@given(**ocean)
def test_sound_speed_agrees_with_eos80(
    temperature_c: float, salinity: float, pressure: float, latitude: float
) -> None:
    # seawater 3.3.5 svel (Chen & Millero 1977); the formulations differ by up to ~1.6 m/s
    # at depth (reference 3.3: use a +-1 m/s order tolerance when cross-comparing)
    expected = float(eos80.svel(salinity, temperature_c, pressure))
    got = sw.sound_speed_m_s(temperature_c, salinity, pressure, latitude)
    assert got == pytest.approx(expected, abs=2.0)


@SETTINGS
@given(
    temperature_c=st.floats(-2.0, 29.0),
    salinity=st.floats(30.0, 40.0),
    pressure=st.floats(0.0, 6000.0),
)
def test_warmer_water_is_lighter_and_faster(
    temperature_c: float, salinity: float, pressure: float
) -> None:
    # physics: thermal expansion and dc/dT > 0 in the ocean range (gsw)
    warm = temperature_c + 1.0
    rho_cold = sw.density_kg_m3(temperature_c, salinity, pressure, 0.0)
    assert sw.density_kg_m3(warm, salinity, pressure, 0.0) < rho_cold
    c_cold = sw.sound_speed_m_s(temperature_c, salinity, pressure, 0.0)
    assert sw.sound_speed_m_s(warm, salinity, pressure, 0.0) > c_cold


# --- Mackenzie 1981 -------------------------------------------------------------------------
@pytest.mark.parametrize(
    ("t", "s", "d", "expected"),
    [
        (10.0, 35.0, 1000.0, 1506.264),  # reference 3.3, Mackenzie 1981; check case 11
        (4.0, 35.0, 1000.0, 1482.955),  # reference 3.3
        (2.0, 35.0, 4000.0, 1525.720),  # reference 3.3
        (0.0, 35.0, 0.0, 1448.960),  # reference 3.3 (the constant term)
    ],
)
def test_it_gives_mackenzie_sound_speed(t: float, s: float, d: float, expected: float) -> None:
    assert sw.sound_speed_mackenzie_m_s(t, s, d) == pytest.approx(expected, abs=1e-3)


def test_mackenzie_arithmetic_matches_the_published_port_check_value() -> None:
    # check case 11: c(40, 40, 10000) = 1718.774, outside validity, so via the bare formula
    assert sw._mackenzie(40.0, 40.0, 10000.0) == pytest.approx(1718.774, abs=1e-3)
    with pytest.raises(ValueError, match="^temperature_c"):
        sw.sound_speed_mackenzie_m_s(40.0, 40.0, 10000.0)


def test_the_sound_speed_formulas_agree_at_10_degrees_1000_m() -> None:
    # check case 13: Mackenzie / Chen & Millero / gsw at (10 degC, 35, 1000) within 1506.2 +- 0.5
    values = [
        sw.sound_speed_mackenzie_m_s(10.0, 35.0, 1000.0),  # Mackenzie 1981
        float(eos80.svel(35.0, 10.0, 1000.0)),  # seawater 3.3.5, Chen & Millero 1977
        sw.sound_speed_m_s(10.0, 35.0, 1000.0, 0.0),  # TEOS-10
    ]
    for value in values:
        assert value == pytest.approx(1506.2, abs=0.5)


# --- units ----------------------------------------------------------------------------------
@pytest.mark.parametrize(
    ("func", "value", "expected", "tol"),
    [
        (sw.dbar_to_psi, 1.0, 1.4503774, 1e-7),  # NIST SP 811; check case 6
        (sw.bar_to_psi, 1.0, 14.503774, 1e-6),  # NIST SP 811; check case 6
        (sw.psi_to_dbar, 1.0, 0.6894757293168, 1e-12),  # NIST SP 811: 1 psi = 6894.757293168 Pa
        (sw.dbar_to_bar, 4000.0, 400.0, 1e-12),  # SI definition
        (sw.bar_to_dbar, 400.0, 4000.0, 1e-12),  # SI definition
        (sw.dbar_to_mpa, 4000.0, 40.0, 1e-12),  # SI definition
        (sw.mpa_to_dbar, 1.0, 100.0, 1e-12),  # SI definition
        (sw.dbar_to_psi, 689.4757293168, 1000.0, 1e-7),  # NIST SP 811
    ],
)
def test_it_converts_pressure_units_exactly(
    func: Callable[[float], float], value: float, expected: float, tol: float
) -> None:
    assert func(value) == pytest.approx(expected, abs=tol)


def test_one_mpa_is_145_psi() -> None:
    assert sw.dbar_to_psi(sw.mpa_to_dbar(1.0)) == pytest.approx(145.03774, abs=1e-5)  # NIST


@SETTINGS
@given(st.floats(-1e6, 1e6))
def test_unit_conversions_round_trip(value: float) -> None:
    assert sw.psi_to_dbar(sw.dbar_to_psi(value)) == pytest.approx(value, rel=1e-12, abs=1e-9)
    assert sw.bar_to_dbar(sw.dbar_to_bar(value)) == pytest.approx(value, rel=1e-12, abs=1e-9)
    assert sw.mpa_to_dbar(sw.dbar_to_mpa(value)) == pytest.approx(value, rel=1e-12, abs=1e-9)


# --- guards ---------------------------------------------------------------------------------
OK = {"t": 10.0, "sp": 35.0, "p": 1000.0, "lat": 45.0, "lon": 0.0}


@pytest.mark.parametrize(
    ("call", "name"),
    [
        (lambda: sw.pressure_dbar(-1.0, 45.0), "depth_m"),
        (lambda: sw.pressure_dbar(11000.1, 45.0), "depth_m"),
        (lambda: sw.pressure_dbar(math.nan, 45.0), "depth_m"),
        (lambda: sw.pressure_dbar(100.0, 90.5), "latitude_deg"),
        (lambda: sw.pressure_dbar(100.0, -91.0), "latitude_deg"),
        (lambda: sw.depth_m(-0.1, 45.0), "pressure_dbar"),
        (lambda: sw.depth_m(12000.1, 45.0), "pressure_dbar"),
        (lambda: sw.depth_m(100.0, math.inf), "latitude_deg"),
        (lambda: sw.depth_unesco_m(-1.0, 45.0), "pressure_dbar"),
        (lambda: sw.depth_unesco_m(100.0, 100.0), "latitude_deg"),
        (lambda: sw.gravity_m_s2(91.0), "latitude_deg"),
        (lambda: sw.gravity_m_s2(45.0, -1.0), "pressure_dbar"),
        (lambda: sw.density_kg_m3(-2.6, 35.0, 0.0, 0.0), "temperature_c"),
        (lambda: sw.density_kg_m3(40.1, 35.0, 0.0, 0.0), "temperature_c"),
        (lambda: sw.density_kg_m3(10.0, -0.1, 0.0, 0.0), "practical_salinity"),
        (lambda: sw.density_kg_m3(10.0, 42.1, 0.0, 0.0), "practical_salinity"),
        (lambda: sw.density_kg_m3(10.0, 35.0, -1.0, 0.0), "pressure_dbar"),
        (lambda: sw.density_kg_m3(10.0, 35.0, 0.0, 95.0), "latitude_deg"),
        (lambda: sw.density_kg_m3(10.0, 35.0, 0.0, 0.0, 400.0), "longitude_deg"),
        (lambda: sw.sound_speed_m_s(math.nan, 35.0, 0.0, 0.0), "temperature_c"),
        (lambda: sw.sound_speed_m_s(10.0, 50.0, 0.0, 0.0), "practical_salinity"),
        (lambda: sw.sound_speed_m_s(10.0, 35.0, 13000.0, 0.0), "pressure_dbar"),
        (lambda: sw.sound_speed_m_s(10.0, 35.0, 0.0, -95.0), "latitude_deg"),
        (lambda: sw.sound_speed_m_s(10.0, 35.0, 0.0, 0.0, -200.0), "longitude_deg"),
        (lambda: sw.sound_speed_mackenzie_m_s(31.0, 35.0, 0.0), "temperature_c"),
        (lambda: sw.sound_speed_mackenzie_m_s(10.0, 24.0, 0.0), "salinity"),
        (lambda: sw.sound_speed_mackenzie_m_s(10.0, 35.0, 8001.0), "depth_m"),
        (lambda: sw.dbar_to_psi(math.nan), "pressure_dbar"),
        (lambda: sw.psi_to_dbar(math.inf), "pressure_psi"),
        (lambda: sw.dbar_to_bar(math.nan), "pressure_dbar"),
        (lambda: sw.bar_to_dbar(math.nan), "pressure_bar"),
        (lambda: sw.bar_to_psi(math.nan), "pressure_bar"),
        (lambda: sw.dbar_to_mpa(math.nan), "pressure_dbar"),
        (lambda: sw.mpa_to_dbar(math.nan), "pressure_mpa"),
    ],
)
def test_it_rejects_out_of_range_arguments_by_name(call: Callable[[], float], name: str) -> None:
    with pytest.raises(ValueError, match=rf"^{name} must be"):
        call()
