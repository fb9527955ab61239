"""fleet.calc.battery against Linden's Handbook figures and the depletion arithmetic (ref. 5)."""

from __future__ import annotations

import datetime as dt
import math
from collections.abc import Callable

import pytest
from hypothesis import given, settings
from hypothesis import strategies as st
from scipy import constants

from fleet.calc import battery

SETTINGS = settings(max_examples=100, deadline=None)


# --- chemistry table --------------------------------------------------------------------------
@pytest.mark.parametrize(
    ("key", "letter", "nominal", "cutoff"),
    [
        ("alkaline_zn_mno2", "L", 1.5, 0.9),  # IEC 60086-1 letter (confirmed); 0.9 V from memory
        ("li_socl2_bobbin", "E", 3.6, 3.0),  # IEC 60086-1 letter (confirmed); Linden ch. 14
        ("li_mno2", "C", 3.0, 2.0),  # IEC 60086-1 letter; 2.0 V end, Linden Figs. 14.50-14.52
    ],
)
def test_it_holds_the_chemistry_voltages(
    key: str, letter: str, nominal: float, cutoff: float
) -> None:
    chem = battery.chemistry(key)
    assert (chem.iec_letter, chem.nominal_v_per_cell, chem.cutoff_v_per_cell) == (
        letter,
        nominal,
        cutoff,
    )


@pytest.mark.parametrize(
    ("key", "lo", "hi"),
    [
        ("alkaline_zn_mno2", 0.02, 0.04),  # 2-4 %/yr at 20 degC, from memory (Linden ch. 11)
        ("li_socl2_bobbin", 0.005, 0.015),  # ~1 %/yr, from memory (Linden ch. 14)
        ("li_mno2", 0.01, 0.02),  # 1-2 %/yr, from memory (Linden ch. 14)
    ],
)
def test_self_discharge_is_in_the_handbook_band(key: str, lo: float, hi: float) -> None:
    assert lo <= battery.chemistry(key).self_discharge_per_year <= hi


def test_alkaline_keeps_about_85_to_90_percent_after_4_years() -> None:
    # from memory (Linden ch. 11); one secondary page: "85 % after 4 years at 21 degC"
    pack = battery.PackSpec("alkaline_zn_mno2", 1, 1, 15.0)
    kept = battery.usable_capacity_ah(pack, 20.0, 4.0) / pack.nominal_capacity_ah
    assert 0.85 <= kept <= 0.92


@pytest.mark.parametrize(
    ("key", "t", "lo", "hi"),
    [
        ("alkaline_zn_mno2", 0.0, 0.60, 0.85),  # 60-85 % at 0-5 degC, from memory (Linden ch. 11)
        ("alkaline_zn_mno2", 5.0, 0.60, 0.85),
        ("li_socl2_bobbin", 0.0, 0.90, 1.00),  # 90-100 % at 0-5 degC, from memory (Fig. 14.18)
        ("li_socl2_bobbin", 5.0, 0.90, 1.00),
    ],
)
def test_cold_water_derating_is_in_the_handbook_band(
    key: str, t: float, lo: float, hi: float
) -> None:
    assert lo <= battery.temperature_factor(key, t) <= hi


@pytest.mark.parametrize("key", sorted(battery.CHEMISTRIES))
def test_derating_never_rises_as_it_gets_colder(key: str) -> None:
    curve = battery.chemistry(key).temperature_curve
    temps = [t for t, _ in curve]
    fractions = [f for _, f in curve]
    assert temps == sorted(temps) and fractions == sorted(fractions)
    assert all(0.0 < f <= 1.0 for f in fractions)
    assert battery.temperature_factor(key, 20.0) == 1.0  # rated at room temperature


def test_it_interpolates_the_derating_linearly() -> None:
    # alkaline curve points 0 degC 0.65, 5 degC 0.75 (from memory): midpoint 0.70
    assert battery.temperature_factor("alkaline_zn_mno2", 2.5) == pytest.approx(0.70)
    # the curve's end points are inside the range and return their own values
    assert battery.temperature_factor("alkaline_zn_mno2", -20.0) == pytest.approx(0.10)
    assert battery.temperature_factor("alkaline_zn_mno2", 55.0) == pytest.approx(1.0)


