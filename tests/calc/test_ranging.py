"""fleet.calc.ranging: travel-time geometry, Francois-Garrison / Ainslie-McColm absorption."""

from __future__ import annotations

import math
from collections.abc import Callable

import gsw
import pytest
from hypothesis import given, settings
from hypothesis import strategies as st

from fleet.calc import ranging, seawater

SETTINGS = settings(max_examples=150, deadline=None)


def test_it_gives_the_slant_range_of_the_worked_example() -> None:
    # check case 27: r = c (t - TAT) / 2 = 1500 (0.500 - 0.020) / 2 = 360 m (physics)
    assert ranging.slant_range_m(0.500, 0.020, 1500.0) == pytest.approx(360.0, abs=1e-9)


def test_it_gives_the_two_way_time_of_the_worked_example() -> None:
    # check case 27: 1000 m, TAT 12.5 ms, c 1500 -> 1.345833 s (physics)
    assert ranging.two_way_time_s(1000.0, 0.0125, 1500.0) == pytest.approx(1.345833, abs=1e-6)


def test_it_recovers_the_turnaround_at_a_known_range() -> None:
    # the inverse of check case 27
    assert ranging.turnaround_s(1.3458333333, 1000.0, 1500.0) == pytest.approx(0.0125, abs=1e-9)


@SETTINGS
@given(
    r=st.floats(0.0, 20000.0),
    tat=st.floats(0.0, 0.5),
    c=st.floats(1400.0, 1600.0),
)
def test_range_and_time_round_trip(r: float, tat: float, c: float) -> None:
    t = ranging.two_way_time_s(r, tat, c)
    assert ranging.slant_range_m(t, tat, c) == pytest.approx(r, abs=1e-6)
    assert ranging.turnaround_s(t, r, c) == pytest.approx(tat, abs=1e-9)


@SETTINGS
@given(t=st.floats(0.1, 10.0), dt=st.floats(1e-4, 1.0), tat=st.floats(0.0, 0.05))
def test_a_longer_time_means_a_longer_range(t: float, dt: float, tat: float) -> None:
    assert ranging.slant_range_m(t + dt, tat, 1500.0) > ranging.slant_range_m(t, tat, 1500.0)


def test_it_gives_the_horizontal_range() -> None:
    # Pythagoras, 3-4-5 triangle
    assert ranging.horizontal_range_m(500.0, 300.0) == pytest.approx(400.0)
    assert ranging.horizontal_range_m(500.0, -300.0) == pytest.approx(400.0)
    assert ranging.horizontal_range_m(500.0, 500.0) == 0.0


@pytest.mark.parametrize(
    ("f", "t", "s", "d", "fg", "am"),
    [
        # reference 8, computed with the published Francois & Garrison 1982 and Ainslie &
        # McColm 1998 coefficients
        (10.0, 4.0, 35.0, 1000.0, 1.0053, 1.0099),
        (20.0, 4.0, 35.0, 1000.0, 3.4229, 3.4277),  # check case 28
        (25.0, 10.0, 35.0, 0.0, 4.9981, 5.1073),
        (30.0, 10.0, 35.0, 0.0, 6.8679, 7.0157),
        (50.0, 4.0, 35.0, 1000.0, 13.1304, 13.0980),
        (100.0, 10.0, 35.0, 0.0, 33.630, 34.341),
    ],
)
def test_it_reproduces_the_absorption_table(
    f: float, t: float, s: float, d: float, fg: float, am: float
) -> None:
    assert ranging.absorption_db_per_km_fg(f, t, s, d, 8.0) == pytest.approx(fg, abs=1e-3)
    assert ranging.absorption_db_per_km_am(f, t, s, d, 8.0) == pytest.approx(am, abs=1e-3)


def test_it_agrees_with_the_fisher_simmons_measurement() -> None:
    # check case 29: Fisher & Simmons 1977 (JASA 62(3)) Table IV, 0.52 dB/km at 10 kHz, 35,
    # 5 degC, 500 atm (~4990 m); within the ~10 % spread between formulations
    assert ranging.absorption_db_per_km_fg(10.0, 5.0, 35.0, 4990.0) == pytest.approx(0.52, rel=0.10)
    assert ranging.absorption_db_per_km_am(10.0, 5.0, 35.0, 4990.0) == pytest.approx(0.52, rel=0.10)


