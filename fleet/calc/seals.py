"""Elastomer O-rings: AS568 sizes, gland geometry, shelf life and when a seal is due.

Sizes: SAE AS568 (Rev D/F) Table 1, inch values; millimetres are inch x 25.4 rounded to
0.01 mm, matching the published metric rows.  Calculations on a ring use the rounded
millimetre values (the published gland worked example does too).

Gland geometry (definitions, no standard needed):

- squeeze % = (CS - gland depth) / CS x 100; radial gland depth = (bore - groove dia) / 2
- stretch % = (groove dia - ring ID) / ring ID x 100 (negative = the ring is loose)
- fill %    = (pi/4 CS^2) / (groove depth x groove width) x 100

The pass/fail bands are common practice from seal-design guides, not a standard, so they
live in ``GlandBands`` and callers may pass their own.

Shelf life: ISO 2230:2002 groups (initial period + extension after inspection) and SAE
ARP5316 (a single period, some elastomers unlimited).

When a seal is due (``seal_due``)
---------------------------------
1. Calendar: fitted_on + interval_months (month arithmetic clamps to the month end:
   31 Jan + 1 month = 28/29 Feb).  The interval is a workshop rule, common practice.
2. Shelf life, if a cure date is known: cure_date + the standard's initial period (plus
   the extension only when ``include_extension`` is set, i.e. after an inspection);
   never, for an elastomer the standard calls unlimited.
3. The due date is the earlier of 1 and 2; ``limited_by`` says which.
4. Openings: the housing may be opened ``max_openings`` times on one seal; at that count
   the seal must be replaced at the next closing, whatever the date.
"""

from __future__ import annotations

import calendar
import datetime as dt
import math
import re
from dataclasses import dataclass
from typing import Final, Literal

from fleet.calc._checks import (
    require_choice,
    require_date,
    require_int,
    require_positive,
    require_range,
)

MM_PER_IN: Final = 25.4  # exact, international inch (1959)

# --- SAE AS568 Table 1: (first dash, cross-section in thousandths of an inch, inside
# diameters in thousandths of an inch for consecutive dash numbers).
_SERIES: Final[tuple[tuple[int, int, tuple[int, ...]], ...]] = (
    (4, 70, (
        70, 101, 114, 145, 176, 208, 239, 301, 364, 426,
        489, 551, 614, 676, 739, 801, 864, 926, 989, 1051,
        1114, 1176, 1239, 1301, 1364, 1489, 1614, 1739, 1864, 1989,
        2114, 2239, 2364, 2489, 2614, 2739, 2864, 2989, 3239, 3489,
        3739, 3989, 4239, 4489, 4739, 4989, 5239,
    )),
    (102, 103, (
        49, 81, 112, 143, 174, 206, 237, 299, 362, 424,
        487, 549, 612, 674, 737, 799, 862, 924, 987, 1049,
        1112, 1174, 1237, 1299, 1362, 1424, 1487, 1549, 1612, 1674,
        1737, 1799, 1862, 1925, 1987, 2050, 2112, 2175, 2237, 2300,
        2362, 2425, 2487, 2550, 2612, 2675, 2737, 2800, 2862, 2987,
        3237, 3487, 3737, 3987, 4237, 4487, 4737, 4987, 5237, 5487,
        5737, 5987, 6237, 6487, 6737, 6987, 7237, 7487, 7737, 7987,
        8237, 8487, 8737, 8987, 9237, 9487, 9737,
    )),
    (201, 139, (
        171, 234, 296, 359, 421, 484, 546, 609, 671, 734,
        796, 859, 921, 984, 1046, 1109, 1171, 1234, 1296, 1359,
        1421, 1484, 1609, 1734, 1859, 1984, 2109, 2234, 2359, 2484,
        2609, 2734, 2859, 2984, 3109, 3234, 3359, 3484, 3609, 3734,
        3859, 3984, 4109, 4234, 4359, 4484, 4609, 4734, 4859, 4984,
        5109, 5234, 5359, 5484, 5609, 5734, 5859, 5984, 6234, 6484,
        6734, 6984, 7234, 7484, 7734, 7984, 8234, 8484, 8734, 8984,
        9234, 9484, 9734, 9984, 10484, 10984, 11484, 11984, 12984, 13984,
        14984, 15955, 16955, 17955,
    )),
    (309, 210, (
        412, 475, 537, 600, 662, 725, 787, 850, 912, 975,
        1037, 1100, 1162, 1225, 1287, 1350, 1475, 1600, 1725, 1850,
        1975, 2100, 2225, 2350, 2475, 2600, 2725, 2850, 2975, 3100,
        3225, 3350, 3475, 3600, 3725, 3850, 3975, 4100, 4225, 4350,
        4475, 4600, 4725, 4850, 4975, 5100, 5225, 5350, 5475, 5600,
        5725, 5850, 5975, 6225, 6475, 6725, 6975, 7225, 7475, 7725,
        7975, 8225, 8475, 8725, 8975, 9225, 9475, 9725, 9975, 10475,
        10975, 11475, 11975, 12975, 13975, 14975, 15955, 16955, 17955, 18955,
        19955, 20955, 21955, 22940, 23940, 24940, 25940,
    )),
    (425, 275, (
        4475, 4600, 4725, 4850, 4975, 5100, 5225, 5350, 5475, 5600,
        5725, 5850, 5975, 6225, 6475, 6725, 6975, 7225, 7475, 7725,
        7975, 8475, 8975, 9475, 9975, 10475, 10975, 11475, 11975, 12475,
        12975, 13475, 13975, 14475, 14975, 15475, 15955, 16455, 16955, 17455,
        17955, 18455, 18955, 19455, 19955, 20955, 21955, 22940, 23940, 24940,
        25940,
    )),
)  # fmt: skip
# The three smallest sizes have their own cross-sections: dash -> (ID, CS) thousandths.
_SMALL: Final[dict[int, tuple[int, int]]] = {1: (29, 40), 2: (42, 50), 3: (56, 60)}


