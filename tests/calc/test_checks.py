"""The shared argument guards (fleet/calc/_checks.py)."""

from __future__ import annotations

import datetime as dt
import math

import pytest

from fleet.calc._checks import (
    require_choice,
    require_date,
    require_finite,
    require_int,
    require_non_negative,
    require_positive,
    require_range,
)


@pytest.mark.parametrize("bad", [math.nan, math.inf, -math.inf])
def test_it_rejects_non_finite_numbers_by_name(bad: float) -> None:
    with pytest.raises(ValueError, match=r"^depth_m must be a finite number"):
        require_finite("depth_m", bad)


def test_it_rejects_bool_and_strings_as_numbers() -> None:
    with pytest.raises(TypeError, match="^flag"):
        require_finite("flag", True)
    with pytest.raises(TypeError, match="^mass_kg"):
        require_finite("mass_kg", "1.0")  # type: ignore[arg-type]


def test_it_returns_a_float_for_an_int() -> None:
    value = require_finite("n", 3)
    assert value == 3.0 and isinstance(value, float)


@pytest.mark.parametrize(
    ("value", "kwargs", "message"),
    [
        (0.0, {"lo": 0.0, "hi": 1.0, "lo_open": True}, r"^u must be in \(0, 1\], got 0.0"),
        (1.5, {"lo": 0.0, "hi": 1.0}, r"^u must be in \[0, 1\], got 1.5"),
        (1.0, {"lo": 0.0, "hi": 1.0, "hi_open": True}, r"^u must be in \[0, 1\), got 1.0"),
        (-1.0, {"lo": 0.0}, r"^u must be in \[0, inf\), got -1.0"),
        (11001.0, {"lo": 0.0, "hi": 11000.0, "unit": "m"}, r"^u must be in \[0, 11000\] m"),
    ],
)
def test_it_names_the_argument_and_the_allowed_range(
    value: float, kwargs: dict[str, object], message: str
) -> None:
    with pytest.raises(ValueError, match=message):
        require_range("u", value, **kwargs)  # type: ignore[arg-type]


def test_it_accepts_values_on_closed_bounds_and_inside_open_ones() -> None:
    assert require_range("x", 0.0, 0.0, 1.0) == 0.0
    assert require_range("x", 1.0, 0.0, 1.0) == 1.0
    assert require_range("x", 0.5, 0.0, 1.0, lo_open=True, hi_open=True) == 0.5
    assert require_positive("x", 1e-300) == 1e-300
    assert require_non_negative("x", 0.0) == 0.0


def test_it_rejects_zero_as_positive_and_negative_as_non_negative() -> None:
    with pytest.raises(ValueError, match=r"^x must be in \(0, inf\)"):
        require_positive("x", 0.0)
    with pytest.raises(ValueError, match=r"^x must be in \[0, inf\)"):
        require_non_negative("x", -0.001)


def test_it_checks_integers_and_their_range() -> None:
    assert require_int("n", 3, 1, 5) == 3
    with pytest.raises(ValueError, match=r"^n must be an integer in \[1, 5\]"):
        require_int("n", 6, 1, 5)
    with pytest.raises(TypeError, match="^n"):
        require_int("n", 2.0, 1, 5)  # type: ignore[arg-type]
    with pytest.raises(TypeError, match="^n"):
        require_int("n", True)


def test_it_lists_the_allowed_choices() -> None:
    assert require_choice("phase", "mean", ("initial", "mean", "final")) == "mean"
    with pytest.raises(ValueError, match="^phase must be one of: final, initial, mean"):
        require_choice("phase", "average", ("initial", "mean", "final"))


def test_it_accepts_a_date_and_refuses_a_datetime() -> None:
    day = dt.date(2025, 3, 1)
    assert require_date("on", day) is day
    with pytest.raises(TypeError, match="^on"):
        require_date("on", dt.datetime(2025, 3, 1, tzinfo=dt.UTC))
    with pytest.raises(TypeError, match="^on"):
        require_date("on", "2025-03-01")  # type: ignore[arg-type]
