"""Closed means closed, in the database too.

A closed service record and its entries are guarded by database triggers (PostgreSQL and
SQLite; migration ``0014_closed_records_guarded``): an UPDATE or DELETE of a closed record's
row, or of a row of an entry whose record is closed, is refused with an integrity error,
whatever sends it (a service, ``QuerySet.update()``, raw SQL, the admin, a shell).

Two narrow doors, each opened only inside one transaction by one service:

- **amending** (``amendment_create``): the transaction may change the *amendable* columns of
  closed rows (the record's summary, version and last-changed columns; each entry kind's
  ``amendable_fields``). Every other column (the record link, the unit, a position, a photo,
  ``closed_at``) stays refused, and deletion too.
- **purging** (``fleet.demo.loading.delete_demo`` and the test database's flush on SQLite):
  the transaction may delete closed rows.

How a transaction opens a door:

- PostgreSQL: a transaction-local setting, ``set_config('holdfast.amending', 'on', true)``
  (the same as ``SET LOCAL``); the trigger reads ``current_setting('holdfast.amending', true)``.
  It ends with the transaction, and the service turns it off again before returning so that a
  caller's enclosing transaction does not inherit it.
- SQLite has no session variables: the service inserts a row into the one-row-per-purpose
  table ``fleet_amendment_marker`` and deletes it again before the transaction ends; the
  triggers check ``EXISTS``. SQLite runs one writing transaction at a time (IMMEDIATE
  transactions), so no other writer ever sees the row, and a rollback removes it.

The doors stop mistakes (a stray ``.update()``, a bug that saves a stale copy), not someone
with raw database access, who could open them too.

Adding an entry kind: its migration adds the guard for its table with
``guard_entry_table_operation(table, amendable)`` (see DEVELOPERS.md).
"""

from collections.abc import Callable, Iterator, Sequence
from contextlib import contextmanager
from typing import Any

from django.db import migrations, transaction
from django.db.backends.base.base import BaseDatabaseWrapper
from django.db.backends.base.schema import BaseDatabaseSchemaEditor

MARKER_TABLE = "fleet_amendment_marker"
RECORD_TABLE = "fleet_servicerecord"
# Columns of a closed record's row an amendment may change.
RECORD_AMENDABLE_COLUMNS: tuple[str, ...] = ("summary", "version", "updated_at", "updated_by_id")

AMENDING = "amending"
PURGING = "purging"


def _switch(connection: BaseDatabaseWrapper, purpose: str, on: bool) -> None:
    with connection.cursor() as cursor:
        if connection.vendor == "postgresql":
            cursor.execute(
                "SELECT set_config(%s, %s, true)", [f"holdfast.{purpose}", "on" if on else "off"]
            )
        elif connection.vendor == "sqlite":
            if on:
                cursor.execute(f"INSERT INTO {MARKER_TABLE} (purpose) VALUES (%s)", [purpose])
            else:
                cursor.execute(f"DELETE FROM {MARKER_TABLE} WHERE purpose = %s", [purpose])


@contextmanager
def _door(purpose: str) -> Iterator[None]:
    connection = transaction.get_connection()
    if not connection.in_atomic_block:
        raise RuntimeError(f"The {purpose} marker is only set inside a transaction.")
    _switch(connection, purpose, True)
    # On an error the enclosing atomic block rolls back, which removes the marker with it.
    yield
    _switch(connection, purpose, False)


def amending() -> Any:
    """Within an atomic block: let this transaction change amendable columns of closed rows."""
    return _door(AMENDING)


def purging() -> Any:
    """Within an atomic block: let this transaction delete closed records and their entries."""
    return _door(PURGING)


# --- trigger SQL ----------------------------------------------------------------------------