@SETTINGS
@given(
    f=st.floats(10.0, 100.0),
    t=st.floats(0.0, 20.0),
    d=st.floats(0.0, 5000.0),
)
def test_the_two_absorption_formulas_agree_within_10_percent(f: float, t: float, d: float) -> None:
    # Ainslie & McColm 1998: within 10 % of Francois-Garrison, 100 Hz - 1 MHz (check case 28)
    fg = ranging.absorption_db_per_km_fg(f, t, 35.0, d)
    am = ranging.absorption_db_per_km_am(f, t, 35.0, d)
    assert am == pytest.approx(fg, rel=0.10)


@SETTINGS
@given(f=st.floats(1.0, 499.0), step=st.floats(1.0, 500.0))
def test_absorption_rises_with_frequency(f: float, step: float) -> None:
    for formula in (ranging.absorption_db_per_km_fg, ranging.absorption_db_per_km_am):
        assert formula(f + step, 4.0, 35.0, 1000.0) > formula(f, 4.0, 35.0, 1000.0)


def test_the_warm_and_cold_fg_pure_water_branches_meet_at_20_degrees() -> None:
    # Francois & Garrison 1982: A3 has two polynomials split at 20 degC; they nearly agree
    below = ranging.absorption_db_per_km_fg(500.0, 20.0, 35.0, 0.0)
    above = ranging.absorption_db_per_km_fg(500.0, 20.0 + 1e-9, 35.0, 0.0)
    assert above == pytest.approx(below, rel=0.02)


def test_it_gives_the_transmission_loss() -> None:
    # Urick 1983 (from memory): 20 log10(1000) + 3.4229 x 1 = 63.4229 dB
    assert ranging.transmission_loss_db(1000.0, 3.4229) == pytest.approx(63.4229)
    assert ranging.transmission_loss_db(1.0, 10.0) == pytest.approx(0.01)


def test_it_gives_the_reply_margin() -> None:
    # sonar equation SL - TL - (NL - DI) - DT (Urick 1983, from memory)
    margin = ranging.reply_margin_db(190.0, 1000.0, 3.4229, 60.0, 10.0, 10.0)
    assert margin == pytest.approx(190.0 - 63.4229 - 50.0 - 10.0)


# --- reply timing for a planned geometry ------------------------------------------------------
@pytest.mark.parametrize(
    ("dz", "x", "expected"),
    [
        (2400.0, 1800.0, 3000.0),  # Pythagoras, 3-4-5 triangle x 600
        (-2400.0, 1800.0, 3000.0),  # the sign of the depth difference does not matter
        (4000.0, 0.0, 4000.0),  # straight down
        (0.0, 0.0, 0.0),  # alongside
    ],
)
def test_it_gives_the_slant_range_of_a_planned_geometry(
    dz: float, x: float, expected: float
) -> None:
    assert ranging.slant_range_from_offset_m(dz, x) == pytest.approx(expected, abs=1e-9)


TIMING = {  # hand-worked row below; the interrogator settings are invented, not a product's
    "slant_range_m": 3000.0,
    "sound_speed_m_s": 1500.0,
    "turnaround_s": 0.0125,
    "ping_interval_s": 5.0,
    "blanking_s": 0.1,
    "reply_pulse_s": 0.010,
}


def test_it_times_the_reply_of_the_worked_example() -> None:
    # physics, by hand: 2 x 3000 / 1500 + 0.0125 = 4.0125 s; + 10 ms = 4.0225 s;
    # limits 1500 (0.1 - 0.0125) / 2 = 65.625 m and 1500 (5 - 0.0125 - 0.010) / 2 = 3733.125 m
    timing = ranging.reply_timing(**TIMING)
    assert timing.fits and timing.reasons == ()
    assert timing.arrival_s == pytest.approx(4.0125, abs=1e-12)
    assert timing.reply_end_s == pytest.approx(4.0225, abs=1e-12)
    assert (timing.window_opens_s, timing.window_closes_s) == (0.1, 5.0)
    assert timing.min_slant_range_m == pytest.approx(65.625, abs=1e-9)
    assert timing.max_slant_range_m == pytest.approx(3733.125, abs=1e-9)
    # the same arrival as the two-way time of check case 27's formula
    assert timing.arrival_s == pytest.approx(ranging.two_way_time_s(3000.0, 0.0125, 1500.0))


