"""fleet.calc.rtd against IEC 60751 (Callendar-Van Dusen) values and tolerance classes."""

from __future__ import annotations

import math
from collections.abc import Callable

import pytest
from hypothesis import given, settings
from hypothesis import strategies as st

from fleet.calc import rtd

SETTINGS = settings(max_examples=200, deadline=None)


@pytest.mark.parametrize(
    ("t", "expected_ohm"),
    [
        # IEC 60751 Table 1 prints these to 0.01 ohm; 4 decimals from the CVD equation
        # (reference 4); -20, -100, 100 and 200 degC also appear in independent test suites.
        (-200.0, 18.5201),  # IEC 60751 Table 1 / CVD
        (-100.0, 60.2558),  # IEC 60751 Table 1 / CVD; check case 14
        (-50.0, 80.3063),  # IEC 60751 Table 1 / CVD; check case 14
        (-40.0, 84.2707),  # IEC 60751 Table 1 / CVD
        (-20.0, 92.1599),  # IEC 60751 Table 1 / CVD
        (0.0, 100.0000),  # IEC 60751 definition of R0
        (4.0, 101.5624),  # IEC 60751 Table 1 / CVD
        (10.0, 103.9025),  # IEC 60751 Table 1 / CVD
        (20.0, 107.7935),  # IEC 60751 Table 1 / CVD
        (25.0, 109.7347),  # IEC 60751 Table 1 / CVD; check case 14
        (30.0, 111.6729),  # IEC 60751 Table 1 / CVD
        (50.0, 119.3971),  # IEC 60751 Table 1 / CVD
        (100.0, 138.5055),  # IEC 60751 Table 1 / CVD; check case 14
        (150.0, 157.3251),  # IEC 60751 Table 1 / CVD
        (200.0, 175.8560),  # IEC 60751 Table 1 / CVD; check case 14
        (850.0, 390.4811),  # IEC 60751 Table 1 / CVD
    ],
)
def test_it_gives_the_pt100_resistance(t: float, expected_ohm: float) -> None:
    assert rtd.resistance_ohm(t) == pytest.approx(expected_ohm, abs=1e-4)
    assert rtd.temperature_c(expected_ohm) == pytest.approx(t, abs=1e-3)  # inverse, 1e-4 ohm


def test_a_pt1000_reads_ten_times_a_pt100() -> None:
    # IEC 60751: Pt1000 values are x10 (reference 4)
    assert rtd.resistance_ohm(100.0, r0_ohm=1000.0) == pytest.approx(1385.055, abs=1e-3)


def test_it_inverts_108_5_ohm() -> None:
    # check case 15: T(108.5 ohm) = 21.8189 degC (one public calculator)
    assert rtd.temperature_c(108.5) == pytest.approx(21.8189, abs=1e-4)


def test_the_mean_alpha_is_the_standard_one() -> None:
    # IEC 60751: alpha = (R100 - R0) / (100 R0) = 0.00385055 /degC
    alpha = (rtd.resistance_ohm(100.0) - 100.0) / (100.0 * 100.0)
    assert alpha == pytest.approx(0.00385055, abs=1e-9)


@SETTINGS
@given(st.floats(-200.0, 850.0))
def test_temperature_round_trips_through_resistance(t: float) -> None:
    # check case 15: the round trip is exact to 1e-9
    r = rtd.resistance_ohm(t)
    assert rtd.resistance_ohm(rtd.temperature_c(r)) == pytest.approx(r, abs=1e-9)
    assert rtd.temperature_c(r) == pytest.approx(t, abs=1e-8)


@SETTINGS
@given(st.floats(-200.0, 849.0), st.floats(0.001, 1.0))
def test_resistance_rises_with_temperature(t: float, step: float) -> None:
    assert rtd.resistance_ohm(t + step) > rtd.resistance_ohm(t)


