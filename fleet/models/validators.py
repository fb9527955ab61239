"""Field validators shared by the record models: finite numbers and plausible dates.

Django's form ``FloatField`` refuses NaN and infinity, but model validation does not:
``MinValueValidator(0)`` lets NaN through because every comparison with NaN is false. Every
``FloatField`` on a record carries ``finite`` so a value set in code, an import or the admin
is held to the same rule as a typed one.

Dates: nothing in the workshop predates 1980 (the oldest packs, rings and records a fleet
carries are far younger), and a year typed as 0001 or 9999 would overflow the date arithmetic
downstream (adding months, immersed days, time-zone shifts), so such dates are refused with a
message instead of failing later.
"""

import datetime as dt
import math

from django.core.exceptions import ValidationError

EARLIEST_ENTRY_DATE = dt.date(1980, 1, 1)
# A planned deployment may start at most this many days ahead: far enough for a survey
# season's planning, near enough that start + planned days stays a real calendar date.
PLANNING_HORIZON_DAYS = 10 * 366


def finite(value: float | None) -> None:
    """Refuse NaN and ±infinity (``None`` is left to the field's ``null``/``blank``)."""
    if value is not None and not math.isfinite(value):
        raise ValidationError("Enter a finite number.", code="not_finite", params={"value": value})


def not_before_1980(value: dt.date | dt.datetime | None) -> None:
    """Refuse a date (or the date of a datetime) before 1 January 1980."""
    if value is None:
        return
    day = value.date() if isinstance(value, dt.datetime) else value
    if day < EARLIEST_ENTRY_DATE:
        raise ValidationError(
            "%(day)s is before 1 January 1980; check the year.",
            code="too_early",
            params={"day": day.isoformat()},
        )
