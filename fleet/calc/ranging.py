"""Acoustic ranging to a transponder, absorption and the reply sonar equation.

Slant range: r = c (t_two_way - t_turnaround) / 2, where t_turnaround is the fixed delay
the transponder waits before replying, and c the harmonic-mean sound speed along the path.
Horizontal range from a known depth difference: sqrt(r^2 - dz^2); the other way round,
a planned geometry gives the slant range sqrt(dz^2 + x^2) (``slant_range_from_offset_m``).

Reply timing (``reply_timing``) for a planned interrogation geometry, straight-ray, one
sound speed (the harmonic mean along the path where known), times from the start of the
interrogation:

1. the reply arrives at t_a = 2 r / c + t_turnaround;
2. the interrogator hears nothing during its receive blanking after transmit, so the
   reply must arrive no earlier than ``blanking_s``: r >= c (blanking - t_turnaround) / 2;
3. the whole reply (``reply_pulse_s`` long) must end no later than the next
   interrogation, ``ping_interval_s`` after this one:
   r <= c (ping_interval - t_turnaround - reply_pulse) / 2;
4. the verdict lists each failed condition with the slant range limit it implies.
Example: c 1500 m/s, 3000 m slant, 12.5 ms turnaround -> arrival 4.0125 s; with a 10 ms
reply, 0.1 s blanking and a 5 s ping interval the reply ends at 4.0225 s and fits; the
ranges that fit run from 65.625 m to 3733.125 m.

Absorption: Francois & Garrison (1982) JASA 72(3) 896-907 and 72(6) 1879-1890, and the
simpler Ainslie & McColm (1998) JASA 103(3) 1671-1672, which stays within about 10 % of
Francois-Garrison from 100 Hz to 1 MHz.  The guards below are the ocean's ranges; the
authors' own fitted ranges are narrower (from memory: temperature about -2..22 degC and
salinity 30..35 for Francois-Garrison).

Transmission loss: spherical spreading plus absorption, TL = 20 log10(r / 1 m) + alpha r
/ 1000 (Urick, Principles of Underwater Sound, 3rd ed. 1983; from memory).  Reply margin
(passive sonar equation for the reply heard at the interrogator):
SL - TL - (NL - DI) - DT; positive means the reply should be detected.
"""

from __future__ import annotations

import math
from dataclasses import dataclass
from typing import Final

from fleet.calc._checks import require_non_negative, require_range

_MAX_RANGE_M = 100_000.0
# Times are compared to 1 ns, so a range computed from a limit itself still fits despite
# rounding (1 ns is 0.75 um of slant range at 1500 m/s).
_TIME_EPS_S = 1e-9

# Domains forms can import (lo, hi).
SOUND_SPEED_RANGE_M_S: Final = (1300.0, 1800.0)
TURNAROUND_RANGE_S: Final = (0.0, 10.0)
RANGE_RANGE_M: Final = (0.0, _MAX_RANGE_M)
DEPTH_DIFFERENCE_RANGE_M: Final = (-11000.0, 11000.0)
PING_INTERVAL_RANGE_S: Final = (0.0, 600.0)  # open at 0
BLANKING_RANGE_S: Final = (0.0, 600.0)
REPLY_PULSE_RANGE_S: Final = (0.0, 10.0)


def _c(value: float) -> float:
    return require_range("sound_speed_m_s", value, *SOUND_SPEED_RANGE_M_S, unit="m/s")


def _turnaround(value: float) -> float:
    return require_range("turnaround_s", value, *TURNAROUND_RANGE_S, unit="s")


def slant_range_m(two_way_time_s: float, turnaround_s: float, sound_speed_m_s: float) -> float:
    """Slant range r = c (t - t_TAT) / 2.

    Example: t 0.500 s, turnaround 20 ms, c 1500 m/s -> 360.0 m.
    """
    t = require_non_negative("two_way_time_s", two_way_time_s, unit="s")
    tat = _turnaround(turnaround_s)
    if tat > t:
        raise ValueError(
            f"two_way_time_s must be at least turnaround_s ({tat:g} s), got {two_way_time_s!r}"
        )
    return _c(sound_speed_m_s) * (t - tat) / 2.0