def test_the_two_cvd_branches_meet_at_zero() -> None:
    # IEC 60751: the C term vanishes at 0 degC, so R is continuous there
    assert rtd.resistance_ohm(-1e-9) == pytest.approx(rtd.resistance_ohm(0.0), abs=1e-6)
    assert rtd.temperature_c(100.0) == 0.0


@pytest.mark.parametrize(
    ("cls", "t", "expected"),
    [
        ("A", 100.0, 0.35),  # IEC 60751:2008 Table 3; check case 16
        ("B", -50.0, 0.55),  # IEC 60751:2008 Table 3; check case 16
        ("AA", 0.0, 0.10),  # IEC 60751:2008 Table 3; check case 16
        ("C", 200.0, 2.60),  # IEC 60751:2008 Table 3; check case 16
        ("A", 4.0, 0.158),  # IEC 60751:2008 Table 3 (reference 4 example)
        ("AA", -50.0, 0.185),  # IEC 60751:2008 Table 3 formula
        ("B", 600.0, 3.30),  # IEC 60751:2008 Table 3 formula
    ],
)
def test_it_gives_the_class_tolerance(cls: str, t: float, expected: float) -> None:
    assert rtd.tolerance_c(t, cls) == pytest.approx(expected, abs=1e-9)


@pytest.mark.parametrize(
    ("cls", "element", "inside", "outside"),
    [
        # validity ranges from memory of IEC 60751:2008 Table 3 (reference 4, unconfirmed)
        ("AA", "wire_wound", 250.0, 251.0),
        ("AA", "film", 150.0, -1.0),
        ("A", "wire_wound", -100.0, 451.0),
        ("A", "film", -30.0, 301.0),
        ("B", "wire_wound", -196.0, -197.0),
        ("B", "film", 500.0, 501.0),
        ("C", "wire_wound", 600.0, 601.0),
        ("C", "film", -50.0, -51.0),
    ],
)
def test_it_refuses_a_tolerance_outside_the_class_range(
    cls: str, element: str, inside: float, outside: float
) -> None:
    assert rtd.tolerance_c(inside, cls, element) > 0.0
    with pytest.raises(ValueError, match="^temperature_c must be in"):
        rtd.tolerance_c(outside, cls, element)


def test_tighter_classes_have_smaller_tolerances() -> None:
    # IEC 60751:2008 Table 3 ordering AA < A < B < C
    values = [rtd.tolerance_c(100.0, c) for c in ("AA", "A", "B", "C")]
    assert values == sorted(values) and len(set(values)) == 4


@pytest.mark.parametrize(
    ("call", "name"),
    [
        (lambda: rtd.resistance_ohm(-200.1), "temperature_c"),
        (lambda: rtd.resistance_ohm(850.1), "temperature_c"),
        (lambda: rtd.resistance_ohm(math.nan), "temperature_c"),
        (lambda: rtd.resistance_ohm(20.0, r0_ohm=0.0), "r0_ohm"),
        (lambda: rtd.resistance_ohm(20.0, r0_ohm=-100.0), "r0_ohm"),
        (lambda: rtd.temperature_c(18.0), "resistance_ohm"),
        (lambda: rtd.temperature_c(391.0), "resistance_ohm"),
        (lambda: rtd.temperature_c(math.inf), "resistance_ohm"),
        (lambda: rtd.temperature_c(100.0, r0_ohm=math.nan), "r0_ohm"),
        (lambda: rtd.tolerance_c(20.0, "D"), "tolerance_class"),
        (lambda: rtd.tolerance_c(20.0, "a"), "tolerance_class"),
        (lambda: rtd.tolerance_c(20.0, "A", "thin"), "element"),
        (lambda: rtd.tolerance_c(math.nan, "A"), "temperature_c"),
    ],
)
def test_it_rejects_out_of_range_arguments_by_name(call: Callable[[], float], name: str) -> None:
    with pytest.raises(ValueError, match=rf"^{name} must be"):
        call()