_PG_FUNCTIONS = [
    """
CREATE OR REPLACE FUNCTION holdfast_door_open(purpose text) RETURNS boolean
LANGUAGE sql STABLE AS $$
    SELECT coalesce(current_setting('holdfast.' || purpose, true), '') = 'on'
$$;
""",
    f"""
CREATE OR REPLACE FUNCTION holdfast_guard_closed_record() RETURNS trigger
LANGUAGE plpgsql AS $$
BEGIN
    IF OLD.closed_at IS NULL THEN
        IF TG_OP = 'DELETE' THEN RETURN OLD; END IF;
        RETURN NEW;
    END IF;
    IF TG_OP = 'DELETE' THEN
        IF holdfast_door_open('{PURGING}') THEN RETURN OLD; END IF;
        RAISE EXCEPTION 'Service record % is closed and cannot be deleted.', OLD.id
            USING ERRCODE = 'integrity_constraint_violation';
    END IF;
    IF NOT holdfast_door_open('{AMENDING}') THEN
        RAISE EXCEPTION 'Service record % is closed; correct it with an amendment.', OLD.id
            USING ERRCODE = 'integrity_constraint_violation';
    END IF;
    IF (to_jsonb(NEW) - TG_ARGV) IS DISTINCT FROM (to_jsonb(OLD) - TG_ARGV) THEN
        RAISE EXCEPTION 'Service record % is closed; an amendment changes only %.', OLD.id,
            array_to_string(TG_ARGV, ', ')
            USING ERRCODE = 'integrity_constraint_violation';
    END IF;
    RETURN NEW;
END
$$;
""",
    f"""
CREATE OR REPLACE FUNCTION holdfast_guard_closed_entry() RETURNS trigger
LANGUAGE plpgsql AS $$
DECLARE
    closed boolean;
BEGIN
    SELECT EXISTS (
        SELECT 1 FROM {RECORD_TABLE} r
        WHERE r.closed_at IS NOT NULL
          AND (r.id = OLD.record_id OR (TG_OP = 'UPDATE' AND r.id = NEW.record_id))
    ) INTO closed;
    IF NOT closed THEN
        IF TG_OP = 'DELETE' THEN RETURN OLD; END IF;
        RETURN NEW;
    END IF;
    IF TG_OP = 'DELETE' THEN
        IF holdfast_door_open('{PURGING}') THEN RETURN OLD; END IF;
        RAISE EXCEPTION 'This % belongs to a closed service record and cannot be deleted.',
            TG_TABLE_NAME USING ERRCODE = 'integrity_constraint_violation';
    END IF;
    IF NOT holdfast_door_open('{AMENDING}') THEN
        RAISE EXCEPTION 'This % belongs to a closed service record; correct it with an '
            'amendment.', TG_TABLE_NAME USING ERRCODE = 'integrity_constraint_violation';
    END IF;
    IF (to_jsonb(NEW) - TG_ARGV) IS DISTINCT FROM (to_jsonb(OLD) - TG_ARGV) THEN
        RAISE EXCEPTION 'This % belongs to a closed service record; an amendment changes only '
            '%.', TG_TABLE_NAME, array_to_string(TG_ARGV, ', ')
            USING ERRCODE = 'integrity_constraint_violation';
    END IF;
    RETURN NEW;
END
$$;
""",
]


def _pg_args(amendable: Sequence[str]) -> str:
    return ", ".join(f"'{column}'" for column in amendable)


def _trigger_name(table: str, suffix: str = "") -> str:
    return f"holdfast_closed_{table}{suffix}"


def _door_sql(purpose: str) -> str:
    return f"EXISTS (SELECT 1 FROM {MARKER_TABLE} WHERE purpose = '{purpose}')"


def _frozen_differs(columns: Sequence[str], amendable: Sequence[str]) -> str:
    frozen = [c for c in columns if c not in amendable]
    return " OR ".join(f'NEW."{c}" IS NOT OLD."{c}"' for c in frozen) or "0"


