"""fleet.calc.anodes against DNV-RP-B401 (2010) tables, its worked examples and numpy."""

from __future__ import annotations

import math
from collections.abc import Callable

import numpy as np
import pytest
from hypothesis import given, settings
from hypothesis import strategies as st

from fleet.calc import anodes

SETTINGS = settings(max_examples=100, deadline=None)


# --- alloy table and Faraday capacity --------------------------------------------------------
@pytest.mark.parametrize(
    ("metal", "environment", "capacity", "ccp"),
    [
        ("Al-Zn-In", "seawater", 2000.0, -1.05),  # DNV-RP-B401 (2010) Table 10-6, confirmed
        ("Al-Zn-In", "sediment", 1500.0, -0.95),  # Table 10-6; CCP conflicts (-1.00 from memory)
        ("Zn", "seawater", 780.0, -1.00),  # Table 10-6; CCP conflicts (-1.03 from memory)
        ("Zn", "sediment", 700.0, -0.95),  # Table 10-6; CCP conflicts (-0.98 from memory)
    ],
)
def test_it_holds_the_b401_alloy_rows(
    metal: str, environment: str, capacity: float, ccp: float
) -> None:
    row = anodes.alloy(metal, environment)
    assert row.capacity_ah_per_kg == capacity
    assert row.closed_circuit_potential_v == ccp
    assert "Table 10-6" in row.source


def test_it_marks_magnesium_as_from_memory() -> None:
    # EN 12496 / general CP texts, from memory: ~1100-1230 Ah/kg, -1.50 / -1.70 V
    for metal, ccp in (("Mg", -1.50), ("Mg-high-potential", -1.70)):
        row = anodes.alloy(metal)
        assert row.confidence == "from memory"
        assert 1100.0 <= row.capacity_ah_per_kg <= 1230.0
        assert row.closed_circuit_potential_v == ccp


@pytest.mark.parametrize(
    ("metal", "expected"),
    [
        ("Al", 2979.98),  # Faraday's law, CODATA F; check case 23
        ("Zn", 819.87),  # Faraday's law, CODATA F; check case 23
        ("Mg", 2205.43),  # Faraday's law, CODATA F (reference 1.1)
    ],
)
def test_it_gives_the_faraday_capacity(metal: str, expected: float) -> None:
    assert anodes.theoretical_capacity_ah_per_kg(metal) == pytest.approx(expected, abs=0.05)


def test_design_capacity_is_below_theoretical() -> None:
    # reference 1.1: current efficiency Al-Zn-In ~0.67, Zn ~0.95
    al = anodes.alloy("Al-Zn-In").capacity_ah_per_kg / anodes.theoretical_capacity_ah_per_kg("Al")
    zn = anodes.alloy("Zn").capacity_ah_per_kg / anodes.theoretical_capacity_ah_per_kg("Zn")
    assert al == pytest.approx(0.67, abs=0.005)
    assert zn == pytest.approx(0.95, abs=0.005)


# --- design current density, DNV-RP-B401 (2010) Tables 10-1 / 10-2 ---------------------------
TABLE_10_1_2 = {
    # climate: rows for depths 0-30, >30-100, >100-300, >300 m of (initial, mean, final)
    # DNV-RP-B401 (2010) Table 10-1 (initial, final) and Table 10-2 (mean)
    "tropical": [(0.150, 0.070, 0.100), (0.120, 0.060, 0.080), (0.140, 0.070, 0.090),
                 (0.180, 0.090, 0.130)],
    "sub-tropical": [(0.170, 0.080, 0.110), (0.140, 0.070, 0.090), (0.160, 0.080, 0.110),
                     (0.200, 0.100, 0.150)],
    "temperate": [(0.200, 0.100, 0.130), (0.170, 0.080, 0.110), (0.190, 0.090, 0.140),
                  (0.220, 0.110, 0.170)],
    "arctic": [(0.250, 0.120, 0.170), (0.200, 0.100, 0.130), (0.220, 0.110, 0.170),
               (0.220, 0.110, 0.170)],
}  # fmt: skip
DEPTHS = [(0.0, 30.0), (30.5, 100.0), (100.5, 300.0), (300.5, 6000.0)]  # inside each bin
GRID = [
    (climate, depth, phase, TABLE_10_1_2[climate][row][col])
    for climate in TABLE_10_1_2
    for row, bin_depths in enumerate(DEPTHS)
    for depth in bin_depths
    for col, phase in enumerate(("initial", "mean", "final"))
]


