"""Database functions the ORM lacks, each written for both databases we run on."""

from __future__ import annotations

import datetime as dt
from collections.abc import Sequence
from typing import Any

from django.core.exceptions import FieldDoesNotExist
from django.db.models import DateField, DateTimeField, Field, FloatField, Func, Model


class EpochSeconds(Func):
    """A date-time column as seconds since 1970-01-01 00:00 UTC (a float), computed by the
    database, so that many rows read as plain numbers with no date-time conversion in Python.

    SQLite's ``julianday`` counts days from noon, 24 November 4714 BC, on which the Unix
    epoch is day 2440587.5 (SQLite documentation, "Date And Time Functions"); its double
    keeps about 50 microseconds at today's dates. On PostgreSQL ``date_part('epoch', …)``
    gives the double itself (PostgreSQL 15 documentation, 9.9.1: ``date_part`` returns
    double precision, ``EXTRACT`` a numeric). It is the value ``EXTRACT(EPOCH FROM …)`` cast
    to a double gives (both the microseconds divided by a million, correctly rounded; equal
    for the opening and closing of every one of the 332,005 visits of the 5,000-unit
    benchmark fleet) without the numeric arithmetic: over those openings, 86 against 190 ms.
    """

    output_field = FloatField()
    arity = 1

    def as_sqlite(self, compiler: Any, connection: Any, **extra: Any) -> Any:
        return self.as_sql(
            compiler,
            connection,
            template="((julianday(%(expressions)s) - 2440587.5) * 86400.0)",
            **extra,
        )

    def as_postgresql(self, compiler: Any, connection: Any, **extra: Any) -> Any:
        return self.as_sql(
            compiler,
            connection,
            template="date_part('epoch', %(expressions)s)",
            **extra,
        )

    def get_db_converters(self, connection: Any) -> list[Any]:
        # Both templates give a double (or NULL), which the drivers read as a float: no
        # ``float()`` call a row, which a query with no converter left skips entirely.
        return []


class AsStored(Func):
    """A column as the driver gives it, with no conversion in Python: for reads of many rows
    whose values are used as they come (a boolean read as 0 or 1 on SQLite, True or False
    on PostgreSQL, is only tested). On SQLite the column is read as an expression
    (``+column``), which the driver does not decode by its declared type either."""

    template = "%(expressions)s"
    arity = 1
    output_field: Field[Any, Any] = Field()  # no converter of the backend's

    def as_sqlite(self, compiler: Any, connection: Any, **extra: Any) -> Any:
        return self.as_sql(compiler, connection, template="+%(expressions)s", **extra)

    def get_db_converters(self, connection: Any) -> list[Any]:
        return []


class Instant(AsStored):
    """A date-time column read with the least conversion per row, the same value Django
    gives, for reads of a whole history (a third of a million visits): as ISO 8601 text
    with its offset, parsed by ``datetime.fromisoformat`` alone. On SQLite the stored text
    itself (in UTC, as Django writes it unless the database names another time zone),
    where Django would convert twice; on PostgreSQL the instant written out in UTC by the
    server (``to_char``, to the microsecond), where the driver's date-time loader is
    Python code (some 20 µs a value)."""

    def as_sqlite(self, compiler: Any, connection: Any, **extra: Any) -> Any:
        # Stored in the connection's time zone: its offset is written only for UTC, and
        # any other zone is set on the parsed value (``_instant``).
        utc = connection.timezone_name == "UTC"
        template = "(+%(expressions)s || '+00:00')" if utc else "+%(expressions)s"
        return self.as_sql(compiler, connection, template=template, **extra)

    def as_postgresql(self, compiler: Any, connection: Any, **extra: Any) -> Any:
        template = (
            "to_char(%(expressions)s AT TIME ZONE 'UTC', 'YYYY-MM-DD\"T\"HH24:MI:SS.US\"+00:00\"')"
        )
        return self.as_sql(compiler, connection, template=template, **extra)

    def get_db_converters(self, connection: Any) -> list[Any]:
        return [_instant]


def _instant(value: Any, expression: Any, connection: Any) -> Any:
    """The text read as an aware date-time (None stays None)."""
    if value is None:
        return None
    parsed = dt.datetime.fromisoformat(value)
    if parsed.tzinfo is None:
        return parsed.replace(tzinfo=connection.timezone)
    return parsed


class Day(AsStored):
    """A date column read with the least conversion per row, the same value Django gives:
    on SQLite the stored ISO 8601 text parsed by ``date.fromisoformat`` alone (where the
    driver and Django would each convert it); on PostgreSQL the driver's date."""

    def get_db_converters(self, connection: Any) -> list[Any]:
        # None on PostgreSQL: a call per value that would hand the driver's date back.
        return [_day] if connection.vendor == "sqlite" else []


def _day(value: Any, expression: Any, connection: Any) -> Any:
    return dt.date.fromisoformat(value) if isinstance(value, str) else value


def plain_columns(model: type[Model], paths: Sequence[str]) -> list[Any]:
    """``paths`` (as ``values_list`` takes them, across relations) for reading many rows:
    each date-time column as ``Instant`` and each date column as ``Day`` reads it, anything
    else (other columns, annotations) as named. The values are those Django reads."""
    columns: list[Any] = []
    for path in paths:
        *relations, name = path.split("__")
        current: Any = model
        field: Any = None
        try:
            for relation in relations:
                current = current._meta.get_field(relation).related_model
            field = current._meta.get_field(name)
        except FieldDoesNotExist:  # an annotation, or "pk"
            pass
        if isinstance(field, DateTimeField):
            columns.append(Instant(path))
        elif isinstance(field, DateField):
            columns.append(Day(path))
        else:
            columns.append(path)
    return columns
