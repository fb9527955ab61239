"""Seawater: pressure and depth, density, sound speed, pressure units.

TEOS-10 (IOC, SCOR & IAPSO 2010, Manual and Guides 56) through the ``gsw`` package is the
default for everything a unit's record needs.  Two older formulas are kept because field
notes and legacy sheets use them: the UNESCO 1983 depth (Fofonoff & Millard, Tech. Pap.
Mar. Sci. 44) and Mackenzie's nine-term sound speed (JASA 70(3) 1981).

gsw works in *sea pressure* (absolute minus 10.1325 dbar) and height ``z`` (negative in
the ocean); here every depth is positive downwards in metres.

Guard ranges (the ocean, not the fitted ranges of every formula): depth 0-11000 m,
sea pressure 0-12000 dbar, latitude -90..90 deg, longitude -180..360 deg,
practical salinity 0-42, in-situ temperature -2.5..40 degC.
"""

from __future__ import annotations

import math

import gsw

from fleet.calc._checks import require_finite, require_range

MAX_DEPTH_M = 11000.0
MAX_PRESSURE_DBAR = 12000.0
MIN_TEMPERATURE_C = -2.5
MAX_TEMPERATURE_C = 40.0
MAX_PRACTICAL_SALINITY = 42.0

# The same guard ranges as (lo, hi) tuples, so forms can offer the limits calc enforces.
DEPTH_RANGE_M = (0.0, MAX_DEPTH_M)
PRESSURE_RANGE_DBAR = (0.0, MAX_PRESSURE_DBAR)
TEMPERATURE_RANGE_C = (MIN_TEMPERATURE_C, MAX_TEMPERATURE_C)
PRACTICAL_SALINITY_RANGE = (0.0, MAX_PRACTICAL_SALINITY)
LATITUDE_RANGE_DEG = (-90.0, 90.0)
LONGITUDE_RANGE_DEG = (-180.0, 360.0)

# Exact unit definitions, NIST SP 811 (2008) Appendix B / BIPM SI brochure.
PA_PER_DBAR = 1.0e4
PA_PER_BAR = 1.0e5
PA_PER_PSI = 0.45359237 * 9.80665 / 0.0254**2  # lbf / in^2 = 6894.757293168... Pa
STANDARD_ATMOSPHERE_DBAR = 10.1325  # 101325 Pa; gsw's sea-pressure offset
STANDARD_GRAVITY_M_S2 = 9.80665  # CGPM 1901, exact


def _depth(name: str, value: float) -> float:
    return require_range(name, value, *DEPTH_RANGE_M, unit="m")


def _pressure(name: str, value: float) -> float:
    return require_range(name, value, *PRESSURE_RANGE_DBAR, unit="dbar")


def _latitude(value: float) -> float:
    return require_range("latitude_deg", value, *LATITUDE_RANGE_DEG, unit="deg")


def _longitude(value: float) -> float:
    return require_range("longitude_deg", value, *LONGITUDE_RANGE_DEG, unit="deg")


def _temperature(value: float) -> float:
    return require_range("temperature_c", value, *TEMPERATURE_RANGE_C, unit="degC")


def _salinity(value: float) -> float:
    return require_range("practical_salinity", value, *PRACTICAL_SALINITY_RANGE)


def pressure_dbar(depth_m: float, latitude_deg: float) -> float:
    """Sea pressure at a depth, TEOS-10 ``gsw.p_from_z`` (Manual 56, eqn. (3.32.3) inverse).

    Uses the standard ocean (SA = 35.16504 g/kg, CT = 0 degC) and latitude-dependent
    gravity.  Example: 1000 m at 30 deg N -> 1009.299 dbar.
    """
    z = -_depth("depth_m", depth_m)
    return float(gsw.p_from_z(z, _latitude(latitude_deg)))


def depth_m(pressure_dbar: float, latitude_deg: float) -> float:
    """Depth for a sea pressure, TEOS-10 ``gsw.z_from_p`` (sign flipped to positive down).

    Example: 10000 dbar at 30 deg N -> 9713.735 m.
    """
    p = _pressure("pressure_dbar", pressure_dbar)
    return -float(gsw.z_from_p(p, _latitude(latitude_deg))) + 0.0  # + 0.0 drops -0.0


def depth_unesco_m(pressure_dbar: float, latitude_deg: float) -> float:
    """Depth from pressure, UNESCO 1983 (Tech. Pap. Mar. Sci. 44, Saunders & Fofonoff).

    d = (((-1.82e-15 p + 2.279e-10) p - 2.2512e-5) p + 9.72659) p / g(phi, p), with
    g = 9.780318 (1 + (5.2788e-3 + 2.36e-5 x) x) + 1.092e-6 p and x = sin^2(phi).
    Example (the UNESCO check value): 10000 dbar at 30 deg -> 9712.653 m.
    """
    p = _pressure("pressure_dbar", pressure_dbar)
    x = math.sin(math.radians(_latitude(latitude_deg))) ** 2
    gravity = 9.780318 * (1.0 + (5.2788e-3 + 2.36e-5 * x) * x) + 1.092e-6 * p
    return (((-1.82e-15 * p + 2.279e-10) * p - 2.2512e-5) * p + 9.72659) * p / gravity


