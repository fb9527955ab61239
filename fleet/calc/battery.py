"""Primary battery packs: chemistry data, usable capacity, consumption and days left.

Chemistry data come from Linden's *Handbook of Batteries* (4th ed.; chapters 11 and 14)
and IEC 60086-1/-2.  Most figures here are **from memory** of those handbooks and are
marked so; only the system letters, the Li/MnO2 2.0 V end voltage and the Li/SOCl2
D-cell capacity-vs-load points (Linden Fig. 14.17) were confirmed.

Depletion estimate (physics, reference notes 5.5):

- Ah per year = I_listen x 8760 h + replies/yr x I_tx x t_tx / 3600 + releases/yr x
  I_m x t_m / 3600 + self-discharge Ah/yr.
- Usable capacity = C_nominal x f_T(T) x f_rate x (1 - age_years x k_sd(T_storage)), with
  C_nominal = parallel strings x cell capacity.
- Life = usable capacity / (Ah per year).

Self-discharge has its own temperature law, separate from the capacity derating f_T:

1. k_sd(T) = k_sd(20 degC) x exp(-Ea/R x (1/T - 1/T_20)), T in kelvin.  This is the
   Arrhenius equation (IUPAC Gold Book, "Arrhenius equation": k = A exp(-Ea/RT)) written
   as a ratio to the rate at 20 degC, so the pre-exponential factor cancels.
2. R = N_A k = 8.314462618... J/(mol K), the molar gas constant (CODATA 2018; exact
   since the 2019 SI redefinition).
3. Ea: per-chemistry activation energies for self-discharge were not confirmed, so every
   chemistry uses one common value, ``SELF_DISCHARGE_ACTIVATION_ENERGY_J_MOL``, chosen so
   the rate exactly doubles from 20 to 30 degC: Ea = R ln 2 / (1/293.15 - 1/303.15) =
   51.2 kJ/mol.  That is the rule of thumb "chemical rates roughly double per +10 K"
   (common practice, from memory; reference notes 5.5).  A chemistry can carry its own
   value in ``Chemistry.self_discharge_activation_energy_j_mol`` once one is sourced.
4. Worked number: Li/SOCl2 bobbin, 1 %/yr at 20 degC -> 2 %/yr at 30 degC and
   0.297 %/yr at 4 degC.  Multiplying the 20 degC rate by the *capacity* derating f_T
   instead (as a pack's self-discharge was once estimated) is wrong: f_T is 1.0 at room
   temperature and above, so it never raises self-discharge in warm storage, and in cold
   water it lowers it by a few percent where the Arrhenius law gives a factor of ~3.

High drain: the capacity a cell delivers falls with current.  For a chemistry with a
D-cell capacity-vs-current curve (Li/SOCl2, Linden Fig. 14.17), ``rate_factor_at_current``
= C(I_string) / C(``D_CELL_REFERENCE_CURRENT_A``), with I_string = pack current / parallel
strings, and 1.0 at or below the reference current.  The reference is the curve's peak
(4 mA, 19.0 Ah); below it the handbook capacity falls only because the slow test spans
years of self-discharge, which the age term already counts.  The curve is for a D-size
cell at 25 degC; applied to another cell size it is an approximation.

Open-circuit voltage is **not** a reliable gauge of state of charge: it recovers after a
load and depends on history; Li/SOCl2 stays on a flat plateau until nearly exhausted.
``state_of_charge_band`` therefore returns ``indicative_only=True`` always.

Safety: lithium cells can vent or burst when shorted, charged, forced into reverse or
heated; a sealed housing holding a vented cell is under pressure. Follow the local
handling and transport rules and vent a housing before opening it.
"""

from __future__ import annotations

import bisect
import datetime as dt
import math
from dataclasses import dataclass
from typing import Final

from fleet.calc._checks import (
    require_choice,
    require_date,
    require_int,
    require_non_negative,
    require_positive,
    require_range,
)

HOURS_PER_YEAR: Final = 8760.0
DAYS_PER_YEAR: Final = 365.0
# Mean calendar year for rates per day (Julian year, IAU): the rules layer counts ages
# in days / 365.25, and a daily self-discharge uses the same year.
DAYS_PER_MEAN_YEAR: Final = 365.25

