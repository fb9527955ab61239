"""Argument guards shared by every calc module.

Each guard returns the value (as ``float`` for numbers) so a function can write
``depth_m = require_range("depth_m", depth_m, 0.0, 11000.0)`` and carry on.  Every
error message starts with the argument name and states the allowed range, so a form or
an import can show it to the person who typed the number.
"""

from __future__ import annotations

import datetime as dt
import math
from collections.abc import Collection
from numbers import Real

_INF = math.inf


def _fmt(value: float) -> str:
    return f"{value:g}"


def require_finite(name: str, value: float) -> float:
    """Return ``value`` as a float; raise if it is not a finite real number.

    ``bool`` is refused: ``True`` as a depth is always a mistake.
    """
    # The common cases first: ``isinstance(value, Real)`` goes through the ABC machinery,
    # a cost the whole-fleet planner pays tens of thousands of times. (NaN fails both
    # comparisons.)
    if type(value) is float and -_INF < value < _INF:
        return value
    if type(value) is not float and type(value) is not int:
        if isinstance(value, bool) or not isinstance(value, Real):
            raise TypeError(f"{name} must be a real number, got {type(value).__name__}")
    result = float(value)
    if not math.isfinite(result):
        raise ValueError(f"{name} must be a finite number, got {value!r}")
    return result


def require_range(
    name: str,
    value: float,
    lo: float | None = None,
    hi: float | None = None,
    *,
    lo_open: bool = False,
    hi_open: bool = False,
    unit: str = "",
) -> float:
    """Return ``value`` if it is finite and inside the interval, else raise ``ValueError``.

    ``lo``/``hi`` of ``None`` leave that side unbounded; ``lo_open``/``hi_open`` exclude
    the bound itself.  Example: ``require_range("u", 0.0, 0.0, 1.0, lo_open=True)``
    raises ``ValueError("u must be in (0, 1], got 0.0")``.
    """
    result = require_finite(name, value)
    too_low = lo is not None and (result <= lo if lo_open else result < lo)
    too_high = hi is not None and (result >= hi if hi_open else result > hi)
    if too_low or too_high:
        left = "-inf" if lo is None else _fmt(lo)
        right = "inf" if hi is None else _fmt(hi)
        lb = "(" if lo_open or lo is None else "["
        rb = ")" if hi_open or hi is None else "]"
        suffix = f" {unit}" if unit else ""
        raise ValueError(f"{name} must be in {lb}{left}, {right}{rb}{suffix}, got {value!r}")
    return result


def require_positive(name: str, value: float, *, unit: str = "") -> float:
    """Strictly positive finite number: ``(0, inf)``."""
    if type(value) is float and 0.0 < value < _INF:  # the common case, without the calls
        return value
    return require_range(name, value, 0.0, None, lo_open=True, unit=unit)


def require_non_negative(name: str, value: float, *, unit: str = "") -> float:
    """Finite number not below zero: ``[0, inf)``."""
    if type(value) is float and 0.0 <= value < _INF:  # the common case, without the calls
        return value
    return require_range(name, value, 0.0, None, unit=unit)


def require_int(name: str, value: int, lo: int | None = None, hi: int | None = None) -> int:
    """An ``int`` (not ``bool``) inside ``[lo, hi]``."""
    if isinstance(value, bool) or not isinstance(value, int):
        raise TypeError(f"{name} must be an integer, got {type(value).__name__}")
    if (lo is not None and value < lo) or (hi is not None and value > hi):
        left = "-inf" if lo is None else str(lo)
        right = "inf" if hi is None else str(hi)
        raise ValueError(f"{name} must be an integer in [{left}, {right}], got {value!r}")
    return value


def require_choice(name: str, value: str, choices: Collection[str]) -> str:
    """``value`` must be one of ``choices`` (exact match)."""
    if value not in choices:
        allowed = ", ".join(sorted(choices))
        raise ValueError(f"{name} must be one of: {allowed}; got {value!r}")
    return value


def require_date(name: str, value: dt.date) -> dt.date:
    """A calendar ``date``; a ``datetime`` is refused so no time zone slips in."""
    if isinstance(value, dt.datetime) or not isinstance(value, dt.date):
        raise TypeError(f"{name} must be a datetime.date, got {type(value).__name__}")
    return value