# --- Li/SOCl2 D cell capacity vs load, Linden Fig. 14.17 --------------------------------------
@pytest.mark.parametrize(
    ("current_a", "expected_ah"),
    [
        (0.004, 19.0),  # Linden 4th ed. Fig. 14.17, 560 ohm; check case 32
        (0.0002, 17.0),  # Linden Fig. 14.17, 18 kohm; check case 32
        (0.035, 7.0),  # Linden Fig. 14.17, 94 ohm
        (0.020, 13.5),  # Linden Fig. 14.17, 180 ohm
    ],
)
def test_it_reads_the_d_cell_capacity_curve(current_a: float, expected_ah: float) -> None:
    result = battery.d_cell_capacity_ah("li_socl2_bobbin", current_a)
    assert result == pytest.approx(expected_ah, abs=0.5)


def test_the_d_cell_peaks_at_a_few_milliamps() -> None:
    # check case 32 shape: lower at very low drain (self-discharge) and at high drain
    peak = battery.d_cell_capacity_ah("li_socl2_bobbin", 0.004)
    for current in (0.0002, 0.0005, 0.01, 0.03):
        assert battery.d_cell_capacity_ah("li_socl2_bobbin", current) < peak


# --- pack and usable capacity -----------------------------------------------------------------
def test_a_21_cell_alkaline_string_is_31_5_v_nominal() -> None:
    # common practice, no published source: 21 x 1.5 V
    pack = battery.PackSpec("alkaline_zn_mno2", 21, 2, 15.0)
    assert pack.nominal_v == pytest.approx(31.5)
    assert pack.cutoff_v == pytest.approx(18.9)
    assert pack.nominal_capacity_ah == pytest.approx(30.0)


def test_usable_capacity_combines_temperature_age_and_rate() -> None:
    # reference 5.5: C_usable = C_nom x f_T x f_rate x (1 - age x k_sd) x n_parallel
    pack = battery.PackSpec("li_socl2_bobbin", 3, 2, 19.0)
    assert battery.usable_capacity_ah(pack, 20.0, 2.0) == pytest.approx(38.0 * 0.98)
    assert battery.usable_capacity_ah(pack, 20.0, 0.0, rate_factor=0.8) == pytest.approx(30.4)


def test_a_very_old_pack_has_no_capacity_left() -> None:
    pack = battery.PackSpec("alkaline_zn_mno2", 1, 1, 15.0)
    assert battery.usable_capacity_ah(pack, 20.0, 40.0) == 0.0


@SETTINGS
@given(t=st.floats(-20.0, 54.0), age=st.floats(0.0, 20.0))
def test_usable_capacity_never_exceeds_nominal(t: float, age: float) -> None:
    pack = battery.PackSpec("alkaline_zn_mno2", 21, 1, 15.0)
    usable = battery.usable_capacity_ah(pack, t, age)
    assert 0.0 <= usable <= pack.nominal_capacity_ah
    assert battery.usable_capacity_ah(pack, t + 1.0, age) >= usable


# --- self-discharge: its own Arrhenius temperature law ---------------------------------------
R_CODATA = constants.R  # molar gas constant, CODATA via scipy.constants (8.314462618 J/(mol K))
# Ea chosen so the rate doubles from 20 to 30 degC (rule of thumb "x2 per +10 K", common
# practice, from memory), computed here independently of the module
EA_DOUBLING = R_CODATA * math.log(2.0) / (1.0 / 293.15 - 1.0 / 303.15)


def _arrhenius_ratio(t_c: float) -> float:
    # IUPAC Gold Book "Arrhenius equation", k = A exp(-Ea/RT), as a ratio to 20 degC
    return math.exp(-EA_DOUBLING / R_CODATA * (1.0 / (t_c + 273.15) - 1.0 / 293.15))


def test_the_gas_constant_is_codata() -> None:
    # CODATA 2018 / 2019 SI: R = N_A k exactly = 8.314462618... J/(mol K)
    assert battery.GAS_CONSTANT_J_MOL_K == pytest.approx(R_CODATA, rel=1e-15)
    assert battery.GAS_CONSTANT_J_MOL_K == pytest.approx(8.314462618, abs=1e-9)