@pytest.mark.parametrize(
    ("changes", "fragments"),
    [
        # physics, by hand
        ({"ping_interval_s": 4.0}, ("reply ends 4.0225 s after the interrogation, after the "
                                     "next one at 4 s: only slant ranges up to 2983.1 m fit",)),
        ({"slant_range_m": 3733.125}, ()),  # ends exactly at the next interrogation
        ({"slant_range_m": 3734.0}, ("reply ends 5.0012 s",)),
        ({"slant_range_m": 50.0}, ("reply arrives 0.0792 s after the interrogation, inside "
                                   "the receive blanking of 0.1 s: at this turnaround a slant "
                                   "range under 65.6 m is not heard",)),
        ({"slant_range_m": 65.625}, ()),  # arrives exactly as the blanking ends
        ({"slant_range_m": 0.0, "turnaround_s": 0.2}, ()),  # the turnaround clears the blanking
        ({"ping_interval_s": 0.02, "blanking_s": 0.01, "slant_range_m": 0.0},
         ("reply ends 0.0225 s after the interrogation, after the next one at 0.02 s: no "
          "slant range fits",)),
    ],
)  # fmt: skip
def test_it_says_why_a_reply_is_not_distinguishable(
    changes: dict[str, float], fragments: tuple[str, ...]
) -> None:
    timing = ranging.reply_timing(**{**TIMING, **changes})
    assert timing.fits is (fragments == ())
    assert len(timing.reasons) == len(fragments)
    for reason, fragment in zip(timing.reasons, fragments, strict=True):
        assert reason.startswith(fragment)


def test_it_times_a_reply_with_the_sound_speed_of_real_water() -> None:
    # TEOS-10 via gsw: SP 34.7, 2 degC, 2000 dbar, 45 N (in-situ t -> CT, then sound speed)
    sa = gsw.SA_from_SP(34.7, 2000.0, 0.0, 45.0)
    c = float(gsw.sound_speed(sa, gsw.CT_from_t(sa, 2.0, 2000.0), 2000.0))
    assert seawater.sound_speed_m_s(2.0, 34.7, 2000.0, 45.0) == pytest.approx(c, rel=1e-12)
    slant = ranging.slant_range_from_offset_m(2000.0, 1500.0)  # 2500 m, Pythagoras
    timing = ranging.reply_timing(slant, c, 0.0125, 4.0, 0.1, 0.010)
    assert timing.arrival_s == pytest.approx(2.0 * 2500.0 / c + 0.0125, rel=1e-12)
    assert 1490.0 < c < 1500.0  # about 1492 m/s at 2 degC, 2000 dbar (gsw table, reference 3.2)
    assert timing.fits
    assert timing.max_slant_range_m == pytest.approx(c * (4.0 - 0.0125 - 0.010) / 2.0)


@SETTINGS
@given(
    r=st.floats(0.0, 20000.0),
    c=st.floats(1400.0, 1600.0),
    tat=st.floats(0.0, 0.5),
    interval=st.floats(0.5, 60.0),
    pulse=st.floats(0.0, 0.05),
)
def test_a_reply_fits_exactly_between_the_range_limits(
    r: float, c: float, tat: float, interval: float, pulse: float
) -> None:
    timing = ranging.reply_timing(r, c, tat, interval, 0.2, pulse)
    inside = timing.min_slant_range_m <= r <= timing.max_slant_range_m
    near_edge = min(abs(r - timing.min_slant_range_m), abs(r - timing.max_slant_range_m)) < 1e-6
    assert timing.fits is inside or near_edge


def _timing(**changes: float) -> ranging.ReplyTiming:
    return ranging.reply_timing(**{**TIMING, **changes})


