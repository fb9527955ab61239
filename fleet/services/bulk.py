"""New rows of one model in a few INSERTs, the statement written once: ``insert_new``.

``QuerySet.bulk_create`` compiles its INSERT again for every batch and, in doing so, passes
every value of every row through the compiler (expression checks, a placeholder per value,
the field's conversion); for a bulk import of 100,000 entries that is most of the write's
time. Here the statement for a batch size is written once and each value is converted by its
field's own ``get_db_prep_save``, as the compiler converts it, skipping only the call where
that conversion returns the value as it is (a ``float`` for a ``FloatField``, a ``bool`` for a
``BooleanField``, a ``str`` for a text field, an ``int`` for a key to an auto-increment
primary key, ``None`` for a nullable field other than a key).

Same rows as ``bulk_create``: each object's related objects are checked as it checks them
(``_prepare_related_fields_for_save``: an unsaved one refuses the write), each field's
``pre_save`` runs where the field defines one (``auto_now`` stamps, files), and the primary
keys are set on the objects. On SQLite the rows go in as Django sends them (VALUES rows) and
the keys come back from the INSERT (``RETURNING``). On PostgreSQL a batch's keys are drawn
from the table's sequence in one query and the rows sent with them by ``COPY``: the driver
writes each value in C, where an INSERT's parameters (Django's ``UNNEST`` of one array a
column included) are quoted in Python on the client side, most of the write's time for
100,000 rows; the server applies the same constraints, keys and triggers. A model or a
database this does not cover (no ``RETURNING`` on a multi-row INSERT, a key set by hand, a
field with its own placeholder or a database default) goes through ``bulk_create``.

``insert_rows`` writes rows given as plain values (no model instance) the same way, and
``insert_plain`` rows whose keys nothing needs.
"""

from __future__ import annotations

import functools
from collections.abc import Callable, Iterator, Sequence
from contextlib import contextmanager
from contextvars import ContextVar
from typing import Any, TypeVar

from django.db import models, transaction
from django.db.backends.base.base import BaseDatabaseWrapper
from django.db.backends.base.operations import BaseDatabaseOperations

M = TypeVar("M", bound=models.Model)

# Field classes whose conversion for the database returns a value of this exact type as it is
# (``get_prep_value``: ``float(value)``, ``to_python`` of a bool or a str); neither class, nor
# any subclass below, overrides ``get_db_prep_value``.
_AS_IS: tuple[tuple[type[models.Field[Any, Any]], type], ...] = (
    (models.FloatField, float),
    (models.BooleanField, bool),
    (models.CharField, str),
    (models.TextField, str),
)

Convert = Callable[[Any], Any]


def _as_is_type(field: models.Field[Any, Any]) -> type | None:
    for cls, kind in _AS_IS:
        if type(field) is cls or (
            isinstance(field, cls) and "get_db_prep_value" not in vars(type(field))
        ):
            return kind
    return None


def _serial_key(field: models.Field[Any, Any], connection: BaseDatabaseWrapper) -> bool:
    """A foreign key to an auto-increment primary key: an ``int`` goes in as it is
    (``ForeignKey.get_db_prep_save`` hands it to the key, whose ``get_prep_value`` is
    ``int(value)`` and whose database check, on these databases, returns it unchanged)."""
    target = getattr(field, "target_field", None)
    return (
        isinstance(field, models.ForeignKey)
        and isinstance(target, models.AutoField | models.BigAutoField | models.SmallAutoField)
        and type(connection.ops).validate_autopk_value
        is BaseDatabaseOperations.validate_autopk_value
    )


def _converter(field: models.Field[Any, Any], connection: BaseDatabaseWrapper) -> Convert:
    """The field's conversion of a value for the INSERT, as the compiler applies it."""
    prep = field.get_db_prep_save
    kind = int if _serial_key(field, connection) else _as_is_type(field)
    keep_none = field.null and not field.is_relation and kind is not None

    def convert(value: Any) -> Any:
        if type(value) is kind or (value is None and keep_none):
            return value
        return prep(value, connection)

    return convert


def reads_as_given(field: models.Field[Any, Any]) -> bool:
    """Whether an INSERT takes the field's value as the object holds it (its class defines
    no ``pre_save`` that may change it: no stamp, no file)."""
    own = type(field).pre_save
    stamps = getattr(field, "auto_now", False) or getattr(field, "auto_now_add", False)
    return own is models.Field.pre_save or (
        own in (models.DateField.pre_save, models.DateTimeField.pre_save, models.TimeField.pre_save)
        and not stamps
    )


def _reader(field: models.Field[Any, Any]) -> Callable[[models.Model], Any]:
    """The value an INSERT takes from an object: the field's ``pre_save`` where its class
    defines one that may change it, else the attribute."""
    attname = field.attname
    if reads_as_given(field):
        return lambda obj: getattr(obj, attname)
    return lambda obj: field.pre_save(obj, True)