def test_the_activation_energy_doubles_the_rate_from_20_to_30_degc() -> None:
    # rule of thumb, common practice (from memory): ~51.2 kJ/mol gives x2 per 10 K at 20 degC
    assert battery.SELF_DISCHARGE_ACTIVATION_ENERGY_J_MOL == pytest.approx(51216.17, abs=0.01)
    assert battery.self_discharge_factor("li_socl2_bobbin", 30.0) == pytest.approx(2.0)


@pytest.mark.parametrize(
    ("key", "t_c", "expected_per_year"),
    [
        ("li_socl2_bobbin", 20.0, 0.01),  # reference temperature: the handbook rate (memory)
        ("li_socl2_bobbin", 30.0, 0.02),  # doubling per +10 K (rule of thumb)
        ("li_socl2_bobbin", 4.0, 0.01 * 0.2972813),  # Arrhenius, R CODATA (scipy)
        ("li_socl2_bobbin", 60.0, 0.01 * 12.46492),  # Arrhenius: warm store ~x12.5
        ("li_socl2_bobbin", -40.0, 0.01 * 0.0044827),  # Arrhenius at the curve's cold end
        ("alkaline_zn_mno2", 0.0, 0.03 * 0.2146920),  # Arrhenius, 3 %/yr at 20 degC (memory)
        ("li_mno2", 45.0, 0.015 * 5.213062),  # Arrhenius, 1.5 %/yr at 20 degC (memory)
    ],
)
def test_self_discharge_follows_the_arrhenius_law(
    key: str, t_c: float, expected_per_year: float
) -> None:
    result = battery.self_discharge_fraction_per_year(key, t_c)
    # independent computation with scipy's gas constant
    independent = battery.chemistry(key).self_discharge_per_year * _arrhenius_ratio(t_c)
    assert result == pytest.approx(independent, rel=1e-12)
    assert result == pytest.approx(expected_per_year, rel=1e-4)  # the row, worked separately


@pytest.mark.parametrize("key", sorted(battery.CHEMISTRIES))
def test_the_self_discharge_factor_is_one_at_20_degc(key: str) -> None:
    # invariant of the ratio form: the reference rate is the handbook's 20 degC figure
    assert battery.self_discharge_factor(key, 20.0) == 1.0


@pytest.mark.parametrize(("t_lo", "t_hi"), [(0.0, 10.0), (10.0, 20.0), (20.0, 30.0), (30.0, 40.0)])
def test_self_discharge_roughly_doubles_per_10_k_near_room_temperature(
    t_lo: float, t_hi: float
) -> None:
    # rule of thumb "x2 per +10 K" (common practice, from memory): 2.22 / 2.10 / 2.00 / 1.91
    ratio = battery.self_discharge_factor("li_mno2", t_hi) / battery.self_discharge_factor(
        "li_mno2", t_lo
    )
    assert 1.9 <= ratio <= 2.25


@SETTINGS
@given(t=st.floats(-40.0, 84.0), dt=st.floats(0.01, 1.0))
def test_self_discharge_rises_with_temperature(t: float, dt: float) -> None:
    low = battery.self_discharge_fraction_per_year("li_socl2_bobbin", t)
    assert battery.self_discharge_fraction_per_year("li_socl2_bobbin", t + dt) > low > 0.0


def test_warm_self_discharge_is_not_the_capacity_derating() -> None:
    # The capacity derating f_T is 1.0 from 20 degC up (Linden, from memory), so the old
    # estimate nominal x f_T x k_20 stayed at 1 %/yr at 30 degC; Arrhenius gives 2 %/yr.
    pack = battery.PackSpec("li_socl2_bobbin", 3, 2, 19.0)
    old = pack.nominal_capacity_ah * battery.temperature_factor("li_socl2_bobbin", 30.0) * 0.01
    new = battery.self_discharge_ah_per_day(pack, 30.0) * 365.25
    assert old == pytest.approx(0.38)
    assert new == pytest.approx(0.76)


@pytest.mark.parametrize(
    ("strings", "cell_ah", "t_c", "expected_ah_per_day"),
    [
        (2, 19.0, 30.0, 38.0 * 0.02 / 365.25),  # 2.0808 mAh/day; doubling rule, Julian year
        (1, 19.0, 20.0, 19.0 * 0.01 / 365.25),  # 0.5202 mAh/day at the reference temperature
        (1, 19.0, 4.0, 19.0 * 0.01 * 0.2972813 / 365.25),  # Arrhenius, R CODATA
    ],
)
def test_it_gives_the_self_discharge_per_day(
    strings: int, cell_ah: float, t_c: float, expected_ah_per_day: float
) -> None:
    pack = battery.PackSpec("li_socl2_bobbin", 1, strings, cell_ah)
    result = battery.self_discharge_ah_per_day(pack, t_c)
    assert result == pytest.approx(expected_ah_per_day, rel=1e-6)


