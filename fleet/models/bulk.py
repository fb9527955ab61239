"""Inserting many derived rows at once, for both databases we run on.

``bulk_create`` prepares every value of every row through its field (some ten calls per
value), sends at most 999 parameters a statement on SQLite (38 rows of a 26-column table)
and, on PostgreSQL, quotes its arrays of values in Python. The derived state rows
(``fleet/models/state.py``) are rewritten by the hundred thousand by ``rebuild_state``, so
they are inserted here instead, with no model instance required and no primary key read
back: on SQLite one statement run once per row (``executemany``: prepared once), each
value adapted only where the database needs it (a date, a time or a date-time, exactly as
``bulk_create`` adapts it); on PostgreSQL by ``COPY … FROM STDIN``, one stream per call,
the driver writing each value (the same checks, keys and triggers as an ``INSERT``). For
rows whose ids nothing keeps: the caller deletes the rows it replaces in the same
transaction.

Rows that keep their ids are changed in place by ``update_instances``: one ``UPDATE`` run
once per row (``executemany``), the values adapted as above. ``bulk_update`` instead builds
one ``CASE WHEN`` expression for every field of every row and resolves and compiles each in
Python, which cost a fifth of a bench-visit save for one unit's anode rows.
"""

from __future__ import annotations

from collections.abc import Callable, Iterable, Sequence
from typing import Any

from django.db import connection, models

Adapter = Callable[[Any], Any]


def _same(value: Any) -> Any:
    return value


def _float(value: Any) -> Any:
    return None if value is None else float(value)


def _adapter(field: models.Field[Any, Any]) -> Adapter:
    """How a value of ``field`` goes to the database: what ``get_db_prep_save`` does for the
    plain values the derived rows hold (the backend's date adapters; a float as a float)."""
    ops = connection.ops
    kind = field.get_internal_type()
    if kind == "DateTimeField":
        return ops.adapt_datetimefield_value
    if kind == "DateField":
        return ops.adapt_datefield_value
    if kind == "TimeField":
        return ops.adapt_timefield_value
    if kind == "FloatField":
        return _float
    return _same


def insert_values(
    model: type[models.Model], names: Sequence[str], rows: Iterable[Sequence[Any]]
) -> int:
    """Insert ``rows`` (each the values of ``names``, attribute names such as ``unit_id``,
    in that order) into ``model``'s table; the number of rows."""
    stored = {f.attname: f for f in model._meta.concrete_fields}
    fields = [stored[name] for name in names]
    qn = connection.ops.quote_name
    columns = ", ".join(qn(str(f.column)) for f in fields)
    table = qn(model._meta.db_table)
    if connection.vendor == "postgresql":
        return _copy(f"COPY {table} ({columns}) FROM STDIN", rows)
    adapters = [_adapter(f) for f in fields]
    needs = [i for i, a in enumerate(adapters) if a is not _same]
    params = []
    for row in rows:
        values = list(row)
        for i in needs:
            values[i] = adapters[i](values[i])
        params.append(values)
    if not params:
        return 0
    marks = ", ".join(["%s"] * len(fields))
    sql = f"INSERT INTO {table} ({columns}) VALUES ({marks})"
    with connection.cursor() as cursor:
        cursor.executemany(sql, params)
    return len(params)


def copy_prepared(
    model: type[models.Model], columns: Sequence[str], rows: Iterable[Sequence[Any]]
) -> int:
    """PostgreSQL only: ``rows`` (each the values of ``columns``, column names, already
    prepared for the database as ``get_db_prep_save`` prepares them) into ``model``'s table
    by ``COPY … FROM STDIN``; the number of rows."""
    if connection.vendor != "postgresql":
        raise NotImplementedError("COPY is PostgreSQL's")
    qn = connection.ops.quote_name
    listed = ", ".join(qn(c) for c in columns)
    return _copy(f"COPY {qn(model._meta.db_table)} ({listed}) FROM STDIN", rows)


def _copy(sql: str, rows: Iterable[Sequence[Any]]) -> int:
    count = 0
    with connection.cursor() as cursor, cursor.cursor.copy(sql) as copy:
        for row in rows:
            copy.write_row(row)
            count += 1
    return count


def field_names(model: type[models.Model]) -> tuple[str, ...]:
    """The attribute names of ``model``'s stored fields but an automatic primary key."""
    auto = model._meta.auto_field
    return tuple(f.attname for f in model._meta.concrete_fields if f is not auto)


def insert_instances(objs: Sequence[models.Model]) -> int:
    """Insert unsaved instances of one model (their primary keys are not read back)."""
    if not objs:
        return 0
    model = type(objs[0])
    names = field_names(model)
    return insert_values(model, names, ([getattr(o, n) for n in names] for o in objs))


def update_instances(objs: Sequence[models.Model], names: Sequence[str]) -> int:
    """Write the attributes ``names`` (attribute names such as ``unit_id``) of saved instances
    of one model to their rows, by primary key; the number of rows. Nothing else of the rows
    changes, and nothing is read back."""
    if not objs:
        return 0
    model = type(objs[0])
    stored = {f.attname: f for f in model._meta.concrete_fields}
    fields = [stored[name] for name in names]
    qn = connection.ops.quote_name
    assignments = ", ".join(f"{qn(str(f.column))} = %s" for f in fields)
    pk = model._meta.pk
    assert pk is not None
    sql = f"UPDATE {qn(model._meta.db_table)} SET {assignments} WHERE {qn(str(pk.column))} = %s"
    adapters = [_adapter(f) for f in fields]
    params = [
        [*(adapt(getattr(o, n)) for adapt, n in zip(adapters, names, strict=True)), o.pk]
        for o in objs
    ]
    with connection.cursor() as cursor:
        cursor.executemany(sql, params)
    return len(params)