def two_way_time_s(range_m: float, turnaround_s: float, sound_speed_m_s: float) -> float:
    """Two-way time t = 2 r / c + t_TAT.

    Example: 1000 m, turnaround 12.5 ms, c 1500 m/s -> 1.345833 s.
    """
    r = require_range("range_m", range_m, *RANGE_RANGE_M, unit="m")
    return 2.0 * r / _c(sound_speed_m_s) + _turnaround(turnaround_s)


def turnaround_s(two_way_time_s: float, known_range_m: float, sound_speed_m_s: float) -> float:
    """Turnaround delay measured at a known range: t_TAT = t - 2 r / c.

    Example: t 1.345833 s over 1000 m at 1500 m/s -> 12.5 ms.
    """
    t = require_non_negative("two_way_time_s", two_way_time_s, unit="s")
    r = require_range("known_range_m", known_range_m, 0.0, _MAX_RANGE_M, unit="m")
    travel = 2.0 * r / _c(sound_speed_m_s)
    if travel > t:
        raise ValueError(
            f"two_way_time_s must be at least the travel time {travel:.6f} s for known_range_m, "
            f"got {two_way_time_s!r}"
        )
    return t - travel


def horizontal_range_m(slant_m: float, depth_difference_m: float) -> float:
    """Horizontal range sqrt(r^2 - dz^2) (Pythagoras, straight-ray path).

    Example: slant 500 m, 300 m depth difference -> 400 m.
    """
    r = require_non_negative("slant_m", slant_m, unit="m")
    dz = abs(require_range("depth_difference_m", depth_difference_m, -r, r, unit="m"))
    return math.sqrt(r * r - dz * dz)


def slant_range_from_offset_m(depth_difference_m: float, horizontal_offset_m: float) -> float:
    """Slant range sqrt(dz^2 + x^2) for a planned geometry (Pythagoras, straight ray):
    ``depth_difference_m`` between the transceiver and the unit, ``horizontal_offset_m``
    of the transceiver from the point above the unit.

    Example: 2400 m below the transceiver, 1800 m off -> 3000 m.
    """
    dz = require_range(
        "depth_difference_m", depth_difference_m, *DEPTH_DIFFERENCE_RANGE_M, unit="m"
    )
    x = require_range("horizontal_offset_m", horizontal_offset_m, *RANGE_RANGE_M, unit="m")
    return math.hypot(dz, x)


@dataclass(frozen=True, slots=True)
class ReplyTiming:
    fits: bool
    slant_range_m: float
    arrival_s: float  # 2 r / c + turnaround, from the start of the interrogation
    reply_end_s: float  # arrival + reply pulse
    window_opens_s: float  # end of the receive blanking
    window_closes_s: float  # the next interrogation
    min_slant_range_m: float  # nearest slant range whose reply clears the blanking
    max_slant_range_m: float  # farthest whose reply ends before the next interrogation; < 0: none
    reasons: tuple[str, ...]


