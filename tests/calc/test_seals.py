"""fleet.calc.seals against SAE AS568 Table 1, gland geometry, ISO 2230 and SAE ARP5316."""

from __future__ import annotations

import datetime as dt
import math
from collections.abc import Callable

import pytest
from hypothesis import given, settings
from hypothesis import strategies as st

from fleet.calc import seals

SETTINGS = settings(max_examples=100, deadline=None)


# --- AS568 sizes ------------------------------------------------------------------------------
@pytest.mark.parametrize(
    ("dash", "id_in", "id_mm", "cs_in", "cs_mm"),
    [
        # SAE AS568 Table 1 via a secondary copy citing AS568D (reference 2.1)
        (230, 2.484, 63.09, 0.139, 3.53),
        (234, 2.984, 75.79, 0.139, 3.53),
        (238, 3.484, 88.49, 0.139, 3.53),
        (240, 3.734, 94.84, 0.139, 3.53),  # also check case 24
        (242, 3.984, 101.19, 0.139, 3.53),
        (245, 4.359, 110.72, 0.139, 3.53),
        (250, 4.984, 126.59, 0.139, 3.53),
        (254, 5.484, 139.29, 0.139, 3.53),  # also check case 24
        (258, 5.984, 151.99, 0.139, 3.53),
        (341, 3.475, 88.27, 0.210, 5.33),
        (343, 3.725, 94.61, 0.210, 5.33),
        (347, 4.225, 107.31, 0.210, 5.33),
        (350, 4.600, 116.84, 0.210, 5.33),  # also check case 24
        (355, 5.225, 132.71, 0.210, 5.33),
        (360, 5.850, 148.59, 0.210, 5.33),
    ],
)
def test_it_reproduces_every_published_as568_row(
    dash: int, id_in: float, id_mm: float, cs_in: float, cs_mm: float
) -> None:
    ring = seals.as568(dash)
    assert ring.dash == dash
    assert ring.inner_diameter_in == id_in
    assert ring.inner_diameter_mm == id_mm
    assert ring.cross_section_in == cs_in
    assert ring.cross_section_mm == cs_mm


def test_the_240_ring_has_the_published_outside_diameter() -> None:
    # reference 2.1: OD = ID + 2 CS; -240 OD 101.90 mm
    assert seals.as568(240).outer_diameter_mm == pytest.approx(101.90, abs=1e-9)


def test_240_and_254_are_not_the_sizes_a_wrong_snippet_gives() -> None:
    # reference 2.1 warning: "AS568-240 = 101.19 mm" is really -242; "-250 = 139.29" is -254
    assert seals.as568(240).inner_diameter_mm != 101.19
    assert seals.as568(242).inner_diameter_mm == 101.19
    assert seals.as568(250).inner_diameter_mm != 139.29