def _covered(model: type[models.Model], objs: Sequence[models.Model], connection: Any) -> bool:
    meta = model._meta
    pk = meta.pk
    if not connection.features.can_return_rows_from_bulk_insert:
        return False
    if not isinstance(pk, models.AutoField | models.BigAutoField | models.SmallAutoField):
        return False
    if meta.parents or any(type(obj) is not model or obj.pk is not None for obj in objs):
        return False
    for field in meta.concrete_fields:
        if field.generated or field.has_db_default() or hasattr(field, "get_placeholder"):
            return False
        if field is not pk and field.db_returning:
            return False
    return True


def _statement(
    connection: BaseDatabaseWrapper, model: type[models.Model], fields: list[Any], size: int
) -> str:
    """The INSERT of ``size`` rows, the new keys returned (in the rows' order)."""
    meta = model._meta
    quote = connection.ops.quote_name
    head = f"INSERT INTO {quote(meta.db_table)} ({', '.join(quote(f.column) for f in fields)})"
    tail = f"RETURNING {quote(meta.db_table)}.{quote(str(meta.pk.column))}"
    row = f"({', '.join(['%s'] * len(fields))})"
    return f"{head} VALUES {', '.join([row] * size)} {tail}"


def insert_new(objs: Sequence[M], *, batch_size: int) -> None:
    """Insert ``objs`` (new objects of one model, no primary key set) as ``bulk_create`` with
    ``batch_size`` would, setting each object's primary key."""
    if not objs:
        return
    model = type(objs[0])
    connection = transaction.get_connection()
    if not _covered(model, objs, connection):
        model._default_manager.bulk_create(objs, batch_size=batch_size)
        return
    pk = model._meta.pk
    fields = [f for f in model._meta.concrete_fields if f is not pk]
    pairs = [(_reader(f), _converter(f, connection)) for f in fields]
    statements: dict[int, str] = {}
    # As ``bulk_create`` bounds a batch (SQLite: at most 999 parameters a statement).
    batch_size = max(1, min(batch_size, connection.ops.bulk_batch_size(fields, objs)))
    for start in range(0, len(objs), batch_size):
        batch = objs[start : start + batch_size]
        rows: list[list[Any]] = []
        for obj in batch:
            # Django's own check before a bulk insert (not in the type stubs).
            obj._prepare_related_fields_for_save(operation_name="bulk_create")  # type: ignore[attr-defined]
            rows.append([convert(read(obj)) for read, convert in pairs])
        keys = _write(connection, model, fields, rows, statements)
        for obj, key in zip(batch, keys, strict=True):
            obj.pk = key
            obj._state.adding = False
            obj._state.db = connection.alias


def insert_plain(
    model: type[models.Model], names: Sequence[str], rows: Sequence[Sequence[Any]]
) -> None:
    """Insert plain parameter rows (values ready for the database, in the order of ``names``,
    no key wanted back): on PostgreSQL by ``COPY`` (the driver writes each value; the same
    checks, keys and triggers as an INSERT), else one statement run for each row
    (``executemany``)."""
    if not rows:
        return
    connection = transaction.get_connection()
    meta = model._meta
    fields: list[Any] = [meta.get_field(name) for name in names]
    quote = connection.ops.quote_name
    table, columns = quote(meta.db_table), ", ".join(quote(f.column) for f in fields)
    with connection.cursor() as cursor:
        if connection.vendor == "postgresql":
            with cursor.cursor.copy(f"COPY {table} ({columns}) FROM STDIN") as copy:
                for row in rows:
                    copy.write_row(row)
        else:
            marks = ", ".join(["%s"] * len(fields))
            cursor.executemany(f"INSERT INTO {table} ({columns}) VALUES ({marks})", rows)


def insert_rows(
    model: type[models.Model], rows: Sequence[dict[str, Any]], *, batch_size: int
) -> list[int]:
    """Insert new rows of ``model`` given as plain values by attribute name (``record_id``,
    ``mass_g``), not as objects, and return their new keys in the rows' order.

    Each value is converted by its field as ``insert_new`` converts it. A field missing from
    a row stores what a new object stores: its default (called again for each row where it
    is callable, a fresh ``uid``), or else the value a blank object's field gives an INSERT
    (an empty file field, for instance). A given value must be a field's own: a field whose
    ``pre_save`` may change it (a stamp, a file) is refused.

    Written as ``insert_new`` writes, by batches of ``batch_size`` rows at most: on
    PostgreSQL the keys drawn from the table's sequence and the rows sent by ``COPY``, on
    SQLite VALUES rows with the keys read back by ``RETURNING``."""
    if not rows:
        return []
    connection = transaction.get_connection()
    meta = model._meta
    pk = meta.pk
    if not isinstance(pk, models.AutoField | models.BigAutoField | models.SmallAutoField):
        raise ValueError(f"{model.__name__}: insert_rows needs an automatic primary key.")
    fields = [f for f in meta.concrete_fields if f is not pk]
    given = set().union(*(row.keys() for row in rows))
    fill = _fillers(model, fields, given, connection)
    converters = [_converter(f, connection) for f in fields]
    names = [f.attname for f in fields]
    values = [
        [
            convert(row[name]) if name in row else filler()
            for name, convert, filler in zip(names, converters, fill, strict=True)
        ]
        for row in rows
    ]
    keys: list[int] = []
    batch_size = max(1, min(batch_size, connection.ops.bulk_batch_size(fields, rows)))
    statements: dict[int, str] = {}
    for start in range(0, len(values), batch_size):
        keys.extend(
            _write(connection, model, fields, values[start : start + batch_size], statements)
        )
    return keys