# Molar gas constant R = N_A x k, exact in the 2019 SI (CODATA 2018 prints 8.314462618...).
GAS_CONSTANT_J_MOL_K: Final = 6.02214076e23 * 1.380649e-23
ZERO_CELSIUS_K: Final = 273.15
SELF_DISCHARGE_REFERENCE_C: Final = 20.0
# One activation energy for all chemistries: the rate doubles from 20 to 30 degC (rule of
# thumb "x2 per +10 K", common practice, from memory).  = 51216 J/mol.
SELF_DISCHARGE_ACTIVATION_ENERGY_J_MOL: Final = (
    GAS_CONSTANT_J_MOL_K * math.log(2.0) / (1.0 / 293.15 - 1.0 / 303.15)
)
# Li/SOCl2 D cell: the handbook curve's peak (560 ohm, ~4 mA, 19.0 Ah), the low-drain
# current against which a high-drain duty is compared (Linden Fig. 14.17).
D_CELL_REFERENCE_CURRENT_A: Final = 0.004
# Domains forms can import (lo, hi).  Each chemistry's own temperature range is
# ``temperature_range_c(key)``; this is the union over the chemistries held here.
AGE_RANGE_YEARS: Final = (0.0, 50.0)


@dataclass(frozen=True, slots=True)
class Chemistry:
    """Per-cell data for one primary chemistry (figures from memory unless ``source``
    says otherwise)."""

    key: str
    name: str
    iec_letter: str  # IEC 60086-1 system letter (confirmed)
    nominal_v_per_cell: float
    cutoff_v_per_cell: float
    max_open_circuit_v_per_cell: float  # IEC 60086-1 maximum OCV (from memory)
    self_discharge_per_year: float  # fraction of nominal capacity per year at ~20 degC
    # Capacity fraction vs temperature at low drain, piecewise linear (degC, fraction);
    # the first and last points bound the operating range.
    temperature_curve: tuple[tuple[float, float], ...]
    # Open-circuit volts per cell -> band, highest first (min volts, band name).
    soc_bands: tuple[tuple[float, str], ...]
    flat_discharge: bool
    soc_note: str
    # D-size cell capacity vs steady current at 25 degC (current A, capacity Ah).
    d_cell_rate_curve: tuple[tuple[float, float], ...] = ()
    source: str = ""
    # Arrhenius activation energy of self-discharge; the common value unless sourced.
    self_discharge_activation_energy_j_mol: float = SELF_DISCHARGE_ACTIVATION_ENERGY_J_MOL


CHEMISTRIES: Final[dict[str, Chemistry]] = {
    "alkaline_zn_mno2": Chemistry(
        key="alkaline_zn_mno2",
        name="Alkaline Zn/MnO2",
        iec_letter="L",
        nominal_v_per_cell=1.5,
        cutoff_v_per_cell=0.9,  # functional end voltage; IEC 60086-2 tests use 0.9/0.8 V
        max_open_circuit_v_per_cell=1.65,
        self_discharge_per_year=0.03,  # 2-4 %/yr at 20 degC
        # cold water: 60-85 % at 0-5 degC, steep fall below -10 degC (Linden ch. 11)
        temperature_curve=(
            (-20.0, 0.10), (-10.0, 0.35), (0.0, 0.65), (5.0, 0.75), (10.0, 0.88),
            (20.0, 1.0), (55.0, 1.0),
        ),
        soc_bands=(
            (1.55, "fresh"), (1.45, "part used"), (1.30, "low"), (0.90, "near end of life"),
            (0.0, "exhausted"),
        ),
        flat_discharge=False,
        soc_note="open-circuit volts recover after load; ~1.58 V fresh, ~1.45 V at half, "
        "<1.30 V near exhausted (from memory)",
        source="Linden's Handbook of Batteries 4th ed. ch. 11 (from memory); IEC 60086-2",
    ),
    "li_socl2_bobbin": Chemistry(
        key="li_socl2_bobbin",
        name="Li/SOCl2 bobbin",
        iec_letter="E",
        nominal_v_per_cell=3.6,
        cutoff_v_per_cell=3.0,  # some packs run to 2.0 V
        max_open_circuit_v_per_cell=3.9,
        self_discharge_per_year=0.01,  # ~1 %/yr at 20 degC
        # 90-100 % at 0-5 degC at low drain (Linden Fig. 14.18, from memory)
        temperature_curve=(
            (-40.0, 0.50), (-20.0, 0.75), (0.0, 0.92), (20.0, 1.0), (85.0, 1.0),
        ),
        soc_bands=(
            (3.60, "indeterminate"), (3.30, "low"), (3.00, "near end of life"),
            (0.0, "exhausted"),
        ),
        flat_discharge=True,
        soc_note="flat discharge: open-circuit volts stay near 3.65 V until the cell is "
        "nearly exhausted, so a normal reading says nothing about charge left; count "
        "coulombs. A low first reading after storage may be passivation (voltage delay).",
        # Linden's Handbook 4th ed. Fig. 14.17, D-size high-capacity bobbin cell, +25 degC
        d_cell_rate_curve=(
            (0.0002, 17.0), (0.001, 18.4), (0.002, 18.8), (0.004, 19.0), (0.020, 13.5),
            (0.035, 7.0),
        ),
        source="Linden's Handbook of Batteries 4th ed. ch. 14 (Fig. 14.17 confirmed; "
        "the rest from memory)",
    ),
    "li_mno2": Chemistry(
        key="li_mno2",
        name="Li/MnO2",
        iec_letter="C",
        nominal_v_per_cell=3.0,
        cutoff_v_per_cell=2.0,  # Linden Figs. 14.50-14.52 (confirmed)
        max_open_circuit_v_per_cell=3.7,
        self_discharge_per_year=0.015,  # 1-2 %/yr at 20 degC
        temperature_curve=((-20.0, 0.60), (0.0, 0.85), (20.0, 1.0), (60.0, 1.0)),
        soc_bands=(
            (3.20, "fresh"), (3.00, "part used"), (2.80, "low"), (2.00, "near end of life"),
            (0.0, "exhausted"),
        ),
        flat_discharge=False,
        soc_note="open-circuit ~3.3 V fresh; a sloping curve but still history-dependent",
        source="Linden's Handbook of Batteries 4th ed. ch. 14 (from memory)",
    ),
}  # fmt: skip