@pytest.mark.parametrize(
    ("call", "name"),
    [
        (lambda: ranging.slant_range_m(-0.1, 0.0, 1500.0), "two_way_time_s"),
        (lambda: ranging.slant_range_m(0.01, 0.02, 1500.0), "two_way_time_s"),
        (lambda: ranging.slant_range_m(0.5, -0.02, 1500.0), "turnaround_s"),
        (lambda: ranging.slant_range_m(0.5, 0.02, 340.0), "sound_speed_m_s"),
        (lambda: ranging.two_way_time_s(-1.0, 0.02, 1500.0), "range_m"),
        (lambda: ranging.two_way_time_s(100.0, math.nan, 1500.0), "turnaround_s"),
        (lambda: ranging.two_way_time_s(100.0, 0.02, 2000.0), "sound_speed_m_s"),
        (lambda: ranging.turnaround_s(-0.1, 100.0, 1500.0), "two_way_time_s"),
        (lambda: ranging.turnaround_s(0.0, 100.0, 1500.0), "two_way_time_s"),
        (lambda: ranging.turnaround_s(0.1, 1000.0, 1500.0), "two_way_time_s"),
        (lambda: ranging.turnaround_s(0.1, -1.0, 1500.0), "known_range_m"),
        (lambda: ranging.turnaround_s(0.1, 1.0, math.inf), "sound_speed_m_s"),
        (lambda: ranging.horizontal_range_m(-1.0, 0.0), "slant_m"),
        (lambda: ranging.horizontal_range_m(100.0, 101.0), "depth_difference_m"),
        (lambda: ranging.slant_range_from_offset_m(11001.0, 0.0), "depth_difference_m"),
        (lambda: ranging.slant_range_from_offset_m(100.0, -1.0), "horizontal_offset_m"),
        (lambda: ranging.slant_range_from_offset_m(100.0, math.nan), "horizontal_offset_m"),
        (lambda: _timing(slant_range_m=-1.0), "slant_range_m"),
        (lambda: _timing(sound_speed_m_s=1000.0), "sound_speed_m_s"),
        (lambda: _timing(turnaround_s=-0.001), "turnaround_s"),
        (lambda: _timing(ping_interval_s=0.0), "ping_interval_s"),
        (lambda: _timing(ping_interval_s=601.0), "ping_interval_s"),
        (lambda: _timing(blanking_s=-0.1), "blanking_s"),
        (lambda: _timing(blanking_s=5.0), "blanking_s"),  # not shorter than the interval
        (lambda: _timing(reply_pulse_s=math.inf), "reply_pulse_s"),
        (lambda: ranging.absorption_db_per_km_fg(0.05, 4.0, 35.0, 0.0), "frequency_khz"),
        (lambda: ranging.absorption_db_per_km_fg(20.0, 41.0, 35.0, 0.0), "temperature_c"),
        (lambda: ranging.absorption_db_per_km_fg(20.0, 4.0, -1.0, 0.0), "salinity"),
        (lambda: ranging.absorption_db_per_km_fg(20.0, 4.0, 35.0, 12000.0), "depth_m"),
        (lambda: ranging.absorption_db_per_km_fg(20.0, 4.0, 35.0, 0.0, 9.0), "ph"),
        (lambda: ranging.absorption_db_per_km_am(2000.0, 4.0, 35.0, 0.0), "frequency_khz"),
        (lambda: ranging.absorption_db_per_km_am(20.0, -3.0, 35.0, 0.0), "temperature_c"),
        (lambda: ranging.absorption_db_per_km_am(20.0, 4.0, 43.0, 0.0), "salinity"),
        (lambda: ranging.absorption_db_per_km_am(20.0, 4.0, 35.0, -1.0), "depth_m"),
        (lambda: ranging.absorption_db_per_km_am(20.0, 4.0, 35.0, 0.0, 6.5), "ph"),
        (lambda: ranging.transmission_loss_db(0.5, 3.0), "range_m"),
        (lambda: ranging.transmission_loss_db(100.0, -3.0), "absorption_db_per_km"),
        (lambda: ranging.reply_margin_db(-1.0, 1000.0, 3.0, 60.0, 10.0, 10.0), "source_level_db"),
        (lambda: ranging.reply_margin_db(190.0, 0.0, 3.0, 60.0, 10.0, 10.0), "range_m"),
        (lambda: ranging.reply_margin_db(190.0, 1000.0, math.nan, 60.0, 10.0, 10.0),
         "absorption_db_per_km"),
        (lambda: ranging.reply_margin_db(190.0, 1000.0, 3.0, 300.0, 10.0, 10.0), "noise_level_db"),
        (lambda: ranging.reply_margin_db(190.0, 1000.0, 3.0, 60.0, -1.0, 10.0),
         "directivity_index_db"),
        (lambda: ranging.reply_margin_db(190.0, 1000.0, 3.0, 60.0, 10.0, math.inf),
         "detection_threshold_db"),
    ],
)  # fmt: skip
def test_it_rejects_out_of_range_arguments_by_name(call: Callable[[], object], name: str) -> None:
    with pytest.raises(ValueError, match=rf"^{name} must"):
        call()