def _write(
    connection: BaseDatabaseWrapper,
    model: type[models.Model],
    fields: list[models.Field[Any, Any]],
    rows: list[list[Any]],
    statements: dict[int, str],
) -> list[int]:
    """Insert one batch of converted rows; their new keys, in order."""
    if connection.vendor == "postgresql":
        return _copy_with_keys(connection, model, fields, rows)
    size = len(rows)
    if size not in statements:
        statements[size] = _statement(connection, model, fields, size)
    with connection.cursor() as cursor:
        cursor.execute(statements[size], [value for row in rows for value in row])
        return [found[0] for found in cursor.fetchall()]


def _fillers(
    model: type[models.Model],
    fields: list[models.Field[Any, Any]],
    given: set[str],
    connection: BaseDatabaseWrapper,
) -> list[Callable[[], Any]]:
    """For each field, what a row that does not give it stores."""
    blank = model()
    fill: list[Callable[[], Any]] = []
    for f in fields:
        if f.attname in given and not reads_as_given(f):
            raise ValueError(f"{model.__name__}.{f.name} is set on save; give an object.")
        if not reads_as_given(f):
            fill.append(functools.partial(_saved, f, blank, connection))
        elif f.has_default() and callable(f.default):
            fill.append(functools.partial(_fresh_default, f, connection))
        else:
            stored = f.get_db_prep_save(getattr(blank, f.attname), connection)
            fill.append(functools.partial(_same, stored))
    return fill


def _saved(field: Any, blank: models.Model, connection: BaseDatabaseWrapper) -> Any:
    return field.get_db_prep_save(field.pre_save(blank, True), connection)


def _fresh_default(field: Any, connection: BaseDatabaseWrapper) -> Any:
    return field.get_db_prep_save(field.get_default(), connection)


def _same(value: Any) -> Any:
    return value


def _copy_with_keys(
    connection: BaseDatabaseWrapper,
    model: type[models.Model],
    fields: list[models.Field[Any, Any]],
    values: list[list[Any]],
) -> list[int]:
    meta = model._meta
    quote = connection.ops.quote_name
    table, key = meta.db_table, str(meta.pk.column)
    with connection.cursor() as cursor:
        keys = _keys(cursor, table, key, len(values))
        columns = ", ".join(quote(c) for c in [key, *(str(f.column) for f in fields)])
        with cursor.cursor.copy(f"COPY {quote(table)} ({columns}) FROM STDIN") as copy:
            for found, row in zip(keys, values, strict=True):
                copy.write_row([found, *row])
    return keys


# Keys drawn ahead within ``drawing_keys_ahead``: table -> keys drawn and not yet used.
_drawn: ContextVar[dict[str, list[int]] | None] = ContextVar("holdfast_drawn_keys", default=None)
KEYS_AHEAD = 5000


@contextmanager
def drawing_keys_ahead() -> Iterator[None]:
    """Within this, PostgreSQL keys for new rows are drawn from each table's sequence at
    least ``KEYS_AHEAD`` at a time and the rest kept for the next batch: a bulk write of many
    small batches (the import, one unit's visits at a time) asks the database for keys a few
    times instead of once a batch. A sequence never hands out a key twice, so a key drawn and
    not used is only a gap, as a rolled-back insert leaves one."""
    token = _drawn.set({})
    try:
        yield
    finally:
        _drawn.reset(token)


def _keys(cursor: Any, table: str, key: str, count: int) -> list[int]:
    """``count`` new keys of ``table`` from its sequence, in increasing order."""
    drawn = _drawn.get()
    ahead = drawn.setdefault(table, []) if drawn is not None else []
    if len(ahead) < count:
        wanted = count - len(ahead) + (KEYS_AHEAD if drawn is not None else 0)
        cursor.execute(
            "SELECT nextval(pg_get_serial_sequence(%s, %s)) FROM generate_series(1, %s)",
            [table, key, wanted],
        )
        ahead.extend(sorted(found[0] for found in cursor.fetchall()))
    keys = ahead[:count]
    del ahead[:count]
    return keys