@pytest.mark.parametrize(("climate", "depth", "phase", "expected"), GRID)
def test_it_gives_every_b401_current_density(
    climate: str, depth: float, phase: str, expected: float
) -> None:
    assert anodes.design_current_density_a_m2(climate, depth, phase) == expected


@pytest.mark.parametrize(
    ("climate", "depth", "phase", "expected"),
    [
        ("tropical", 20.0, "mean", 0.070),  # DNV-RP-B401 Table 10-2; check case 21
        ("temperate", 500.0, "initial", 0.220),  # Table 10-1; check case 21
        ("arctic", 200.0, "final", 0.170),  # Table 10-1; check case 21
        ("arctic", 1800.0, "final", 0.170),  # worked notes at 1710-1900 m (reference 1.3)
    ],
)
def test_it_gives_the_check_case_current_densities(
    climate: str, depth: float, phase: str, expected: float
) -> None:
    assert anodes.design_current_density_a_m2(climate, depth, phase) == expected


def test_it_puts_30_m_in_the_shallow_bin() -> None:
    # DNV-RP-B401 Table 10-1 bins "0-30" and ">30-100"
    assert anodes.design_current_density_a_m2("tropical", 30.0, "initial") == 0.150
    assert anodes.design_current_density_a_m2("tropical", 30.001, "initial") == 0.120


@pytest.mark.parametrize(
    ("t", "climate"),
    [
        (25.0, "tropical"),  # DNV-RP-B401 Table 10-1: > 20 degC
        (20.0, "sub-tropical"),  # 12-20 degC
        (12.0, "sub-tropical"),
        (11.9, "temperate"),  # 7-12 degC (Table 10-2 edge)
        (7.0, "temperate"),
        (6.9, "arctic"),  # < 7 degC
    ],
)
def test_it_picks_the_climatic_region(t: float, climate: str) -> None:
    assert anodes.climate_for_surface_temperature(t) == climate


# --- coating breakdown, DNV-RP-B401 (2010) Table 10-4 ----------------------------------------
@pytest.mark.parametrize(
    ("category", "depth", "years", "mean", "final"),
    [
        ("III", 20.0, 22.0, 0.152, 0.284),  # Table 10-4, published worked notes; check case 20
        ("III", 50.0, 27.0, 0.128, 0.236),  # Table 10-4, published worked notes; check case 20
        ("I", 10.0, 10.0, 0.60, 1.0),  # Table 10-4: a 0.10, b 0.10; final capped at 1.0
        ("II", 100.0, 20.0, 0.20, 0.35),  # Table 10-4: a 0.05, b 0.015 below 30 m
        ("bare", 100.0, 20.0, 1.0, 1.0),  # bare metal, f_c = 1 (reference 1.4)
    ],
)
def test_it_gives_coating_breakdown(
    category: str, depth: float, years: float, mean: float, final: float
) -> None:
    result = anodes.coating_breakdown(category, depth, years)
    assert result.mean == pytest.approx(mean, abs=1e-9)
    assert result.final == pytest.approx(final, abs=1e-9)


