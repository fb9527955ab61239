"""Day arithmetic for the rules, written once.

Rules count time in days (floats, for immersed time and charge) and state due dates as
calendar days in the workshop's time zone (``settings.TIME_ZONE``). Everything here is a
pure function of its arguments except ``start_of`` and ``local_day``, which read the
configured time zone (never the clock).
"""

from __future__ import annotations

import datetime as dt
import math

from django.utils import timezone

from fleet.calc.exposure import SECONDS_PER_DAY
from fleet.calc.seals import add_months

__all__ = [
    "HORIZON_DAYS",
    "OPEN_END",
    "add_days",
    "add_months",
    "days_between",
    "local_day",
    "start_of",
]

# A projection further out than this says nothing useful (a unit that never goes back in the
# water wears nothing): it is shown as "beyond the horizon" and has no due date. 200 years is
# far beyond any unit's life and well inside ``datetime.date``'s range.
HORIZON_DAYS = 365 * 200

# The open end of a window that has none (a fitted pack is still fitted): a moment after any
# record can be dated, still far from ``datetime.max`` so adding a few days cannot overflow.
OPEN_END = dt.datetime(9000, 1, 1, tzinfo=dt.UTC)


def days_between(start: dt.datetime, end: dt.datetime) -> float:
    """Days from ``start`` to ``end`` (negative when ``end`` is earlier)."""
    return (end - start).total_seconds() / SECONDS_PER_DAY


def add_days(moment: dt.datetime, days: float) -> dt.date | None:
    """The local calendar day ``days`` after ``moment``; None past the horizon.

    Adding to a moment (not to a date) keeps the result independent of the hour a projection
    happens to be computed at.
    """
    if not math.isfinite(days) or days > HORIZON_DAYS:
        return None
    return local_day(moment + dt.timedelta(days=days))


def start_of(day: dt.date) -> dt.datetime:
    """Midnight at the start of ``day`` in the workshop's time zone."""
    return timezone.make_aware(dt.datetime.combine(day, dt.time.min))


def local_day(moment: dt.datetime) -> dt.date:
    """The workshop's calendar day of an aware moment."""
    return timezone.localdate(moment)