def record_guard_sql(vendor: str, columns: Sequence[str]) -> tuple[list[str], list[str]]:
    """(create, drop) statements guarding the service record table; ``columns`` are the
    table's columns (SQLite compares every non-amendable one)."""
    table = RECORD_TABLE
    if vendor == "postgresql":
        name = _trigger_name(table)
        return (
            [
                *_PG_FUNCTIONS,
                f"CREATE TRIGGER {name} BEFORE UPDATE OR DELETE ON {table} FOR EACH ROW "
                f"EXECUTE FUNCTION holdfast_guard_closed_record"
                f"({_pg_args(RECORD_AMENDABLE_COLUMNS)});",
            ],
            [
                f"DROP TRIGGER IF EXISTS {name} ON {table};",
                "DROP FUNCTION IF EXISTS holdfast_guard_closed_entry();",
                "DROP FUNCTION IF EXISTS holdfast_guard_closed_record();",
                "DROP FUNCTION IF EXISTS holdfast_door_open(text);",
            ],
        )
    if vendor == "sqlite":
        update, delete = _trigger_name(table, "_update"), _trigger_name(table, "_delete")
        differs = _frozen_differs(columns, RECORD_AMENDABLE_COLUMNS)
        return (
            [
                f"CREATE TABLE IF NOT EXISTS {MARKER_TABLE} "
                "(purpose varchar(16) NOT NULL PRIMARY KEY);",
                f"CREATE TRIGGER {update} BEFORE UPDATE ON {table} FOR EACH ROW "
                f"WHEN OLD.closed_at IS NOT NULL AND (NOT {_door_sql(AMENDING)} OR {differs}) "
                "BEGIN SELECT RAISE(ABORT, 'This service record is closed; correct it with an "
                "amendment (which changes only the amendable columns).'); END;",
                f"CREATE TRIGGER {delete} BEFORE DELETE ON {table} FOR EACH ROW "
                f"WHEN OLD.closed_at IS NOT NULL AND NOT {_door_sql(PURGING)} "
                "BEGIN SELECT RAISE(ABORT, 'This service record is closed and cannot be "
                "deleted.'); END;",
            ],
            [
                f"DROP TRIGGER IF EXISTS {update};",
                f"DROP TRIGGER IF EXISTS {delete};",
                f"DROP TABLE IF EXISTS {MARKER_TABLE};",
            ],
        )
    return [], []


def entry_guard_sql(
    vendor: str, table: str, columns: Sequence[str], amendable: Sequence[str]
) -> tuple[list[str], list[str]]:
    """(create, drop) statements guarding one entry kind's table. ``amendable`` are the
    columns an amendment may change (the kind's ``amendable_fields``)."""
    if vendor == "postgresql":
        name = _trigger_name(table)
        args = _pg_args(amendable)
        return (
            [
                f"CREATE TRIGGER {name} BEFORE UPDATE OR DELETE ON {table} FOR EACH ROW "
                f"EXECUTE FUNCTION holdfast_guard_closed_entry({args});"
            ],
            [f"DROP TRIGGER IF EXISTS {name} ON {table};"],
        )
    if vendor == "sqlite":
        update, delete = _trigger_name(table, "_update"), _trigger_name(table, "_delete")
        closed = (
            f"EXISTS (SELECT 1 FROM {RECORD_TABLE} r WHERE r.closed_at IS NOT NULL "
            "AND r.id IN (OLD.record_id, NEW.record_id))"
        )
        closed_old = (
            f"EXISTS (SELECT 1 FROM {RECORD_TABLE} r WHERE r.closed_at IS NOT NULL "
            "AND r.id = OLD.record_id)"
        )
        differs = _frozen_differs(columns, amendable)
        return (
            [
                f"CREATE TRIGGER {update} BEFORE UPDATE ON {table} FOR EACH ROW "
                f"WHEN {closed} AND (NOT {_door_sql(AMENDING)} OR {differs}) "
                "BEGIN SELECT RAISE(ABORT, 'This entry belongs to a closed service record; "
                "correct it with an amendment (which changes only the amendable columns).'); "
                "END;",
                f"CREATE TRIGGER {delete} BEFORE DELETE ON {table} FOR EACH ROW "
                f"WHEN {closed_old} AND NOT {_door_sql(PURGING)} "
                "BEGIN SELECT RAISE(ABORT, 'This entry belongs to a closed service record and "
                "cannot be deleted.'); END;",
            ],
            [f"DROP TRIGGER IF EXISTS {update};", f"DROP TRIGGER IF EXISTS {delete};"],
        )
    return [], []