# --- utilisation factor, DNV-RP-B401 (2010) Table 10-8 ----------------------------------------
@pytest.mark.parametrize(
    ("anode_type", "u"),
    [
        ("long_slender_standoff", 0.90),  # Table 10-8; check case 22
        ("short_slender_standoff", 0.85),  # Table 10-8 (secondary copy)
        ("long_flush", 0.85),  # Table 10-8
        ("short_flush", 0.80),  # Table 10-8 (secondary copy)
        ("bracelet_half_shell", 0.80),  # Table 10-8; check case 22
        ("other", 0.80),  # Table 10-8
        ("bracelet_segmented", 0.75),  # from memory (ISO 15589-2 / DNV-RP-F103)
    ],
)
def test_it_gives_the_utilisation_factor(anode_type: str, u: float) -> None:
    assert anodes.utilisation_factor(anode_type) == u


# --- mass, life, consumption ------------------------------------------------------------------
def test_it_gives_the_net_mass_for_one_amp_over_25_years() -> None:
    # check case 19: DNV-RP-B401 Sec. 7, M = I t 8760 / (u eps)
    assert anodes.required_net_mass_kg(1.0, 25.0, 0.90, 2000.0) == pytest.approx(121.667, abs=1e-3)


def test_it_gives_the_net_mass_for_a_small_unit() -> None:
    # reference 1.7 worked example: 10 mA, 5 yr, eps 2000, u 0.90 -> 0.2433 kg
    mass = anodes.required_net_mass_kg(0.010, 5.0, 0.90, 2000.0)
    assert mass == pytest.approx(0.2433, abs=1e-4)
    assert anodes.design_life_years(mass, 0.010, 0.90, 2000.0) == pytest.approx(5.0, abs=1e-12)


@SETTINGS
@given(
    current=st.floats(1e-4, 10.0),
    years=st.floats(0.1, 40.0),
    u=st.floats(0.5, 1.0),
    eps=st.sampled_from([2000.0, 1500.0, 780.0, 700.0]),
)
def test_mass_and_life_are_inverse(current: float, years: float, u: float, eps: float) -> None:
    mass = anodes.required_net_mass_kg(current, years, u, eps)
    assert anodes.design_life_years(mass, current, u, eps) == pytest.approx(years, rel=1e-12)


@pytest.mark.parametrize(
    ("eps", "expected"),
    [
        (2000.0, 0.02409),  # reference 1.7: 5.5 mA for one year, Al-Zn-In
        (780.0, 0.06177),  # reference 1.7: Zn
    ],
)
def test_it_gives_the_consumed_mass(eps: float, expected: float) -> None:
    current = anodes.current_demand_a(0.05, 0.110)  # 0.05 m^2 bare at 0.110 A/m^2 = 5.5 mA
    assert current == pytest.approx(0.0055, abs=1e-12)
    assert anodes.consumed_mass_kg(current, 1.0, eps) == pytest.approx(expected, abs=1e-5)
    per_day = anodes.design_wear_rate_kg_per_day(current, eps)
    assert per_day * 365.0 == pytest.approx(expected, abs=1e-5)  # same rate, per day


def test_consumption_ignores_the_utilisation_factor() -> None:
    # DNV-RP-B401 Sec. 7: M includes 1/u, consumed metal does not
    net = anodes.required_net_mass_kg(0.01, 1.0, 0.8, 2000.0)
    assert anodes.consumed_mass_kg(0.01, 1.0, 2000.0) == pytest.approx(net * 0.8)


def test_current_demand_scales_with_coating_breakdown() -> None:
    # DNV-RP-B401 Sec. 7: I_c = A i f_c
    assert anodes.current_demand_a(10.0, 0.1, 0.152) == pytest.approx(0.152)


def test_it_gives_the_replacement_mass() -> None:
    # DNV-RP-B401 Sec. 7: u is the usable fraction, so (1 - u) M is left at end of life
    assert anodes.replacement_mass_kg(0.50, 0.80) == pytest.approx(0.10)