def _mm(thousandths: int) -> float:
    # Binary-float product rounded to 0.01 mm: this reproduces every published metric row
    # (e.g. -341 88.27 but -343 94.61, both exact .xx5 cases); at most 0.005 mm either way.
    return round(thousandths / 1000 * MM_PER_IN, 2)


@dataclass(frozen=True, slots=True)
class ORing:
    """One AS568 size.  Millimetres are the inch values x 25.4 rounded to 0.01 mm."""

    dash: int
    inner_diameter_in: float
    cross_section_in: float
    inner_diameter_mm: float
    cross_section_mm: float
    outer_diameter_mm: float

    @property
    def designation(self) -> str:
        return f"AS568-{self.dash:03d}"


def _build_table() -> dict[int, ORing]:
    rows: dict[int, tuple[int, int]] = dict(_SMALL)
    for first, cs, ids in _SERIES:
        for offset, inner in enumerate(ids):
            rows[first + offset] = (inner, cs)
    table: dict[int, ORing] = {}
    for dash, (inner, cs) in sorted(rows.items()):
        id_mm, cs_mm = _mm(inner), _mm(cs)
        table[dash] = ORing(
            dash, inner / 1000, cs / 1000, id_mm, cs_mm, round(id_mm + 2 * cs_mm, 2)
        )
    return table


AS568: Final[dict[int, ORing]] = _build_table()
_DASH_RE: Final = re.compile(r"^(?:AS\s*568[A-F]?)?\s*-?\s*(\d{1,3})$", re.IGNORECASE)


def as568(dash: int | str) -> ORing:
    """AS568 size by dash number: 240, "240", "-240", "AS568-240" all give the same ring.

    SAE AS568 Table 1.  Example: -240 -> ID 3.734 in (94.84 mm), CS 0.139 in (3.53 mm),
    OD 101.90 mm.
    """
    number: int
    if isinstance(dash, bool):
        raise TypeError("dash must be an int or str, got bool")
    if isinstance(dash, int):
        number = dash
    elif isinstance(dash, str):
        match = _DASH_RE.match(dash.strip())
        if match is None:
            raise ValueError(f"dash must look like 240, '-240' or 'AS568-240', got {dash!r}")
        number = int(match.group(1))
    else:
        raise TypeError(f"dash must be an int or str, got {type(dash).__name__}")
    if number not in AS568:
        raise ValueError(
            "dash must be an AS568 size (-001..-050, -102..-178, -201..-284, -309..-395, "
            f"-425..-475), got {dash!r}"
        )
    return AS568[number]


# --- gland geometry ------------------------------------------------------------------------
def squeeze_percent(cross_section_mm: float, gland_depth_mm: float) -> float:
    """Squeeze = (CS - gland depth) / CS x 100.  Example: CS 3.53, depth 2.82 -> 20.11 %."""
    cs = require_positive("cross_section_mm", cross_section_mm, unit="mm")
    depth = require_positive("gland_depth_mm", gland_depth_mm, unit="mm")
    return (cs - depth) / cs * 100.0