def _columns(apps: Any, table: str) -> list[str]:
    for model in apps.get_app_config("fleet").get_models():
        if model._meta.db_table == table:
            return [field.column for field in model._meta.concrete_fields]
    raise LookupError(f"No fleet model has the table {table}.")


def _run(schema_editor: BaseDatabaseSchemaEditor, statements: Sequence[str]) -> None:
    for statement in statements:
        schema_editor.execute(statement, params=None)


def _pair(build: Callable[[str, list[str]], tuple[list[str], list[str]]], table: str) -> Any:
    def forward(apps: Any, schema_editor: BaseDatabaseSchemaEditor) -> None:
        vendor = schema_editor.connection.vendor
        _run(schema_editor, build(vendor, _columns(apps, table))[0])

    def backward(apps: Any, schema_editor: BaseDatabaseSchemaEditor) -> None:
        vendor = schema_editor.connection.vendor
        _run(schema_editor, build(vendor, _columns(apps, table))[1])

    return migrations.RunPython(forward, backward, elidable=False)


def guard_record_table_operation() -> Any:
    """The migration operation that guards the service record table (and creates the
    functions and the marker table the entry guards use)."""
    return _pair(record_guard_sql, RECORD_TABLE)


def guard_entry_table_operation(table: str, amendable: Sequence[str]) -> Any:
    """The migration operation that guards one entry kind's table; run it after
    ``guard_record_table_operation`` (in an earlier migration or the same one)."""
    amendable = tuple(amendable)
    return _pair(lambda vendor, cols: entry_guard_sql(vendor, table, cols, amendable), table)


def reguard_entry_table_operation(table: str, amendable: Sequence[str]) -> Any:
    """Drop and create again the guard of one entry kind's table. On SQLite a migration that
    rebuilds a table (``AddConstraint``, ``AlterField``) drops its triggers with it; a
    migration that rebuilds a guarded table ends with this operation for that table."""
    amendable = tuple(amendable)

    def build(vendor: str, cols: list[str]) -> tuple[list[str], list[str]]:
        create, drop = entry_guard_sql(vendor, table, cols, amendable)
        return [*drop, *create], []

    return _pair(build, table)


def reguard_record_table_operation() -> Any:
    """Drop and create again the guard of the service record table (its triggers; the functions
    and the marker table are kept), for a migration that rebuilds that table on SQLite."""

    def build(vendor: str, cols: list[str]) -> tuple[list[str], list[str]]:
        create, _ = record_guard_sql(vendor, cols)
        table = RECORD_TABLE
        if vendor == "postgresql":
            drop = [f"DROP TRIGGER IF EXISTS {_trigger_name(table)} ON {table};"]
        elif vendor == "sqlite":
            drop = [
                f"DROP TRIGGER IF EXISTS {_trigger_name(table, '_update')};",
                f"DROP TRIGGER IF EXISTS {_trigger_name(table, '_delete')};",
            ]
        else:
            drop = []
        return [*drop, *create], []

    return _pair(build, RECORD_TABLE)


def unguard_tables_operation(tables: Sequence[str]) -> Any:
    """Drop the guard triggers of ``tables`` (the service record table and entry tables), to be
    created again at the end of the same migration. On SQLite, rebuilding the service record
    table fails while the entry tables' triggers name it, so a migration that rebuilds it drops
    them all first."""
    tables = tuple(tables)

    def forward(apps: Any, schema_editor: BaseDatabaseSchemaEditor) -> None:
        vendor = schema_editor.connection.vendor
        for table in tables:
            if vendor == "postgresql":
                _run(schema_editor, [f"DROP TRIGGER IF EXISTS {_trigger_name(table)} ON {table};"])
            elif vendor == "sqlite":
                _run(
                    schema_editor,
                    [
                        f"DROP TRIGGER IF EXISTS {_trigger_name(table, '_update')};",
                        f"DROP TRIGGER IF EXISTS {_trigger_name(table, '_delete')};",
                    ],
                )

    return migrations.RunPython(forward, migrations.RunPython.noop, elidable=False)