@pytest.mark.parametrize(
    ("storage_c", "expected_ah"),
    [
        (None, 19.0 * (1 - 2 * 0.01)),  # default 20 degC: the old result, 18.62 Ah
        (20.0, 19.0 * (1 - 2 * 0.01)),  # the same, named
        (30.0, 19.0 * (1 - 2 * 0.02)),  # 18.24 Ah: doubling per +10 K
        (4.0, 19.0 * (1 - 2 * 0.01 * 0.2972813)),  # 18.887 Ah: Arrhenius, R CODATA
    ],
)
def test_shelf_loss_uses_the_storage_temperature(
    storage_c: float | None, expected_ah: float
) -> None:
    pack = battery.PackSpec("li_socl2_bobbin", 1, 1, 19.0)
    result = battery.usable_capacity_ah(pack, 20.0, 2.0, storage_temperature_c=storage_c)
    assert result == pytest.approx(expected_ah, rel=1e-6)


@SETTINGS
@given(t=st.floats(-40.0, 85.0), age=st.floats(0.0, 20.0))
def test_the_default_storage_temperature_keeps_the_old_result(t: float, age: float) -> None:
    # reference 5.5 as before: C_nom x f_T x (1 - age x k_20)
    pack = battery.PackSpec("li_socl2_bobbin", 3, 2, 19.0)
    old = 38.0 * battery.temperature_factor("li_socl2_bobbin", t) * max(0.0, 1 - age * 0.01)
    assert battery.usable_capacity_ah(pack, t, age) == pytest.approx(old, rel=1e-12)


@pytest.mark.parametrize(
    ("strings", "current_a", "expected"),
    [
        (1, 0.020, 13.5 / 19.0),  # Linden Fig. 14.17: 180 ohm 13.5 Ah vs 560 ohm 19.0 Ah
        (2, 0.040, 13.5 / 19.0),  # the same per string: 40 mA over 2 strings
        (1, 0.035, 7.0 / 19.0),  # Linden Fig. 14.17: 94 ohm 7 Ah
        (1, 0.004, 1.0),  # the reference current itself
        (1, 0.0002, 1.0),  # below it: no extra loss (the curve's fall there is self-discharge)
        (3, 0.0, 1.0),  # no load
    ],
)
def test_it_derates_for_a_high_drain_duty(strings: int, current_a: float, expected: float) -> None:
    pack = battery.PackSpec("li_socl2_bobbin", 1, strings, 19.0)
    assert battery.rate_factor_at_current(pack, current_a) == pytest.approx(expected, rel=1e-9)
    usable = battery.usable_capacity_ah(pack, 20.0, 0.0, mean_load_current_a=current_a)
    assert usable == pytest.approx(strings * 19.0 * expected, rel=1e-9)


@SETTINGS
@given(current=st.floats(0.0, 0.035))
def test_the_rate_factor_never_exceeds_one_and_falls_with_current(current: float) -> None:
    pack = battery.PackSpec("li_socl2_bobbin", 1, 1, 19.0)
    factor = battery.rate_factor_at_current(pack, current)
    assert 0.0 < factor <= 1.0
    assert battery.rate_factor_at_current(pack, min(0.035, current + 0.001)) <= factor


# --- consumption and life ---------------------------------------------------------------------
def test_it_gives_the_annual_consumption_of_the_worked_example() -> None:
    # check case 31: 200 uA listening + 100 replies/h of 0.5 A x 10 ms -> 2.9687 Ah/yr
    annual = battery.annual_consumption_ah(200e-6, 100.0, 0.5, 0.010)
    assert annual == pytest.approx(2.9687, abs=1e-4)
    # check case 31: 15.2 Ah usable and 0.19 Ah/yr self-discharge -> 4.81 years
    with_sd = battery.annual_consumption_ah(200e-6, 100.0, 0.5, 0.010, 0, 0, 0, 0.19)
    assert battery.life_years(15.2, with_sd) == pytest.approx(4.81, abs=0.01)