def gravity_m_s2(latitude_deg: float, pressure_dbar: float = 0.0) -> float:
    """Gravitational acceleration, TEOS-10 ``gsw.grav`` (Moritz 2000 with a depth term).

    Example: 45 deg, 0 dbar -> 9.8062 m/s^2.
    """
    p = _pressure("pressure_dbar", pressure_dbar)
    return float(gsw.grav(_latitude(latitude_deg), p))


def _sa_ct(
    temperature_c: float,
    practical_salinity: float,
    pressure_dbar: float,
    latitude_deg: float,
    longitude_deg: float,
) -> tuple[float, float, float]:
    t = _temperature(temperature_c)
    sp = _salinity(practical_salinity)
    p = _pressure("pressure_dbar", pressure_dbar)
    lat = _latitude(latitude_deg)
    lon = _longitude(longitude_deg)
    sa = float(gsw.SA_from_SP(sp, p, lon, lat))
    ct = float(gsw.CT_from_t(sa, t, p))
    return sa, ct, p


def density_kg_m3(
    temperature_c: float,
    practical_salinity: float,
    pressure_dbar: float,
    latitude_deg: float,
    longitude_deg: float = 0.0,
) -> float:
    """In-situ density, TEOS-10: SA from ``gsw.SA_from_SP``, CT from ``gsw.CT_from_t``, then
    ``gsw.rho`` (75-term expression, Roquet et al. 2015).

    ``temperature_c`` is in-situ (ITS-90).  Example: SP 35, 10 degC, 1000 dbar, 0 N 0 E ->
    1031.436 kg/m^3.
    """
    sa, ct, p = _sa_ct(
        temperature_c, practical_salinity, pressure_dbar, latitude_deg, longitude_deg
    )
    return float(gsw.rho(sa, ct, p))


def sound_speed_m_s(
    temperature_c: float,
    practical_salinity: float,
    pressure_dbar: float,
    latitude_deg: float,
    longitude_deg: float = 0.0,
) -> float:
    """Sound speed, TEOS-10 ``gsw.sound_speed`` after the same SP->SA and t->CT conversion.

    Example: SP 35, 10 degC, 1000 dbar, 0 N 0 E -> 1506.144 m/s.
    """
    sa, ct, p = _sa_ct(
        temperature_c, practical_salinity, pressure_dbar, latitude_deg, longitude_deg
    )
    return float(gsw.sound_speed(sa, ct, p))


def _mackenzie(temperature_c: float, salinity: float, depth_m: float) -> float:
    t, s, d = temperature_c, salinity - 35.0, depth_m
    return (
        1448.96
        + 4.591 * t
        - 5.304e-2 * t**2
        + 2.374e-4 * t**3
        + 1.340 * s
        + 1.630e-2 * d
        + 1.675e-7 * d**2
        - 1.025e-2 * t * s
        - 7.139e-13 * t * d**3
    )


def sound_speed_mackenzie_m_s(temperature_c: float, salinity: float, depth_m: float) -> float:
    """Sound speed, Mackenzie (1981) JASA 70(3) 807-812, nine-term, with depth in metres.

    Refused outside the paper's stated validity: T -2..30 degC, S 25..40, D 0..8000 m.
    Example: 10 degC, S 35, 1000 m -> 1506.264 m/s.
    """
    t = require_range("temperature_c", temperature_c, -2.0, 30.0, unit="degC")
    s = require_range("salinity", salinity, 25.0, 40.0)
    d = require_range("depth_m", depth_m, 0.0, 8000.0, unit="m")
    return _mackenzie(t, s, d)


def dbar_to_psi(pressure_dbar: float) -> float:
    """1 dbar = 1e4 Pa = 1.4503774 psi (NIST SP 811, exact definitions)."""
    return require_finite("pressure_dbar", pressure_dbar) * PA_PER_DBAR / PA_PER_PSI


def psi_to_dbar(pressure_psi: float) -> float:
    """1 psi = 6894.757293168 Pa = 0.6894757 dbar (NIST SP 811)."""
    return require_finite("pressure_psi", pressure_psi) * PA_PER_PSI / PA_PER_DBAR


def dbar_to_bar(pressure_dbar: float) -> float:
    """1 dbar = 0.1 bar (exact). Example: 4000 dbar -> 400 bar."""
    return require_finite("pressure_dbar", pressure_dbar) * PA_PER_DBAR / PA_PER_BAR


def bar_to_dbar(pressure_bar: float) -> float:
    """1 bar = 10 dbar (exact). Example: 400 bar -> 4000 dbar."""
    return require_finite("pressure_bar", pressure_bar) * PA_PER_BAR / PA_PER_DBAR


def bar_to_psi(pressure_bar: float) -> float:
    """1 bar = 1e5 Pa = 14.503774 psi (NIST SP 811)."""
    return require_finite("pressure_bar", pressure_bar) * PA_PER_BAR / PA_PER_PSI


def dbar_to_mpa(pressure_dbar: float) -> float:
    """1 dbar = 0.01 MPa (exact). Example: 4000 dbar -> 40 MPa."""
    return require_finite("pressure_dbar", pressure_dbar) * PA_PER_DBAR / 1.0e6


def mpa_to_dbar(pressure_mpa: float) -> float:
    """1 MPa = 100 dbar (exact)."""
    return require_finite("pressure_mpa", pressure_mpa) * 1.0e6 / PA_PER_DBAR
