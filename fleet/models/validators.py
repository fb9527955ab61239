"""Field validators shared by the record models: finite numbers and plausible dates.

Django's form ``FloatField`` refuses NaN and infinity, but model validation does not:
``MinValueValidator(0)`` lets NaN through because every comparison with NaN is false. Every
``FloatField`` on a record carries ``finite`` so a value set in code, an import or the admin
is held to the same rule as a typed one.

Dates: nothing in the workshop predates 1980 (the oldest packs, rings and records a fleet
carries are far younger), and a year typed as 0001 or 9999 would overflow the date arithmetic
downstream (adding months, immersed days, time-zone shifts), so such dates are refused with a
message instead of failing later. The latest date anything may carry is today plus the
planning horizon (``not_beyond_horizon``); records that cannot lie in the future say so more
strictly in their ``clean()``.

Physical ranges are also database CHECK constraints (``range_checks``), so a row written
around the models (raw SQL, a bulk update) is held to the same numbers.
"""

import datetime as dt
import math
from collections.abc import Mapping, Sequence
from typing import Any

from django.core.exceptions import ImproperlyConfigured, ValidationError
from django.core.validators import MaxValueValidator, MinValueValidator
from django.db import models
from django.db.models import Q
from django.utils import timezone
from django.utils.text import capfirst

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


def latest_entry_date() -> dt.date:
    """The last date any typed date may take: today plus the planning horizon."""
    today: dt.date = timezone.localdate()
    return today + dt.timedelta(days=PLANNING_HORIZON_DAYS)


def not_beyond_horizon(value: dt.date | dt.datetime | None) -> None:
    """Refuse a date (or the date of a datetime) after today + ``PLANNING_HORIZON_DAYS``.

    Fields whose record cannot lie in the future say so in ``clean()``; this outer bound keeps
    a year such as 9999 away from the date arithmetic and time-zone shifts that would overflow.
    """
    if value is None:
        return
    day = value.date() if isinstance(value, dt.datetime) else value
    latest = latest_entry_date()
    if day > latest:
        raise ValidationError(
            "%(day)s is after %(latest)s, further ahead than anything is planned; check the year.",
            code="too_late",
            params={"day": day.isoformat(), "latest": latest.isoformat()},
        )


# Every date a person types is held to both bounds, on the model and on the form.
DATE_VALIDATORS = (not_before_1980, not_beyond_horizon)


def within_date_bounds(value: dt.date | dt.datetime | None) -> bool:
    """True when ``value`` is empty or passes ``DATE_VALIDATORS`` (for ``clean()`` methods that
    must not query or shift a date the field validators have already refused)."""
    try:
        for check in DATE_VALIDATORS:
            check(value)
    except ValidationError:
        return False
    return True


# Free text: long enough for any honest note, short enough that a pasted file is refused.
SUMMARY_MAX_CHARS = 2000
REASON_MAX_CHARS = 500


class RangeCheck(models.CheckConstraint):
    """A range CHECK built from a field's own bounds validators (``range_checks``).

    The database enforces it on every write. In Python, ``full_clean`` need not run it again:
    the field's validators (``MinValueValidator``, ``MaxValueValidator``, ``finite``) hold the
    value to the same bounds, and ``full_clean`` validates the constraints only of fields those
    validators passed, so the check could only pass. Running it would cost one query per
    check per object (Django evaluates a CheckConstraint with a query): a bulk import of
    100,000 readings would send 300,000 of them. Migrations see a plain CheckConstraint.
    """

    def validate(self, *args: Any, **kwargs: Any) -> None:
        return None

    def deconstruct(self) -> tuple[str, Sequence[Any], dict[str, Any]]:
        _, args, kwargs = super().deconstruct()
        return "django.db.models.CheckConstraint", args, kwargs


def range_checks(namespace: Mapping[str, object]) -> list[models.BaseConstraint]:
    """A database CHECK for each ``FloatField`` in a model's class body that carries a
    ``MinValueValidator`` and a ``MaxValueValidator``, built from those validators.

    Call it at the end of the class body with ``locals()`` (``Meta`` cannot see the fields)::

        Meta.constraints = [*Meta.constraints, *range_checks(locals())]

    Both bounds are required: PostgreSQL orders NaN above every number, so ``<= hi`` is what
    refuses a NaN there (SQLite stores a NaN as NULL, which a NOT NULL column refuses). A
    nullable column also accepts NULL.
    """
    checks: list[models.BaseConstraint] = []
    for name, field in namespace.items():
        if not isinstance(field, models.FloatField):
            continue
        lo = next(
            (v.limit_value for v in field.validators if isinstance(v, MinValueValidator)), None
        )
        hi = next(
            (v.limit_value for v in field.validators if isinstance(v, MaxValueValidator)), None
        )
        if lo is None and hi is None:
            continue
        if lo is None or hi is None:
            raise ImproperlyConfigured(f"{name} needs both a lower and an upper bound.")
        condition = Q(**{f"{name}__gte": lo, f"{name}__lte": hi})
        if field.null:
            condition |= Q(**{f"{name}__isnull": True})
        label = capfirst(str(field.verbose_name or name.replace("_", " ")))
        checks.append(
            RangeCheck(
                condition=condition,
                name=f"%(class)s_{name}_range",
                violation_error_message=f"{label} must lie between {lo:g} and {hi:g}.",
            )
        )
    return checks