def stretch_percent(inner_diameter_mm: float, groove_diameter_mm: float) -> float:
    """ID stretch = (groove dia - ring ID) / ring ID x 100 (negative: loose/compressed).

    Example: ID 94.84 on a 95.96 mm groove -> 1.18 %.
    """
    inner = require_positive("inner_diameter_mm", inner_diameter_mm, unit="mm")
    groove = require_positive("groove_diameter_mm", groove_diameter_mm, unit="mm")
    return (groove - inner) / inner * 100.0


def gland_fill_percent(
    cross_section_mm: float, groove_depth_mm: float, groove_width_mm: float
) -> float:
    """Gland fill = (pi/4 CS^2) / (depth x width) x 100.

    Example: CS 3.53 in a 2.82 x 4.75 mm groove -> 73.06 %.
    """
    cs = require_positive("cross_section_mm", cross_section_mm, unit="mm")
    depth = require_positive("groove_depth_mm", groove_depth_mm, unit="mm")
    width = require_positive("groove_width_mm", groove_width_mm, unit="mm")
    return math.pi / 4.0 * cs * cs / (depth * width) * 100.0


@dataclass(frozen=True, slots=True)
class GlandBands:
    """Recommended ranges for a static gland; common practice, no published source.

    Squeeze outside [min, max] fails; between ``squeeze_preferred_max_percent`` and max
    it passes with a note.  Stretch above max fails, below 0 fails (ring loose in the
    groove), between 0 and the preferred minimum gives a note.
    """

    squeeze_min_percent: float
    squeeze_preferred_max_percent: float
    squeeze_max_percent: float
    fill_max_percent: float = 85.0
    stretch_max_percent: float = 5.0
    stretch_preferred_min_percent: float = 1.0


# common practice, no published source (seal-design guides; see the reference notes 2.2)
STATIC_RADIAL_BANDS: Final = GlandBands(15.0, 25.0, 30.0)
STATIC_FACE_BANDS: Final = GlandBands(20.0, 30.0, 30.0)

# Where each part of a gland check comes from, as pages print it.
SIZE_SOURCE: Final = "SAE AS568 Table 1"
GEOMETRY_SOURCE: Final = "geometric definitions (squeeze, stretch, fill), no standard needed"
BANDS_SOURCE: Final = "common practice from seal-design guides, no published source"


@dataclass(frozen=True, slots=True)
class GlandCheck:
    passed: bool
    squeeze_percent: float
    stretch_percent: float | None  # None for a face seal
    fill_percent: float
    gland_depth_mm: float
    reasons: tuple[str, ...]  # why it failed (empty when passed)
    notes: tuple[str, ...]  # advisory, do not fail the gland


def _judge(
    squeeze: float,
    stretch: float | None,
    fill: float,
    depth: float,
    bands: GlandBands,
) -> GlandCheck:
    reasons: list[str] = []
    notes: list[str] = []
    if squeeze < bands.squeeze_min_percent:
        reasons.append(
            f"squeeze {squeeze:.1f} % is below the minimum {bands.squeeze_min_percent:g} %"
        )
    elif squeeze > bands.squeeze_max_percent:
        reasons.append(
            f"squeeze {squeeze:.1f} % is above the maximum {bands.squeeze_max_percent:g} %"
        )
    elif squeeze > bands.squeeze_preferred_max_percent:
        notes.append(
            f"squeeze {squeeze:.1f} % is above the preferred "
            f"{bands.squeeze_preferred_max_percent:g} %; check the gland depth"
        )
    if stretch is not None:
        if stretch > bands.stretch_max_percent:
            reasons.append(
                f"stretch {stretch:.2f} % is above the maximum {bands.stretch_max_percent:g} %"
            )
        elif stretch < 0.0:
            reasons.append(f"stretch {stretch:.2f} % is negative: the ring is loose")
        elif stretch < bands.stretch_preferred_min_percent:
            notes.append(
                f"stretch {stretch:.2f} % is below the preferred "
                f"{bands.stretch_preferred_min_percent:g} %"
            )
    if fill > bands.fill_max_percent:
        reasons.append(f"gland fill {fill:.1f} % is above the maximum {bands.fill_max_percent:g} %")
    return GlandCheck(not reasons, squeeze, stretch, fill, depth, tuple(reasons), tuple(notes))