def test_the_worked_example_pack_is_19_ah_derated_to_15_2() -> None:
    # reference 5.5: one D Li/SOCl2, 19 Ah, derated 80 % -> 15.2 Ah; 1 %/yr of 19 = 0.19 Ah
    pack = battery.PackSpec("li_socl2_bobbin", 1, 1, 19.0)
    assert battery.usable_capacity_ah(pack, 20.0, 0.0, rate_factor=0.8) == pytest.approx(15.2)
    sd = pack.chem.self_discharge_per_year * pack.nominal_capacity_ah
    assert sd == pytest.approx(0.19)


def test_release_tests_add_their_charge() -> None:
    # 4 release tests a year of 2 A for 30 s = 4 x 60 A s / 3600 = 0.0667 Ah (arithmetic)
    base = battery.annual_consumption_ah(0.0, 0.0, 0.0, 0.0)
    with_release = battery.annual_consumption_ah(0.0, 0.0, 0.0, 0.0, 4.0, 2.0, 30.0)
    assert base == 0.0
    assert with_release == pytest.approx(4 * 60 / 3600)


def test_charge_used_matches_the_annual_figure_for_one_year() -> None:
    # the same arithmetic as check case 31, counted event by event
    used = battery.charge_used_ah(8760.0, 200e-6, 876_000, 0.5 * 0.010, 2, 60.0)
    assert used == pytest.approx(2.9687 + 2 * 60 / 3600, abs=1e-4)


def test_it_counts_down_the_remaining_charge() -> None:
    # arithmetic: 10 Ah - 365 days x 0.01 Ah = 6.35 Ah; 6.35 / 0.01 = 635 days
    start = dt.date(2025, 1, 1)
    assert battery.remaining_ah_on(dt.date(2026, 1, 1), start, 10.0, 0.01) == pytest.approx(6.35)
    assert battery.remaining_ah_on(start, start, 10.0, 0.01) == 10.0
    assert battery.remaining_ah_on(dt.date(2035, 1, 1), start, 10.0, 0.01) == 0.0
    assert battery.days_left(6.35, 0.01) == pytest.approx(635.0)
    assert battery.empty_on(dt.date(2026, 1, 1), 6.35, 0.01) == dt.date(2027, 9, 28)


@SETTINGS
@given(
    remaining=st.floats(0.0, 100.0),
    daily=st.floats(1e-4, 1.0),
    start=st.dates(dt.date(2000, 1, 1), dt.date(2050, 1, 1)),
)
def test_the_pack_is_empty_on_the_empty_date(
    remaining: float, daily: float, start: dt.date
) -> None:
    end = battery.empty_on(start, remaining, daily)
    left = battery.remaining_ah_on(end, start, remaining, daily)
    assert left >= -1e-9 and left < daily + 1e-9


# --- state of charge from open-circuit volts --------------------------------------------------
def test_a_21_cell_alkaline_string_at_23_v_is_near_end_of_life() -> None:
    # common practice, no published source: 23 V / 21 = 1.095 V per cell
    band = battery.state_of_charge_band("alkaline_zn_mno2", 23.0, 21)
    assert band.band == "near end of life"
    assert band.volts_per_cell == pytest.approx(1.0952, abs=1e-4)
    assert band.indicative_only


@pytest.mark.parametrize(
    ("volts", "expected"),
    [
        (1.58, "fresh"),  # ~1.58 V fresh, from memory (Linden ch. 11)
        (1.45, "part used"),  # ~1.45 V at ~50 %, from memory
        (1.35, "low"),
        (1.29, "near end of life"),  # < 1.30 V near exhausted, from memory
        (0.85, "exhausted"),  # below the 0.9 V functional cutoff
    ],
)
def test_it_bands_alkaline_cells(volts: float, expected: str) -> None:
    assert battery.state_of_charge_band("alkaline_zn_mno2", volts, 1).band == expected


def test_a_flat_chemistry_says_its_reading_is_indeterminate() -> None:
    # Linden ch. 14 (from memory): Li/SOCl2 stays near 3.65 V open circuit until nearly empty
    band = battery.state_of_charge_band("li_socl2_bobbin", 3.67 * 4, 4)
    assert band.band == "indeterminate"
    assert band.flat_discharge and band.indicative_only
    assert "flat" in band.note