BATTERY_TEMPERATURE_RANGE_C: Final = (
    min(c.temperature_curve[0][0] for c in CHEMISTRIES.values()),
    max(c.temperature_curve[-1][0] for c in CHEMISTRIES.values()),
)


def chemistry(key: str) -> Chemistry:
    """Look up a chemistry by key: "alkaline_zn_mno2", "li_socl2_bobbin", "li_mno2"."""
    return CHEMISTRIES[require_choice("chemistry", key, CHEMISTRIES)]


def temperature_range_c(chemistry_key: str) -> tuple[float, float]:
    """The (lo, hi) degC a chemistry's figures cover: the ends of its derating curve.

    Every temperature argument of this module is refused outside it, so a form can offer
    the same limits.  Example: "li_socl2_bobbin" -> (-40.0, 85.0).
    """
    curve = chemistry(chemistry_key).temperature_curve
    return curve[0][0], curve[-1][0]


def _interp(points: tuple[tuple[float, float], ...], x: float) -> float:
    # Callers guard x to [first, last]; the clamp picks the end segment at the edges.
    xs = [p[0] for p in points]
    i = min(max(bisect.bisect_right(xs, x), 1), len(points) - 1)
    (x0, y0), (x1, y1) = points[i - 1], points[i]
    return y0 + (y1 - y0) * (x - x0) / (x1 - x0)


def temperature_factor(chemistry_key: str, temperature_c: float) -> float:
    """Capacity fraction at ``temperature_c`` from the chemistry's piecewise-linear curve.

    Linden's Handbook (from memory).  Example: alkaline at 0 degC -> 0.65.
    """
    chem = chemistry(chemistry_key)
    curve = chem.temperature_curve
    t = require_range("temperature_c", temperature_c, curve[0][0], curve[-1][0], unit="degC")
    return _interp(curve, t)


def d_cell_capacity_ah(chemistry_key: str, current_a: float) -> float:
    """Capacity of a D-size cell at a steady current, 25 degC, interpolated linearly in
    log10(current) between the handbook points.

    Linden's Handbook 4th ed. Fig. 14.17 (Li/SOCl2 bobbin).  Example: 4 mA -> 19.0 Ah,
    0.2 mA -> 17.0 Ah (the fall at very low drain is self-discharge over ~10 years).
    """
    chem = chemistry(chemistry_key)
    curve = chem.d_cell_rate_curve
    if not curve:
        raise ValueError(f"chemistry must have a D-cell rate curve, got {chemistry_key!r}")
    lo, hi = curve[0][0], curve[-1][0]
    current = require_range("current_a", current_a, lo, hi, unit="A")
    log_curve = tuple((math.log10(i), c) for i, c in curve)
    return _interp(log_curve, math.log10(current))