def reply_timing(
    slant_range_m: float,
    sound_speed_m_s: float,
    turnaround_s: float,
    ping_interval_s: float,
    blanking_s: float,
    reply_pulse_s: float,
) -> ReplyTiming:
    """Is the reply distinguishable for this geometry and interrogation cycle?  Rules in
    the module docstring (travel-time physics; the blanking and interval are settings of
    the interrogator).

    Example: 3000 m, 1500 m/s, 12.5 ms turnaround, 5 s interval, 0.1 s blanking, 10 ms
    reply -> arrival 4.0125 s, ends 4.0225 s: fits; limits 65.625-3733.125 m.
    """
    r = require_range("slant_range_m", slant_range_m, *RANGE_RANGE_M, unit="m")
    c = _c(sound_speed_m_s)
    tat = _turnaround(turnaround_s)
    interval = require_range(
        "ping_interval_s", ping_interval_s, *PING_INTERVAL_RANGE_S, lo_open=True, unit="s"
    )
    blank = require_range("blanking_s", blanking_s, *BLANKING_RANGE_S, unit="s")
    pulse = require_range("reply_pulse_s", reply_pulse_s, *REPLY_PULSE_RANGE_S, unit="s")
    if blank >= interval:
        raise ValueError(
            f"blanking_s must be shorter than ping_interval_s ({interval:g} s), got {blanking_s!r}"
        )

    arrival = 2.0 * r / c + tat
    end = arrival + pulse
    min_r = c * max(0.0, blank - tat) / 2.0
    max_r = c * (interval - tat - pulse) / 2.0
    reasons: list[str] = []
    if arrival < blank - _TIME_EPS_S:
        reasons.append(
            f"reply arrives {arrival:.4f} s after the interrogation, inside the receive "
            f"blanking of {blank:g} s: at this turnaround a slant range under {min_r:.1f} m "
            "is not heard; lengthen the turnaround or shorten the blanking"
        )
    if end > interval + _TIME_EPS_S:
        limit = (
            f"only slant ranges up to {max_r:.1f} m fit" if max_r >= 0.0 else "no slant range fits"
        )
        reasons.append(
            f"reply ends {end:.4f} s after the interrogation, after the next one at "
            f"{interval:g} s: {limit}; lengthen the ping interval"
        )
    return ReplyTiming(not reasons, r, arrival, end, blank, interval, min_r, max_r, tuple(reasons))


def _absorption_args(
    frequency_khz: float, temperature_c: float, salinity: float, depth_m: float, ph: float
) -> tuple[float, float, float, float, float]:
    return (
        require_range("frequency_khz", frequency_khz, 0.1, 1000.0, unit="kHz"),
        require_range("temperature_c", temperature_c, -2.5, 40.0, unit="degC"),
        require_range("salinity", salinity, 0.0, 42.0),
        require_range("depth_m", depth_m, 0.0, 11000.0, unit="m"),
        require_range("ph", ph, 7.0, 8.7),
    )


def absorption_db_per_km_fg(
    frequency_khz: float,
    temperature_c: float,
    salinity: float,
    depth_m: float,
    ph: float = 8.0,
) -> float:
    """Seawater absorption, Francois & Garrison (1982), boric acid + MgSO4 + pure water.

    c = 1412 + 3.21T + 1.19S + 0.0167D; A1 = 8.86/c 10^(0.78pH - 5);
    f1 = 2.8 sqrt(S/35) 10^(4 - 1245/(273 + T)); A2 = 21.44 S/c (1 + 0.025T);
    P2 = 1 - 1.37e-4 D + 6.2e-9 D^2; f2 = 8.17 10^(8 - 1990/(273 + T)) / (1 + 0.0018(S - 35));
    P3 = 1 - 3.83e-5 D + 4.9e-10 D^2; A3 from the paper's two temperature branches.
    Example: 20 kHz, 4 degC, S 35, 1000 m, pH 8 -> 3.4229 dB/km.
    """
    f, t, s, d, ph = _absorption_args(frequency_khz, temperature_c, salinity, depth_m, ph)
    c = 1412.0 + 3.21 * t + 1.19 * s + 0.0167 * d
    a1 = 8.86 / c * math.pow(10.0, 0.78 * ph - 5.0)
    f1 = 2.8 * math.sqrt(s / 35.0) * math.pow(10.0, 4.0 - 1245.0 / (273.0 + t))
    a2 = 21.44 * s / c * (1.0 + 0.025 * t)
    p2 = 1.0 - 1.37e-4 * d + 6.2e-9 * d * d
    f2 = 8.17 * math.pow(10.0, 8.0 - 1990.0 / (273.0 + t)) / (1.0 + 0.0018 * (s - 35.0))
    if t <= 20.0:
        a3 = 4.937e-4 - 2.59e-5 * t + 9.11e-7 * t**2 - 1.50e-8 * t**3
    else:
        a3 = 3.964e-4 - 1.146e-5 * t + 1.45e-7 * t**2 - 6.5e-10 * t**3
    p3 = 1.0 - 3.83e-5 * d + 4.9e-10 * d * d
    f_sq = f * f
    boric = a1 * f1 * f_sq / (f_sq + f1 * f1) if f1 > 0.0 else 0.0
    mgso4 = a2 * p2 * f2 * f_sq / (f_sq + f2 * f2)
    return boric + mgso4 + a3 * p3 * f_sq