def _swell(value: float) -> float:
    return require_range("volume_swell_percent", value, 0.0, 100.0, unit="%")


def gland_check_radial(
    ring: ORing,
    bore_diameter_mm: float,
    groove_diameter_mm: float,
    groove_width_mm: float,
    bands: GlandBands = STATIC_RADIAL_BANDS,
    volume_swell_percent: float = 0.0,
) -> GlandCheck:
    """Check a static radial (piston-type) gland: the ring sits stretched on the groove
    bottom ``groove_diameter_mm`` and is squeezed against the bore.

    Fill is computed with the cross-section area increased by ``volume_swell_percent``.
    Example: -240 in a 101.60 mm bore, groove dia 95.96 mm, width 4.75 mm -> squeeze
    20.11 %, stretch 1.18 %, fill 73.06 %: passes.
    """
    bore = require_positive("bore_diameter_mm", bore_diameter_mm, unit="mm")
    groove = require_range(
        "groove_diameter_mm", groove_diameter_mm, 0.0, bore, lo_open=True, hi_open=True, unit="mm"
    )
    depth = (bore - groove) / 2.0
    swell = _swell(volume_swell_percent)
    fill = gland_fill_percent(ring.cross_section_mm, depth, groove_width_mm) * (1 + swell / 100)
    return _judge(
        squeeze_percent(ring.cross_section_mm, depth),
        stretch_percent(ring.inner_diameter_mm, groove),
        fill,
        depth,
        bands,
    )


def gland_check_face(
    ring: ORing,
    groove_depth_mm: float,
    groove_width_mm: float,
    bands: GlandBands = STATIC_FACE_BANDS,
    volume_swell_percent: float = 0.0,
) -> GlandCheck:
    """Check a static face (axial) gland: squeeze from the groove depth, fill.

    Example: -240 in a 2.59 mm deep, 4.75 mm wide face groove -> squeeze 26.6 %: passes.
    """
    depth = require_positive("groove_depth_mm", groove_depth_mm, unit="mm")
    swell = _swell(volume_swell_percent)
    fill = gland_fill_percent(ring.cross_section_mm, depth, groove_width_mm) * (1 + swell / 100)
    return _judge(squeeze_percent(ring.cross_section_mm, depth), None, fill, depth, bands)


# --- shelf life ----------------------------------------------------------------------------
Standard = Literal["ISO2230", "ARP5316"]
STANDARDS: Final = ("ISO2230", "ARP5316")

# ISO 2230:2002: group -> (initial years, extension years, elastomers).  NBR, EPDM and FKM
# confirmed via a quoted table; the rest of the membership is from memory.
_ISO2230: Final[dict[str, tuple[int, int, tuple[str, ...]]]] = {
    "A": (5, 2, ("NR", "IR", "SBR", "AU", "EU")),
    "B": (7, 3, ("NBR", "HNBR", "CR", "ACM", "AEM", "ECO", "IIR")),
    "C": (10, 5, ("EPDM", "FKM", "VMQ", "FVMQ", "FFKM")),
}
# SAE ARP5316D: elastomer -> years, None = unlimited (several consistent summaries).
_ARP5316: Final[dict[str, int | None]] = {
    "NBR": 15, "HNBR": 15, "CR": 15, "ACM": 15, "AEM": 15,
    "AU": 5, "EU": 5, "SBR": 3,
    "EPDM": None, "FKM": None, "VMQ": None, "FVMQ": None, "FFKM": None, "IIR": None,
    "PTFE": None,
}  # fmt: skip


@dataclass(frozen=True, slots=True)
class ShelfLife:
    elastomer: str
    standard: Standard
    initial_years: int | None  # None = unlimited
    extension_years: int  # after inspection (ISO 2230); 0 for ARP5316
    group: str | None  # ISO 2230 group letter

    @property
    def unlimited(self) -> bool:
        return self.initial_years is None

    @property
    def total_years(self) -> int | None:
        if self.initial_years is None:
            return None
        return self.initial_years + self.extension_years