@dataclass(frozen=True, slots=True)
class PackSpec:
    """A pack of ``parallel_strings`` strings, each of ``cells_in_series`` cells."""

    chemistry: str
    cells_in_series: int
    parallel_strings: int
    cell_capacity_ah: float

    def __post_init__(self) -> None:
        require_choice("chemistry", self.chemistry, CHEMISTRIES)
        require_int("cells_in_series", self.cells_in_series, 1, 1000)
        require_int("parallel_strings", self.parallel_strings, 1, 1000)
        require_range("cell_capacity_ah", self.cell_capacity_ah, 0.0, 1000.0, lo_open=True)

    @property
    def chem(self) -> Chemistry:
        return CHEMISTRIES[self.chemistry]

    @property
    def nominal_v(self) -> float:
        return self.cells_in_series * self.chem.nominal_v_per_cell

    @property
    def cutoff_v(self) -> float:
        return self.cells_in_series * self.chem.cutoff_v_per_cell

    @property
    def nominal_capacity_ah(self) -> float:
        return self.parallel_strings * self.cell_capacity_ah


def self_discharge_factor(chemistry_key: str, temperature_c: float) -> float:
    """Self-discharge rate at ``temperature_c`` relative to 20 degC (Arrhenius).

    exp(-Ea/R x (1/T - 1/293.15 K)); IUPAC Gold Book "Arrhenius equation", Ea from the
    doubling-per-10-K rule (module docstring).  1.0 at 20 degC, rising with temperature.
    Example: 30 degC -> 2.0; 4 degC -> 0.297.
    """
    chem = chemistry(chemistry_key)
    lo, hi = temperature_range_c(chemistry_key)
    t = require_range("temperature_c", temperature_c, lo, hi, unit="degC")
    t_k = t + ZERO_CELSIUS_K
    t_ref_k = SELF_DISCHARGE_REFERENCE_C + ZERO_CELSIUS_K
    ea_over_r = chem.self_discharge_activation_energy_j_mol / GAS_CONSTANT_J_MOL_K
    return math.exp(-ea_over_r * (1.0 / t_k - 1.0 / t_ref_k))


def self_discharge_fraction_per_year(chemistry_key: str, temperature_c: float) -> float:
    """Fraction of nominal capacity lost per year in storage at ``temperature_c``:
    k_sd(20 degC) x ``self_discharge_factor``.

    Example: Li/SOCl2 bobbin (1 %/yr at 20 degC, from memory of Linden ch. 14) at 30 degC
    -> 0.02 per year; at 4 degC -> 0.00297 per year.
    """
    rate_20 = chemistry(chemistry_key).self_discharge_per_year
    return rate_20 * self_discharge_factor(chemistry_key, temperature_c)


def self_discharge_ah_per_day(pack: PackSpec, temperature_c: float) -> float:
    """Charge a pack loses to self-discharge per day at ``temperature_c``:
    C_nominal x k_sd(T) / 365.25.

    Example: 2 strings of 19 Ah Li/SOCl2 at 30 degC -> 38 x 0.02 / 365.25 = 2.081 mAh/day.
    """
    fraction = self_discharge_fraction_per_year(pack.chemistry, temperature_c)
    return pack.nominal_capacity_ah * fraction / DAYS_PER_MEAN_YEAR


def rate_factor_at_current(pack: PackSpec, mean_load_current_a: float) -> float:
    """Capacity fraction left by a steady pack current, from the D-cell rate curve:
    C(I / strings) / C(``D_CELL_REFERENCE_CURRENT_A``), 1.0 at or below the reference.

    Linden's Handbook 4th ed. Fig. 14.17.  Only chemistries with a rate curve (Li/SOCl2
    bobbin) accept it.  Example: 2 strings drawing 40 mA (20 mA each) -> 13.5 / 19.0 =
    0.711.
    """
    curve = pack.chem.d_cell_rate_curve
    if not curve:
        with_curve = ", ".join(k for k, c in CHEMISTRIES.items() if c.d_cell_rate_curve)
        raise ValueError(
            f"mean_load_current_a must be left out for a chemistry without a D-cell rate "
            f"curve (only {with_curve} has one), got {pack.chemistry!r}"
        )
    hi = curve[-1][0] * pack.parallel_strings
    current = require_range("mean_load_current_a", mean_load_current_a, 0.0, hi, unit="A")
    per_string = current / pack.parallel_strings
    if per_string <= D_CELL_REFERENCE_CURRENT_A:
        return 1.0
    reference = d_cell_capacity_ah(pack.chemistry, D_CELL_REFERENCE_CURRENT_A)
    return min(1.0, d_cell_capacity_ah(pack.chemistry, per_string) / reference)