def absorption_db_per_km_am(
    frequency_khz: float,
    temperature_c: float,
    salinity: float,
    depth_m: float,
    ph: float = 8.0,
) -> float:
    """Seawater absorption, Ainslie & McColm (1998), depth taken in km internally.

    alpha = 0.106 f1 f^2/(f^2 + f1^2) e^((pH - 8)/0.56)
          + 0.52 (1 + T/43)(S/35) f2 f^2/(f^2 + f2^2) e^(-D/6)
          + 0.00049 f^2 e^(-(T/27 + D/17)),
    f1 = 0.78 sqrt(S/35) e^(T/26), f2 = 42 e^(T/17).
    Example: 20 kHz, 4 degC, S 35, 1000 m, pH 8 -> 3.4277 dB/km.
    """
    f, t, s, d_m, ph = _absorption_args(frequency_khz, temperature_c, salinity, depth_m, ph)
    d = d_m / 1000.0
    f_sq = f * f
    f1 = 0.78 * math.sqrt(s / 35.0) * math.exp(t / 26.0)
    f2 = 42.0 * math.exp(t / 17.0)
    boric = 0.106 * f1 * f_sq / (f_sq + f1 * f1) * math.exp((ph - 8.0) / 0.56) if f1 else 0.0
    mgso4 = 0.52 * (1.0 + t / 43.0) * (s / 35.0) * f2 * f_sq / (f_sq + f2 * f2) * math.exp(-d / 6)
    water = 0.00049 * f_sq * math.exp(-(t / 27.0 + d / 17.0))
    return boric + mgso4 + water


def transmission_loss_db(range_m: float, absorption_db_per_km: float) -> float:
    """One-way TL = 20 log10(r / 1 m) + alpha r / 1000 (spherical spreading, Urick 1983).

    Example: 1000 m at 3.4229 dB/km -> 60 + 3.42 = 63.42 dB.
    """
    r = require_range("range_m", range_m, 1.0, _MAX_RANGE_M, unit="m")
    alpha = require_range("absorption_db_per_km", absorption_db_per_km, 0.0, 1000.0)
    return 20.0 * math.log10(r) + alpha * r / 1000.0


def reply_margin_db(
    source_level_db: float,
    range_m: float,
    absorption_db_per_km: float,
    noise_level_db: float,
    directivity_index_db: float,
    detection_threshold_db: float,
) -> float:
    """Sonar equation margin SL - TL - (NL - DI) - DT, dB; >= 0 means detectable.

    Example: SL 190 dB re 1 uPa @ 1 m, 1000 m at 3.4229 dB/km, NL 60, DI 10, DT 10
    -> 190 - 63.42 - 50 - 10 = 66.58 dB.
    """
    sl = require_range("source_level_db", source_level_db, 0.0, 250.0, unit="dB re 1 uPa @ 1 m")
    tl = transmission_loss_db(range_m, absorption_db_per_km)
    nl = require_range("noise_level_db", noise_level_db, -50.0, 200.0, unit="dB")
    di = require_range("directivity_index_db", directivity_index_db, 0.0, 60.0, unit="dB")
    dt = require_range("detection_threshold_db", detection_threshold_db, -50.0, 100.0, unit="dB")
    return sl - tl - (nl - di) - dt