def shelf_life(elastomer: str, standard: str = "ISO2230") -> ShelfLife:
    """Storage life of an elastomer, ISO 2230:2002 groups or SAE ARP5316.

    Example: NBR -> ISO 2230 group B, 7 + 3 years; ARP5316 15 years; FKM ARP5316 unlimited.
    """
    std = require_choice("standard", standard, STANDARDS)
    code = elastomer.strip().upper() if isinstance(elastomer, str) else elastomer
    if std == "ISO2230":
        members = {e: g for g, (_, _, es) in _ISO2230.items() for e in es}
        group = members[require_choice("elastomer", code, members)]
        initial, extension, _ = _ISO2230[group]
        return ShelfLife(code, "ISO2230", initial, extension, group)
    years = _ARP5316[require_choice("elastomer", code, _ARP5316)]
    return ShelfLife(code, "ARP5316", years, 0, None)


def add_months(day: dt.date, months: int) -> dt.date:
    """Calendar month arithmetic, clamped to the month end: 31 Jan + 1 -> 28/29 Feb."""
    require_date("day", day)
    require_int("months", months, -12 * 1000, 12 * 1000)
    index = day.year * 12 + (day.month - 1) + months
    year, month = divmod(index, 12)
    require_int("year", year, dt.MINYEAR, dt.MAXYEAR)
    last = calendar.monthrange(year, month + 1)[1]
    return dt.date(year, month + 1, min(day.day, last))


DEFAULT_SEAL_INTERVAL_MONTHS: Final = 12  # common practice, no published source
DEFAULT_MAX_OPENINGS: Final = 1  # common practice: a new ring every time a face is opened

LimitedBy = Literal["calendar", "shelf_life"]


@dataclass(frozen=True, slots=True)
class SealDue:
    due_on: dt.date
    limited_by: LimitedBy
    calendar_due_on: dt.date
    shelf_expires_on: dt.date | None  # None: unlimited or no cure date
    openings_exhausted: bool
    reasons: tuple[str, ...]  # one line per limit: calendar, shelf life, openings


def seal_due(
    fitted_on: dt.date,
    interval_months: int = DEFAULT_SEAL_INTERVAL_MONTHS,
    openings_since_fit: int = 0,
    max_openings: int | None = DEFAULT_MAX_OPENINGS,
    cure_date: dt.date | None = None,
    elastomer: str | None = None,
    standard: str = "ISO2230",
    include_extension: bool = False,
) -> SealDue:
    """When a fitted O-ring is due for replacement (algorithm in the module docstring).

    ``interval_months`` (default 12) and ``max_openings`` (default 1; None = no limit) are
    workshop rules, common practice.  Example: NBR cured 2019-06-30, fitted 2025-08-31,
    12 months -> calendar 2026-08-31, ISO 2230 shelf 2026-06-30: due 2026-06-30 (shelf life).
    """
    fitted = require_date("fitted_on", fitted_on)
    interval = require_int("interval_months", interval_months, 1, 240)
    openings = require_int("openings_since_fit", openings_since_fit, 0)
    limit = None if max_openings is None else require_int("max_openings", max_openings, 1)
    std = require_choice("standard", standard, STANDARDS)

    calendar_due = add_months(fitted, interval)
    reasons = [f"calendar: fitted {fitted.isoformat()} + {interval} months = {calendar_due}"]

    shelf_expires: dt.date | None = None
    if cure_date is None:
        reasons.append("shelf life: no cure date recorded")
    else:
        cured = require_date("cure_date", cure_date)
        if cured > fitted:
            raise ValueError(
                f"cure_date must be on or before fitted_on {fitted}, got {cured.isoformat()}"
            )
        if elastomer is None:
            raise ValueError("elastomer must be given when cure_date is given, got None")
        life = shelf_life(elastomer, std)
        years = life.total_years if include_extension else life.initial_years
        if years is None:
            reasons.append(f"shelf life: {life.elastomer} unlimited under {std}")
        else:
            shelf_expires = add_months(cured, 12 * years)
            reasons.append(
                f"shelf life: {life.elastomer} cured {cured.isoformat()} + {years} years "
                f"({std}) = {shelf_expires}"
            )

    limited_by: LimitedBy
    if shelf_expires is not None and shelf_expires < calendar_due:
        due, limited_by = shelf_expires, "shelf_life"
    else:
        due, limited_by = calendar_due, "calendar"

    if limit is None:
        exhausted = False
        reasons.append(f"openings: {openings} since fit, no limit set")
    else:
        exhausted = openings >= limit
        verdict = "replace at this opening" if exhausted else "within limit"
        reasons.append(f"openings: {openings} of {limit} since fit, {verdict}")
    return SealDue(due, limited_by, calendar_due, shelf_expires, exhausted, tuple(reasons))