def usable_capacity_ah(
    pack: PackSpec,
    temperature_c: float,
    age_years: float,
    rate_factor: float = 1.0,
    *,
    storage_temperature_c: float | None = None,
    mean_load_current_a: float | None = None,
) -> float:
    """Usable capacity = C_nominal x f_T(T) x f_rate x (1 - age x k_sd(T_storage)),
    floored at 0.

    ``age_years`` is the pack's age since manufacture at the start of the deployment;
    ``storage_temperature_c`` is where it sat meanwhile (default 20 degC, the rate's
    reference, which keeps the old result).  ``mean_load_current_a`` (pack total) sets
    f_rate from the D-cell curve (``rate_factor_at_current``) in place of ``rate_factor``;
    give one or the other.
    Example: one Li/SOCl2 D cell, 19 Ah, 20 degC, 2 years -> 19 x 1.0 x 0.98 = 18.62 Ah;
    stored those 2 years at 30 degC -> 19 x (1 - 2 x 0.02) = 18.24 Ah.
    """
    f_t = temperature_factor(pack.chemistry, temperature_c)
    age = require_range("age_years", age_years, *AGE_RANGE_YEARS, unit="years")
    f_rate = require_range("rate_factor", rate_factor, 0.0, 1.0, lo_open=True)
    if mean_load_current_a is not None:
        if rate_factor != 1.0:
            raise ValueError(
                f"rate_factor must be left at 1 when mean_load_current_a is given, "
                f"got {rate_factor!r}"
            )
        f_rate = rate_factor_at_current(pack, mean_load_current_a)
    k_sd = pack.chem.self_discharge_per_year  # at 20 degC
    if storage_temperature_c is not None:
        lo, hi = temperature_range_c(pack.chemistry)
        stored = require_range("storage_temperature_c", storage_temperature_c, lo, hi, unit="degC")
        k_sd = self_discharge_fraction_per_year(pack.chemistry, stored)
    shelf = max(0.0, 1.0 - age * k_sd)
    return pack.nominal_capacity_ah * f_t * f_rate * shelf


def charge_used_ah(
    listen_hours: float,
    listen_current_a: float,
    replies: int,
    charge_per_reply_as: float,
    releases: int = 0,
    charge_per_release_as: float = 0.0,
) -> float:
    """Charge drawn: listen_hours x I_listen + (replies x q_reply + releases x q_release)
    / 3600 (charges in ampere-seconds).

    Example: 8760 h at 200 uA + 876000 replies of 5 mAs -> 1.752 + 1.2167 = 2.9687 Ah.
    """
    hours = require_non_negative("listen_hours", listen_hours, unit="h")
    i_listen = require_range("listen_current_a", listen_current_a, 0.0, 10.0, unit="A")
    n_replies = require_int("replies", replies, 0)
    q_reply = require_non_negative("charge_per_reply_as", charge_per_reply_as, unit="A s")
    n_releases = require_int("releases", releases, 0)
    q_release = require_non_negative("charge_per_release_as", charge_per_release_as, unit="A s")
    return hours * i_listen + (n_replies * q_reply + n_releases * q_release) / 3600.0