# --- resistance, DNV-RP-B401 (2010) Table 10-7 ------------------------------------------------
def test_it_gives_the_dwight_resistance_of_the_published_anode() -> None:
    # check case 17: rho 0.22, L 1.53, r 0.095 -> 0.07244 ohm; I_a = 0.25 / R_a = 3.45 A,
    # matching a published worked calc (0.072 ohm, 3.45 A)
    r_a = anodes.resistance_long_slender_ohm(0.22, 1.53, 0.095)
    assert r_a == pytest.approx(0.07244, abs=5e-5)
    assert anodes.anode_current_a(0.25, r_a) == pytest.approx(3.45, abs=0.01)


@pytest.mark.parametrize(
    ("rho", "length", "radius", "expected"),
    [
        (0.22, 1.377, 0.032, 0.1055),  # reference 1.7: end of life (note gives 0.106)
        (0.25, 0.5, 0.05, 0.21397),  # reference 1.7 worked example
    ],
)
def test_it_gives_the_long_slender_worked_examples(
    rho: float, length: float, radius: float, expected: float
) -> None:
    result = anodes.resistance_long_slender_ohm(rho, length, radius)
    assert result == pytest.approx(expected, abs=5e-5)


def test_the_close_standoff_note_multiplies_by_1_3() -> None:
    # DNV-RP-B401 Table 10-7 note 1
    base = anodes.resistance_long_slender_ohm(0.25, 0.5, 0.05)
    close = anodes.resistance_long_slender_ohm(0.25, 0.5, 0.05, close_standoff=True)
    assert close == pytest.approx(1.3 * base)


def test_short_and_long_slender_formulas_roughly_agree_at_the_boundary() -> None:
    # DNV-RP-B401 Table 10-7: both describe a cylinder; at L = 4r they should be close
    long_r = anodes.resistance_long_slender_ohm(0.25, 0.2, 0.05)
    short_r = anodes.resistance_short_slender_ohm(0.25, 0.2 - 1e-9, 0.05)
    assert short_r == pytest.approx(long_r, rel=0.1)


def test_it_gives_the_short_slender_resistance() -> None:
    # DNV-RP-B401 Table 10-7 formula evaluated by hand: rho 0.25, L 0.10, r 0.05, r/2L = 0.25:
    # 0.25/(2 pi 0.1) [ln(4 (1 + sqrt(1.0625))) + 0.25 - sqrt(1.0625)] = 0.5228 ohm
    assert anodes.resistance_short_slender_ohm(0.25, 0.10, 0.05) == pytest.approx(0.5228, abs=1e-4)


def test_it_gives_the_flush_resistance() -> None:
    # DNV-RP-B401 Table 10-7: R = rho / 2S, S = (L + W) / 2 = 0.35 m
    assert anodes.resistance_flush_ohm(0.25, 0.60, 0.10) == pytest.approx(0.25 / 0.70)


def test_it_gives_the_mccoy_resistance() -> None:
    # check case 18: 0.315 rho / sqrt(A), rho 0.25, A 0.01 -> 0.7875 ohm
    assert anodes.resistance_mccoy_ohm(0.25, 0.01) == pytest.approx(0.7875, abs=1e-6)


# --- wear fit ---------------------------------------------------------------------------------
def test_it_fits_a_straight_wear_line() -> None:
    # three collinear readings: least squares through them is the line itself (by hand)
    fit = anodes.fit_wear([(0.0, 1.00), (100.0, 0.99), (200.0, 0.98)])
    assert fit.rate_kg_per_day == pytest.approx(1e-4)
    assert fit.intercept_kg == pytest.approx(1.00)
    assert fit.residual_kg == pytest.approx(0.0, abs=1e-12)
    assert fit.n_points == 3 and fit.rate_source == "fit"
    assert fit.days_to_mass(0.20) == pytest.approx(8000.0)
    assert fit.mass_at_kg(1000.0) == pytest.approx(0.90)