@pytest.mark.parametrize(
    ("series", "first", "last", "cs_in", "cs_mm"),
    [
        (0, 4, 50, 0.070, 1.78),  # SAE AS568 series cross-sections (reference 2.1, confirmed)
        (1, 102, 178, 0.103, 2.62),
        (2, 201, 284, 0.139, 3.53),
        (3, 309, 395, 0.210, 5.33),
        (4, 425, 475, 0.275, 6.99),
    ],
)
def test_each_series_covers_its_whole_range_with_one_cross_section(
    series: int, first: int, last: int, cs_in: float, cs_mm: float
) -> None:
    dashes = sorted(d for d in seals.AS568 if d // 100 == series and d >= first)
    assert dashes == list(range(first, last + 1))  # no gaps, no extras
    rings = [seals.as568(d) for d in dashes]
    assert {r.cross_section_in for r in rings} == {cs_in}
    assert {r.cross_section_mm for r in rings} == {cs_mm}


def test_the_three_smallest_sizes_have_their_own_sections() -> None:
    # SAE AS568 Table 1 (from memory): -001 0.040, -002 0.050, -003 0.060 in
    assert [seals.as568(d).cross_section_in for d in (1, 2, 3)] == [0.040, 0.050, 0.060]


def test_there_are_no_sizes_outside_the_standard_ranges() -> None:
    expected = (
        set(range(1, 51))
        | set(range(102, 179))
        | set(range(201, 285))
        | set(range(309, 396))
        | set(range(425, 476))
    )
    assert set(seals.AS568) == expected  # SAE AS568 dash ranges (reference 2.1 / brief)


# Standard ID steps within a series are 1/32, 1/16, 1/8, 1/4, 1/2 or 1 inch (rounded to the
# thousandth).  The few transitions below are where AS568 changes step; from memory.
IRREGULAR_STEPS = {(5, 6), (281, 282), (384, 385), (391, 392), (460, 461), (471, 472)}
REGULAR = [1 / 32, 1 / 16, 1 / 8, 1 / 4, 1 / 2, 1.0]


def test_inner_diameters_rise_in_regular_steps() -> None:
    dashes = sorted(seals.AS568)
    for a, b in zip(dashes, dashes[1:], strict=False):
        if a // 100 != b // 100 or a < 4:
            continue
        step = seals.AS568[b].inner_diameter_in - seals.AS568[a].inner_diameter_in
        assert step > 0, (a, b)
        if (a, b) not in IRREGULAR_STEPS:
            assert min(abs(step - r) for r in REGULAR) <= 0.0015, (a, b, step)


@SETTINGS
@given(st.sampled_from(sorted(seals.AS568)))
def test_every_size_has_consistent_millimetres(dash: int) -> None:
    ring = seals.as568(dash)
    # mm = in x 25.4 rounded to 0.01 (reference 2.1); OD = ID + 2 CS
    assert ring.inner_diameter_mm == pytest.approx(ring.inner_diameter_in * 25.4, abs=0.0051)
    assert ring.cross_section_mm == pytest.approx(ring.cross_section_in * 25.4, abs=0.0051)
    assert ring.outer_diameter_mm == pytest.approx(
        ring.inner_diameter_mm + 2 * ring.cross_section_mm, abs=1e-9
    )
    assert ring.designation == f"AS568-{dash:03d}"
    assert seals.as568(ring.designation) == ring


@pytest.mark.parametrize("spelling", [240, "240", "-240", "AS568-240", "as568-240", " 240 "])
def test_it_accepts_the_usual_spellings_of_a_dash(spelling: int | str) -> None:
    assert seals.as568(spelling).dash == 240


@pytest.mark.parametrize("unknown", [0, 51, 101, 179, 285, 300, 396, 424, 476, 999, "-051"])
def test_it_rejects_an_unknown_dash(unknown: int | str) -> None:
    with pytest.raises(ValueError, match="^dash must be an AS568 size"):
        seals.as568(unknown)


def test_it_wants_a_dash_as_an_int_or_a_string() -> None:
    with pytest.raises(TypeError, match="^dash"):
        seals.as568(True)
    with pytest.raises(TypeError, match="^dash"):
        seals.as568(240.0)  # type: ignore[arg-type]


@pytest.mark.parametrize("garbage", ["", "AS568", "2-240", "AS568-24a", "1234"])
def test_it_rejects_a_malformed_dash(garbage: str) -> None:
    with pytest.raises(ValueError, match="^dash must"):
        seals.as568(garbage)


# --- gland geometry ---------------------------------------------------------------------------
def test_it_checks_the_published_end_cap_gland() -> None:
    # check case 25: -240, bore 101.60, groove dia 95.96, width 4.75 -> squeeze 20.11 %,
    # stretch 1.18 %, fill 73.06 % (geometry definitions, reference 2.2)
    check = seals.gland_check_radial(seals.as568("AS568-240"), 101.60, 95.96, 4.75)
    assert check.gland_depth_mm == pytest.approx(2.82)
    assert check.squeeze_percent == pytest.approx(20.11, abs=0.01)
    assert check.stretch_percent == pytest.approx(1.18, abs=0.01)
    assert check.fill_percent == pytest.approx(73.06, abs=0.05)
    assert check.passed and check.reasons == () and check.notes == ()


def test_the_face_depth_gives_26_6_percent_squeeze() -> None:
    # reference 2.2 worked example: the same ring in a 2.59 mm face groove -> 26.6 %
    ring = seals.as568(240)
    face = seals.gland_check_face(ring, 2.59, 4.75)
    assert face.squeeze_percent == pytest.approx(26.6, abs=0.05)
    assert face.passed and face.stretch_percent is None
    # the same depth in a radial gland is above the preferred 25 % (common practice): a note
    radial = seals.gland_check_radial(ring, 101.60, 101.60 - 2 * 2.59, 4.75)
    assert radial.passed and any("preferred" in n for n in radial.notes)


@pytest.mark.parametrize(
    ("groove_dia", "width", "swell", "fragment"),
    [
        # bands common practice, no published source (reference 2.2 / check case 25)
        (96.80, 4.75, 0.0, "squeeze"),  # depth 2.40 -> squeeze 32 % > 30 %
        (95.00, 4.75, 0.0, "squeeze"),  # depth 3.30 -> squeeze 6.5 % < 15 %
        (100.20, 4.75, 0.0, "stretch"),  # stretch 5.65 % > 5 % (and squeeze!)
        (95.96, 3.60, 0.0, "gland fill"),  # fill 96 % > 85 %
        (95.96, 4.75, 20.0, "gland fill"),  # 73 % x 1.2 swell = 88 % > 85 %
    ],
)
def test_it_fails_a_radial_gland_outside_the_bands(
    groove_dia: float, width: float, swell: float, fragment: str
) -> None:
    check = seals.gland_check_radial(
        seals.as568(240), 101.60, groove_dia, width, volume_swell_percent=swell
    )
    assert not check.passed
    assert any(r.startswith(fragment) for r in check.reasons)


def test_it_fails_a_loose_ring_and_notes_a_barely_stretched_one() -> None:
    ring = seals.as568(240)  # ID 94.84
    loose = seals.gland_check_radial(ring, 100.00, 94.50, 4.75)
    assert any("loose" in r for r in loose.reasons)
    snug = seals.gland_check_radial(ring, 100.50, 95.10, 4.75)  # stretch 0.27 %
    assert snug.passed and any("stretch" in n for n in snug.notes)


def test_it_reports_every_failure_at_once() -> None:
    check = seals.gland_check_radial(seals.as568(240), 101.60, 100.20, 2.0)
    assert len(check.reasons) == 3  # squeeze, stretch and fill


def test_the_geometry_functions_follow_their_definitions() -> None:
    # reference 2.2 definitions
    assert seals.squeeze_percent(3.53, 2.82) == pytest.approx((3.53 - 2.82) / 3.53 * 100)
    assert seals.stretch_percent(94.84, 95.96) == pytest.approx((95.96 - 94.84) / 94.84 * 100)
    assert seals.gland_fill_percent(3.53, 2.82, 4.75) == pytest.approx(
        math.pi / 4 * 3.53**2 / (2.82 * 4.75) * 100
    )


# --- shelf life -------------------------------------------------------------------------------
@pytest.mark.parametrize(
    ("elastomer", "standard", "initial", "extension", "total"),
    [
        ("NBR", "ARP5316", 15, 0, 15),  # SAE ARP5316D; check case 26
        ("FKM", "ARP5316", None, 0, None),  # SAE ARP5316D unlimited; check case 26
        ("NBR", "ISO2230", 7, 3, 10),  # ISO 2230:2002 via a quoted table; check case 26
        ("EPDM", "ISO2230", 10, 5, 15),  # ISO 2230:2002 via a quoted table; check case 26
        ("FKM", "ISO2230", 10, 5, 15),  # ISO 2230:2002 via a quoted table
        ("SBR", "ARP5316", 3, 0, 3),  # SAE ARP5316D summaries
        ("AU", "ARP5316", 5, 0, 5),  # SAE ARP5316D summaries
        ("NR", "ISO2230", 5, 2, 7),  # ISO 2230 group A; membership from memory
        ("CR", "ISO2230", 7, 3, 10),  # ISO 2230 group B; membership from memory
    ],
)
def test_it_gives_the_shelf_life(
    elastomer: str,
    standard: str,
    initial: int | None,
    extension: int,
    total: int | None,
) -> None:
    life = seals.shelf_life(elastomer, standard)
    assert life.initial_years == initial
    assert life.extension_years == extension
    assert life.total_years == total
    assert life.unlimited == (initial is None)


def test_iso_2230_is_never_longer_than_arp5316_for_the_common_nitrile() -> None:
    # reference 2.3: ISO 2230 is the conservative default
    iso = seals.shelf_life("nbr")  # case-insensitive
    assert iso.standard == "ISO2230" and iso.group == "B"
    arp = seals.shelf_life("NBR", "ARP5316").initial_years
    assert iso.initial_years is not None and arp is not None and iso.initial_years < arp


# --- month arithmetic and seal due dates -----------------------------------------------------
@pytest.mark.parametrize(
    ("day", "months", "expected"),
    [
        (dt.date(2025, 1, 31), 1, dt.date(2025, 2, 28)),  # clamps to month end
        (dt.date(2024, 1, 31), 1, dt.date(2024, 2, 29)),  # leap year
        (dt.date(2024, 2, 29), 12, dt.date(2025, 2, 28)),
        (dt.date(2025, 3, 31), 6, dt.date(2025, 9, 30)),
        (dt.date(2025, 11, 15), 3, dt.date(2026, 2, 15)),
        (dt.date(2025, 5, 31), -3, dt.date(2025, 2, 28)),
    ],
)
def test_it_adds_months_clamping_to_the_month_end(
    day: dt.date, months: int, expected: dt.date
) -> None:
    assert seals.add_months(day, months) == expected


def test_a_recent_seal_is_due_on_the_calendar_interval() -> None:
    # 12-month interval common practice; ISO 2230:2002 group B 7 years for NBR
    due = seals.seal_due(
        dt.date(2025, 3, 31), 12, 0, 1, cure_date=dt.date(2024, 11, 2), elastomer="NBR"
    )
    assert due.due_on == dt.date(2026, 3, 31) and due.limited_by == "calendar"
    assert due.shelf_expires_on == dt.date(2031, 11, 2)  # ISO 2230 group B: 7 years
    assert not due.openings_exhausted
    assert len(due.reasons) == 3


def test_an_old_seal_is_due_when_its_shelf_life_ends() -> None:
    # ISO 2230 group B, 7 years from cure: 2019-06-30 -> 2026-06-30, before the calendar date
    due = seals.seal_due(
        dt.date(2025, 8, 31), 12, 0, 1, cure_date=dt.date(2019, 6, 30), elastomer="NBR"
    )
    assert due.due_on == dt.date(2026, 6, 30) and due.limited_by == "shelf_life"
    assert due.calendar_due_on == dt.date(2026, 8, 31)


def test_the_extension_counts_only_when_asked() -> None:
    fitted, cured = dt.date(2025, 8, 31), dt.date(2019, 6, 30)
    plain = seals.seal_due(fitted, 24, cure_date=cured, elastomer="NBR")
    extended = seals.seal_due(fitted, 24, cure_date=cured, elastomer="NBR", include_extension=True)
    assert plain.shelf_expires_on == dt.date(2026, 6, 30)  # 7 years (ISO 2230)
    assert extended.shelf_expires_on == dt.date(2029, 6, 30)  # 7 + 3 years (ISO 2230)
    assert extended.limited_by == "calendar"


def test_an_unlimited_elastomer_is_due_on_the_calendar_only() -> None:
    due = seals.seal_due(
        dt.date(2025, 1, 31),
        1,
        cure_date=dt.date(1990, 1, 1),
        elastomer="FKM",
        standard="ARP5316",
    )
    # SAE ARP5316D: FKM unlimited; 31 Jan + 1 month clamps to 28 Feb
    assert due.due_on == dt.date(2025, 2, 28) and due.shelf_expires_on is None
    assert any("unlimited" in r for r in due.reasons)


def test_without_a_cure_date_it_says_so() -> None:
    due = seals.seal_due(dt.date(2025, 1, 1))
    assert due.due_on == dt.date(2026, 1, 1)  # default 12 months, common practice
    assert any("no cure date" in r for r in due.reasons)


@pytest.mark.parametrize(
    ("openings", "limit", "exhausted"),
    [
        (0, 1, False),  # common practice: new ring at every opening
        (1, 1, True),
        (2, 3, False),
        (3, 3, True),
        (50, None, False),  # no limit set
    ],
)
def test_it_counts_openings(openings: int, limit: int | None, exhausted: bool) -> None:
    due = seals.seal_due(dt.date(2025, 1, 1), 12, openings, limit)
    assert due.openings_exhausted is exhausted
    assert any(r.startswith("openings") for r in due.reasons)


@SETTINGS
@given(
    fitted=st.dates(dt.date(2000, 1, 1), dt.date(2040, 12, 31)),
    months=st.integers(1, 240),
    age_days=st.integers(0, 20 * 366),
    elastomer=st.sampled_from(["NBR", "EPDM", "FKM", "SBR", "CR"]),
)
def test_the_due_date_is_the_earlier_limit(
    fitted: dt.date, months: int, age_days: int, elastomer: str
) -> None:
    cured = fitted - dt.timedelta(days=age_days)
    due = seals.seal_due(fitted, months, cure_date=cured, elastomer=elastomer)
    limits = [due.calendar_due_on] + ([due.shelf_expires_on] if due.shelf_expires_on else [])
    assert due.due_on == min(limits)
    assert due.calendar_due_on > fitted


# --- guards -----------------------------------------------------------------------------------
RING = seals.as568(240)
DAY = dt.date(2025, 1, 1)


@pytest.mark.parametrize(
    ("call", "name"),
    [
        (lambda: seals.squeeze_percent(0.0, 2.8), "cross_section_mm"),
        (lambda: seals.squeeze_percent(3.53, -1.0), "gland_depth_mm"),
        (lambda: seals.stretch_percent(math.nan, 95.0), "inner_diameter_mm"),
        (lambda: seals.stretch_percent(94.84, 0.0), "groove_diameter_mm"),
        (lambda: seals.gland_fill_percent(-3.53, 2.8, 4.7), "cross_section_mm"),
        (lambda: seals.gland_fill_percent(3.53, 0.0, 4.7), "groove_depth_mm"),
        (lambda: seals.gland_fill_percent(3.53, 2.8, math.inf), "groove_width_mm"),
        (lambda: seals.gland_check_radial(RING, 0.0, 95.0, 4.7), "bore_diameter_mm"),
        (lambda: seals.gland_check_radial(RING, 101.6, 101.6, 4.7), "groove_diameter_mm"),
        (lambda: seals.gland_check_radial(RING, 101.6, 95.9, -4.7), "groove_width_mm"),
        (lambda: seals.gland_check_radial(RING, 101.6, 95.9, 4.7, volume_swell_percent=-1.0),
         "volume_swell_percent"),
        (lambda: seals.gland_check_face(RING, 0.0, 4.7), "groove_depth_mm"),
        (lambda: seals.gland_check_face(RING, 2.6, 0.0), "groove_width_mm"),
        (lambda: seals.shelf_life("XYZ"), "elastomer"),
        (lambda: seals.shelf_life("ECO", "ARP5316"), "elastomer"),
        (lambda: seals.shelf_life("NBR", "ISO3601"), "standard"),
        (lambda: seals.add_months(DAY, 10**6), "months"),
        (lambda: seals.add_months(dt.date(9999, 12, 1), 1), "year"),
        (lambda: seals.seal_due(DAY, 0), "interval_months"),
        (lambda: seals.seal_due(DAY, 241), "interval_months"),
        (lambda: seals.seal_due(DAY, 12, -1), "openings_since_fit"),
        (lambda: seals.seal_due(DAY, 12, 0, 0), "max_openings"),
        (lambda: seals.seal_due(DAY, 12, 0, 1, dt.date(2025, 1, 2), "NBR"), "cure_date"),
        (lambda: seals.seal_due(DAY, 12, 0, 1, dt.date(2024, 1, 2)), "elastomer"),
        (lambda: seals.seal_due(DAY, 12, 0, 1, dt.date(2024, 1, 2), "NBR", "DIN"), "standard"),
    ],
)  # fmt: skip
def test_it_rejects_out_of_range_arguments_by_name(call: Callable[[], object], name: str) -> None:
    with pytest.raises(ValueError, match=rf"^{name} must"):
        call()


def test_it_rejects_a_datetime_for_a_date() -> None:
    with pytest.raises(TypeError, match="^fitted_on"):
        seals.seal_due(dt.datetime(2025, 1, 1, tzinfo=dt.UTC))
    with pytest.raises(TypeError, match="^interval_months"):
        seals.seal_due(DAY, 12.0)  # type: ignore[arg-type]