@pytest.mark.parametrize("key", sorted(battery.CHEMISTRIES))
def test_every_band_is_indicative_only(key: str) -> None:
    chem = battery.chemistry(key)
    floors = [v for v, _ in chem.soc_bands]
    assert floors == sorted(floors, reverse=True) and floors[-1] == 0.0
    for v in (*floors, chem.max_open_circuit_v_per_cell):
        assert battery.state_of_charge_band(key, v, 1).indicative_only


# --- guards -----------------------------------------------------------------------------------
PACK = battery.PackSpec("alkaline_zn_mno2", 21, 1, 15.0)
SOCL2 = battery.PackSpec("li_socl2_bobbin", 1, 2, 19.0)
DAY = dt.date(2025, 1, 1)


@pytest.mark.parametrize(
    ("call", "name"),
    [
        (lambda: battery.chemistry("nimh"), "chemistry"),
        (lambda: battery.temperature_factor("li_mno2", -21.0), "temperature_c"),
        (lambda: battery.temperature_factor("alkaline_zn_mno2", 56.0), "temperature_c"),
        (lambda: battery.temperature_factor("alkaline_zn_mno2", math.nan), "temperature_c"),
        (lambda: battery.d_cell_capacity_ah("alkaline_zn_mno2", 0.004), "chemistry"),
        (lambda: battery.d_cell_capacity_ah("li_socl2_bobbin", 0.1), "current_a"),
        (lambda: battery.d_cell_capacity_ah("li_socl2_bobbin", 0.0), "current_a"),
        (lambda: battery.PackSpec("lead_acid", 1, 1, 1.0), "chemistry"),
        (lambda: battery.PackSpec("li_mno2", 0, 1, 1.0), "cells_in_series"),
        (lambda: battery.PackSpec("li_mno2", 1, 0, 1.0), "parallel_strings"),
        (lambda: battery.PackSpec("li_mno2", 1, 1, 0.0), "cell_capacity_ah"),
        (lambda: battery.PackSpec("li_mno2", 1, 1, math.inf), "cell_capacity_ah"),
        (lambda: battery.usable_capacity_ah(PACK, 80.0, 1.0), "temperature_c"),
        (lambda: battery.usable_capacity_ah(PACK, 10.0, -1.0), "age_years"),
        (lambda: battery.usable_capacity_ah(PACK, 10.0, 1.0, 0.0), "rate_factor"),
        (lambda: battery.usable_capacity_ah(PACK, 10.0, 1.0, 1.5), "rate_factor"),
        (lambda: battery.usable_capacity_ah(PACK, 10.0, 1.0, storage_temperature_c=60.0),
         "storage_temperature_c"),
        (lambda: battery.usable_capacity_ah(PACK, 10.0, 1.0, storage_temperature_c=math.nan),
         "storage_temperature_c"),
        (lambda: battery.usable_capacity_ah(PACK, 10.0, 1.0, mean_load_current_a=0.01),
         "mean_load_current_a"),  # alkaline has no rate curve here
        (lambda: battery.usable_capacity_ah(SOCL2, 10.0, 1.0, 0.9, mean_load_current_a=0.01),
         "rate_factor"),  # one or the other
        (lambda: battery.rate_factor_at_current(SOCL2, 0.071), "mean_load_current_a"),
        (lambda: battery.rate_factor_at_current(SOCL2, -0.001), "mean_load_current_a"),
        (lambda: battery.self_discharge_factor("li_mno2", 61.0), "temperature_c"),
        (lambda: battery.self_discharge_fraction_per_year("li_socl2_bobbin", -41.0),
         "temperature_c"),
        (lambda: battery.self_discharge_ah_per_day(SOCL2, math.inf), "temperature_c"),
        (lambda: battery.temperature_range_c("nicd"), "chemistry"),
        (lambda: battery.charge_used_ah(-1.0, 1e-4, 0, 0.0), "listen_hours"),
        (lambda: battery.charge_used_ah(1.0, -1e-4, 0, 0.0), "listen_current_a"),
        (lambda: battery.charge_used_ah(1.0, 1e-4, -1, 0.0), "replies"),
        (lambda: battery.charge_used_ah(1.0, 1e-4, 0, -0.1), "charge_per_reply_as"),
        (lambda: battery.charge_used_ah(1.0, 1e-4, 0, 0.0, -1), "releases"),
        (lambda: battery.charge_used_ah(1.0, 1e-4, 0, 0.0, 1, -1.0), "charge_per_release_as"),
        (lambda: battery.annual_consumption_ah(-1e-4, 0, 0, 0), "listen_current_a"),
        (lambda: battery.annual_consumption_ah(1e-4, -1, 0, 0), "replies_per_hour"),
        (lambda: battery.annual_consumption_ah(1e-4, 1, -0.5, 0), "reply_current_a"),
        (lambda: battery.annual_consumption_ah(1e-4, 1, 0.5, -0.01), "reply_duration_s"),
        (lambda: battery.annual_consumption_ah(1e-4, 1, 0.5, 0.01, -1), "release_tests_per_year"),
        (lambda: battery.annual_consumption_ah(1e-4, 1, 0.5, 0.01, 1, -2), "release_current_a"),
        (lambda: battery.annual_consumption_ah(1e-4, 1, 0.5, 0.01, 1, 2, -30),
         "release_duration_s"),
        (lambda: battery.annual_consumption_ah(1e-4, 1, 0.5, 0.01, 0, 0, 0, -0.1),
         "self_discharge_ah_per_year"),
        (lambda: battery.life_years(-1.0, 3.0), "usable_capacity_ah"),
        (lambda: battery.life_years(15.0, 0.0), "consumption_ah_per_year"),
        (lambda: battery.remaining_ah_on(DAY, dt.date(2025, 1, 2), 10.0, 0.01), "on"),
        (lambda: battery.remaining_ah_on(DAY, DAY, -1.0, 0.01), "known_remaining_ah"),
        (lambda: battery.remaining_ah_on(DAY, DAY, 10.0, -0.01), "daily_ah"),
        (lambda: battery.days_left(-1.0, 0.01), "remaining_ah"),
        (lambda: battery.days_left(1.0, 0.0), "daily_ah"),
        (lambda: battery.empty_on(DAY, 1.0, 1e-12), "daily_ah"),
        (lambda: battery.state_of_charge_band("li_mno2", -1.0, 1), "open_circuit_v"),
        (lambda: battery.state_of_charge_band("alkaline_zn_mno2", 36.0, 21), "open_circuit_v"),
        (lambda: battery.state_of_charge_band("li_mno2", 3.0, 0), "cells_in_series"),
        (lambda: battery.state_of_charge_band("lithium", 3.0, 1), "chemistry"),
    ],
)  # fmt: skip
def test_it_rejects_out_of_range_arguments_by_name(call: Callable[[], object], name: str) -> None:
    with pytest.raises(ValueError, match=rf"^{name} must"):
        call()