def test_it_matches_numpy_least_squares() -> None:
    # numpy 2.4.6 polyfit, degree 1, as an independent least-squares reference
    xs = [0.0, 95.0, 180.0, 310.0, 400.0, 515.0]
    ys = [2.500, 2.481, 2.470, 2.441, 2.432, 2.401]
    slope, intercept = np.polyfit(xs, ys, 1)
    fit = anodes.fit_wear(zip(xs, ys, strict=True))
    assert fit.rate_kg_per_day == pytest.approx(-slope, rel=1e-9)
    assert fit.intercept_kg == pytest.approx(intercept, rel=1e-9)
    residuals = np.array(ys) - (slope * np.array(xs) + intercept)
    assert fit.residual_kg == pytest.approx(float(np.sqrt(np.mean(residuals**2))), rel=1e-9)


def test_it_flags_fast_wear_against_the_design_rate() -> None:
    # the flag factor 1.5 is common practice, no published source
    points = [(0.0, 1.0), (100.0, 0.98)]  # 2e-4 kg/day observed
    assert anodes.fit_wear(points, design_rate_kg_per_day=1e-4).fast_wear
    assert not anodes.fit_wear(points, design_rate_kg_per_day=1.5e-4).fast_wear
    assert not anodes.fit_wear(points, design_rate_kg_per_day=1e-4, flag_factor=2.5).fast_wear
    assert not anodes.fit_wear(points).fast_wear  # no design rate, no flag


def test_a_single_reading_falls_back_to_the_design_rate() -> None:
    # defined behaviour (module docstring): the design-rate line through the reading
    fit = anodes.fit_wear([(50.0, 0.995)], design_rate_kg_per_day=1e-4)
    assert fit.rate_source == "design" and not fit.fast_wear
    assert fit.rate_kg_per_day == 1e-4
    assert fit.intercept_kg == pytest.approx(1.0)
    assert fit.days_to_mass(0.2) == pytest.approx(8000.0)


def test_a_single_reading_without_design_rate_has_no_rate() -> None:
    # defined behaviour (module docstring): one point fixes no slope
    fit = anodes.fit_wear([(50.0, 0.995)])
    assert fit.rate_kg_per_day is None and fit.intercept_kg is None
    assert fit.rate_source == "none"
    assert fit.days_to_mass(0.2) is None and fit.mass_at_kg(10.0) is None


def test_readings_on_the_same_immersed_day_give_no_slope() -> None:
    # least squares is undetermined with no spread in x; RMS about the mean is 0.01 kg
    fit = anodes.fit_wear([(30.0, 1.0), (30.0, 0.98)])
    assert fit.rate_source == "none" and fit.n_points == 2
    assert fit.residual_kg == pytest.approx(0.01)


def test_a_gaining_anode_has_no_days_to_mass() -> None:
    # calcareous deposit or a misread scale: mass rising, rate negative
    fit = anodes.fit_wear([(0.0, 1.0), (100.0, 1.01)])
    assert fit.rate_kg_per_day is not None and fit.rate_kg_per_day < 0
    assert fit.days_to_mass(0.2) is None


days = st.integers(0, 20000).map(lambda d: d / 10.0)  # immersed days to 0.1 day
masses = st.integers(0, 100_000).map(lambda g: g / 1000.0)  # mass to 1 g
readings = st.lists(st.tuples(days, masses), min_size=1, max_size=30)


def _assert_same_fit(a: anodes.WearFit, b: anodes.WearFit) -> None:
    assert a.n_points == b.n_points
    assert a.rate_source == b.rate_source
    assert a.fast_wear == b.fast_wear
    if a.rate_kg_per_day is None or b.rate_kg_per_day is None:
        assert a.rate_kg_per_day is None and b.rate_kg_per_day is None
    else:
        assert a.rate_kg_per_day == pytest.approx(b.rate_kg_per_day, rel=1e-6, abs=1e-9)
    if a.intercept_kg is None or b.intercept_kg is None:
        assert a.intercept_kg is None and b.intercept_kg is None
    else:
        assert a.intercept_kg == pytest.approx(b.intercept_kg, rel=1e-6, abs=1e-6)
    # residual from raw sums loses digits when the fit is near perfect: 1 g is plenty
    assert a.residual_kg == pytest.approx(b.residual_kg, abs=1e-3)