def annual_consumption_ah(
    listen_current_a: float,
    replies_per_hour: float,
    reply_current_a: float,
    reply_duration_s: float,
    release_tests_per_year: float = 0.0,
    release_current_a: float = 0.0,
    release_duration_s: float = 0.0,
    self_discharge_ah_per_year: float = 0.0,
) -> float:
    """Ah per year at a steady duty (reference notes 5.5).

    Example: 200 uA listening (1.752 Ah) + 100 replies/h of 0.5 A x 10 ms (1.2167 Ah)
    -> 2.9687 Ah/yr.
    """
    i_listen = require_range("listen_current_a", listen_current_a, 0.0, 10.0, unit="A")
    rate = require_range("replies_per_hour", replies_per_hour, 0.0, 36000.0, unit="/h")
    i_tx = require_range("reply_current_a", reply_current_a, 0.0, 100.0, unit="A")
    t_tx = require_range("reply_duration_s", reply_duration_s, 0.0, 10.0, unit="s")
    n_rel = require_non_negative("release_tests_per_year", release_tests_per_year, unit="/yr")
    i_rel = require_range("release_current_a", release_current_a, 0.0, 100.0, unit="A")
    t_rel = require_non_negative("release_duration_s", release_duration_s, unit="s")
    sd = require_non_negative("self_discharge_ah_per_year", self_discharge_ah_per_year)
    replies = rate * HOURS_PER_YEAR * i_tx * t_tx / 3600.0
    releases = n_rel * i_rel * t_rel / 3600.0
    return i_listen * HOURS_PER_YEAR + replies + releases + sd


def life_years(usable_capacity_ah: float, consumption_ah_per_year: float) -> float:
    """Life = usable capacity / Ah per year.

    Example: 15.2 Ah at 2.9687 + 0.19 Ah/yr -> 4.81 years.
    """
    usable = require_non_negative("usable_capacity_ah", usable_capacity_ah, unit="Ah")
    annual = require_positive("consumption_ah_per_year", consumption_ah_per_year, unit="Ah/yr")
    return usable / annual


def remaining_ah_on(
    on: dt.date, known_on: dt.date, known_remaining_ah: float, daily_ah: float
) -> float:
    """Charge left on ``on`` given ``known_remaining_ah`` on ``known_on`` and a steady duty
    of ``daily_ah`` per day; floored at 0.

    Example: 10 Ah on 2025-01-01 at 0.01 Ah/day -> 6.35 Ah on 2026-01-01.
    """
    day = require_date("on", on)
    start = require_date("known_on", known_on)
    if day < start:
        raise ValueError(f"on must be on or after known_on {start}, got {day.isoformat()}")
    known = require_non_negative("known_remaining_ah", known_remaining_ah, unit="Ah")
    daily = require_non_negative("daily_ah", daily_ah, unit="Ah/day")
    return max(0.0, known - daily * (day - start).days)


def days_left(remaining_ah: float, daily_ah: float) -> float:
    """Days until empty at ``daily_ah`` per day.  Example: 6.35 Ah at 0.01 Ah/day -> 635."""
    remaining = require_non_negative("remaining_ah", remaining_ah, unit="Ah")
    daily = require_positive("daily_ah", daily_ah, unit="Ah/day")
    return remaining / daily


def empty_on(on: dt.date, remaining_ah: float, daily_ah: float) -> dt.date:
    """Last whole day with charge: ``on`` + floor(days_left).

    Example: 2026-01-01 with 6.35 Ah at 0.01 Ah/day -> 2027-09-28.
    """
    day = require_date("on", on)
    days = math.floor(days_left(remaining_ah, daily_ah))
    if days > (dt.date.max - day).days:
        raise ValueError(f"daily_ah must give a date before year 9999, got {daily_ah!r}")
    return day + dt.timedelta(days=days)


@dataclass(frozen=True, slots=True)
class SocBand:
    band: str
    volts_per_cell: float
    indicative_only: bool
    flat_discharge: bool
    note: str


def state_of_charge_band(
    chemistry_key: str, open_circuit_v: float, cells_in_series: int
) -> SocBand:
    """Coarse state-of-charge band from open-circuit volts per cell.  Always indicative.

    Bands are from memory (Linden ch. 11, 14) and common practice.  Example: 21 alkaline
    cells (31.5 V nominal) reading 23 V -> 1.095 V/cell -> "near end of life".
    """
    chem = chemistry(chemistry_key)
    cells = require_int("cells_in_series", cells_in_series, 1, 1000)
    v_max = cells * chem.max_open_circuit_v_per_cell
    volts = require_range("open_circuit_v", open_circuit_v, 0.0, v_max, unit="V")
    per_cell = volts / cells
    band = next(name for floor, name in chem.soc_bands if per_cell >= floor)
    return SocBand(band, per_cell, True, chem.flat_discharge, chem.soc_note)