def test_it_wants_calendar_dates_not_datetimes() -> None:
    moment = dt.datetime(2025, 1, 1, tzinfo=dt.UTC)
    with pytest.raises(TypeError, match="^on"):
        battery.remaining_ah_on(moment, DAY, 10.0, 0.01)
    with pytest.raises(TypeError, match="^known_on"):
        battery.remaining_ah_on(DAY, moment, 10.0, 0.01)
    with pytest.raises(TypeError, match="^on"):
        battery.empty_on(moment, 10.0, 0.01)


@pytest.mark.parametrize(
    ("key", "expected"),
    [
        ("alkaline_zn_mno2", (-20.0, 55.0)),  # ends of the derating curve (Linden, from memory)
        ("li_socl2_bobbin", (-40.0, 85.0)),
        ("li_mno2", (-20.0, 60.0)),
    ],
)
def test_it_exposes_each_chemistrys_temperature_domain(
    key: str, expected: tuple[float, float]
) -> None:
    lo, hi = battery.temperature_range_c(key)
    assert (lo, hi) == expected
    battery.self_discharge_factor(key, lo)  # the ends are accepted
    battery.self_discharge_factor(key, hi)
    with pytest.raises(ValueError, match="^temperature_c must"):
        battery.self_discharge_factor(key, hi + 0.1)
    assert (
        battery.BATTERY_TEMPERATURE_RANGE_C[0] <= lo < hi <= battery.BATTERY_TEMPERATURE_RANGE_C[1]
    )