@SETTINGS
@given(points=readings, design=st.one_of(st.none(), st.floats(1e-6, 1e-2)))
def test_running_sums_give_the_same_fit(
    points: list[tuple[float, float]], design: float | None
) -> None:
    direct = anodes.fit_wear(points, design_rate_kg_per_day=design)
    sums = anodes.WearSums.empty()
    for x, y in points:
        sums = sums.add(x, y)
    _assert_same_fit(anodes.fit_wear_from_sums(sums, design_rate_kg_per_day=design), direct)


@SETTINGS
@given(start=readings, more=readings)
def test_extending_the_sums_gives_the_same_floats_as_adding_one_by_one(
    start: list[tuple[float, float]], more: list[tuple[float, float]]
) -> None:
    # the least-squares sums are a left fold (same order, same floats), however they are kept
    base = anodes.WearSums.of(start)
    assert base.extend(more) == anodes.WearSums.of(start + more)


def test_extending_the_sums_refuses_a_negative_mass() -> None:
    with pytest.raises(ValueError, match="mass_kg"):
        anodes.WearSums.empty().extend([(1.0, 0.3), (2.0, -0.1)])


# --- guards -----------------------------------------------------------------------------------
@pytest.mark.parametrize(
    ("call", "name"),
    [
        (lambda: anodes.alloy("Cu"), "metal"),
        (lambda: anodes.alloy("Mg", "sediment"), "environment"),
        (lambda: anodes.theoretical_capacity_ah_per_kg("Fe"), "metal"),
        (lambda: anodes.design_current_density_a_m2("polar", 10.0, "mean"), "climate"),
        (lambda: anodes.design_current_density_a_m2("arctic", -1.0, "mean"), "depth_m"),
        (lambda: anodes.design_current_density_a_m2("arctic", 10.0, "average"), "phase"),
        (lambda: anodes.climate_for_surface_temperature(45.0), "temperature_c"),
        (lambda: anodes.coating_breakdown("IV", 10.0, 10.0), "category"),
        (lambda: anodes.coating_breakdown("I", math.nan, 10.0), "depth_m"),
        (lambda: anodes.coating_breakdown("I", 10.0, -1.0), "years"),
        (lambda: anodes.utilisation_factor("disc"), "anode_type"),
        (lambda: anodes.current_demand_a(-1.0, 0.1), "area_m2"),
        (lambda: anodes.current_demand_a(1.0, -0.1), "current_density_a_m2"),
        (lambda: anodes.current_demand_a(1.0, 0.1, 0.0), "coating_breakdown"),
        (lambda: anodes.current_demand_a(1.0, 0.1, 1.1), "coating_breakdown"),
        (lambda: anodes.required_net_mass_kg(-1.0, 25.0, 0.9, 2000.0), "mean_current_a"),
        (lambda: anodes.required_net_mass_kg(1.0, -25.0, 0.9, 2000.0), "design_life_years"),
        (lambda: anodes.required_net_mass_kg(1.0, 25.0, 0.0, 2000.0), "utilisation_factor"),
        (lambda: anodes.required_net_mass_kg(1.0, 25.0, 1.01, 2000.0), "utilisation_factor"),
        (lambda: anodes.required_net_mass_kg(1.0, 25.0, 0.9, 0.0), "capacity_ah_per_kg"),
        (lambda: anodes.required_net_mass_kg(1.0, 25.0, 0.9, 3500.0), "capacity_ah_per_kg"),
        (lambda: anodes.design_life_years(-0.1, 0.01, 0.9, 2000.0), "net_mass_kg"),
        (lambda: anodes.design_life_years(0.1, 0.0, 0.9, 2000.0), "mean_current_a"),
        (lambda: anodes.design_life_years(0.1, 0.01, math.nan, 2000.0), "utilisation_factor"),
        (lambda: anodes.design_life_years(0.1, 0.01, 0.9, -1.0), "capacity_ah_per_kg"),
        (lambda: anodes.consumed_mass_kg(-0.01, 1.0, 2000.0), "current_a"),
        (lambda: anodes.consumed_mass_kg(0.01, -1.0, 2000.0), "years"),
        (lambda: anodes.consumed_mass_kg(0.01, 1.0, math.inf), "capacity_ah_per_kg"),
        (lambda: anodes.design_wear_rate_kg_per_day(-0.01, 2000.0), "current_a"),
        (lambda: anodes.design_wear_rate_kg_per_day(0.01, 0.0), "capacity_ah_per_kg"),
        (lambda: anodes.replacement_mass_kg(-1.0, 0.8), "net_mass_kg"),
        (lambda: anodes.replacement_mass_kg(1.0, 1.2), "utilisation_factor"),
        (lambda: anodes.anode_current_a(-0.25, 0.1), "driving_voltage_v"),
        (lambda: anodes.anode_current_a(0.25, 0.0), "resistance_ohm"),
        (lambda: anodes.resistance_long_slender_ohm(0.0, 1.5, 0.1), "resistivity_ohm_m"),
        (lambda: anodes.resistance_long_slender_ohm(0.22, 0.3, 0.1), "length_m"),
        (lambda: anodes.resistance_long_slender_ohm(0.22, 1.5, -0.1), "radius_m"),
        (lambda: anodes.resistance_short_slender_ohm(0.22, 0.5, 0.1), "length_m"),
        (lambda: anodes.resistance_short_slender_ohm(0.22, 0.0, 0.1), "length_m"),
        (lambda: anodes.resistance_short_slender_ohm(0.22, 0.1, 0.0), "radius_m"),
        (lambda: anodes.resistance_short_slender_ohm(math.nan, 0.1, 0.1), "resistivity_ohm_m"),
        (lambda: anodes.resistance_flush_ohm(0.22, 0.0, 0.1), "length_m"),
        (lambda: anodes.resistance_flush_ohm(0.22, 0.5, -0.1), "width_m"),
        (lambda: anodes.resistance_flush_ohm(-0.22, 0.5, 0.1), "resistivity_ohm_m"),
        (lambda: anodes.resistance_mccoy_ohm(0.25, 0.0), "exposed_area_m2"),
        (lambda: anodes.resistance_mccoy_ohm(200.0, 0.01), "resistivity_ohm_m"),
        (lambda: anodes.fit_wear([]), "points"),
        (lambda: anodes.fit_wear([(-1.0, 1.0)]), "immersed_days"),
        (lambda: anodes.fit_wear([(1.0, -1.0)]), "mass_kg"),
        (lambda: anodes.fit_wear([(1.0, math.nan)]), "mass_kg"),
        (
            lambda: anodes.fit_wear([(1.0, 1.0)], design_rate_kg_per_day=-1e-4),
            "design_rate_kg_per_day",
        ),
        (lambda: anodes.fit_wear([(1.0, 1.0)], flag_factor=0.9), "flag_factor"),
        (lambda: anodes.fit_wear_from_sums(anodes.WearSums.empty()), "sums.n"),
        (lambda: anodes.WearSums.empty().add(math.inf, 1.0), "immersed_days"),
        (lambda: anodes.WearSums(n=-1), "n"),
        (lambda: anodes.WearSums(n=1, sum_x=math.nan), "sum_x"),
        (lambda: anodes.fit_wear([(1.0, 1.0)]).days_to_mass(-0.1), "mass_kg"),
        (lambda: anodes.fit_wear([(1.0, 1.0)]).mass_at_kg(-1.0), "immersed_days"),
    ],
)
def test_it_rejects_out_of_range_arguments_by_name(call: Callable[[], object], name: str) -> None:
    with pytest.raises(ValueError, match=rf"^{name}\w* must"):
        call()
