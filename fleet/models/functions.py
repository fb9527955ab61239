"""Database functions the ORM lacks, each written for both databases we run on."""

from __future__ import annotations

from typing import Any

from django.db.models import FloatField, Func


class EpochSeconds(Func):
    """A date-time column as seconds since 1970-01-01 00:00 UTC (a float), computed by the
    database, so that many rows read as plain numbers with no date-time conversion in Python.

    SQLite's ``julianday`` counts days from noon, 24 November 4714 BC, on which the Unix
    epoch is day 2440587.5 (SQLite documentation, "Date And Time Functions"); its double
    keeps about 50 microseconds at today's dates. PostgreSQL's ``EXTRACT(EPOCH FROM …)``
    gives a numeric (PostgreSQL 15 documentation, 9.9.1), cast to a double here.
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
            template="(EXTRACT(EPOCH FROM %(expressions)s)::double precision)",
            **extra,
        )
