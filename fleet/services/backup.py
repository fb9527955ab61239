"""Backup and restore: the whole database content and the media files in one archive.

A backup is a zip (``fleet.archive``) holding, per table, one JSON object per line in Django's
serialization format (``{"model", "pk", "fields"}``), the photos under ``media/``, and a
manifest with each file's size, SHA-256 and row count, the tables in dependency order and the
migration each app was at. It is database-neutral: a backup taken from SQLite restores into
PostgreSQL and the other way round.

What is kept, and how:

1. every table of every installed app except those ``migrate`` builds (content types,
   permissions) and the sessions (a restored database starts with everyone signed out);
2. rows keep their primary keys, so every foreign key (and an amendment's ``target_id``)
   points where it pointed; sequences are moved past the restored keys (PostgreSQL);
3. a reference to a content type, a permission or a group is written as its natural key
   (``["fleet", "sealchange"]``), since their ids differ between databases; groups are
   matched by name with the ones ``migrate`` created;
4. datetimes are written in full ISO 8601 with their offset and microseconds (Django's own
   JSON encoder cuts them to milliseconds, which would not round-trip).

Restoring:

1. the archive is checked completely first (``fleet.archive.read_archive``): a truncated or
   changed file is refused before the database is touched;
2. the database must be at the same migrations as the backup, and empty (no rows beyond the
   groups ``migrate`` creates) unless ``replace`` is given, which deletes everything first
   (``_clear_all``);
3. rows are inserted table by table in dependency order, the row counts compared with the
   manifest, and the stored derived state and due rows compared with a rebuild from the
   records (``manage.py rebuild_state --check``): any difference refuses the restore;
4. the photos are written under ``MEDIA_ROOT``; all of it is one transaction, and photos
   written by a restore that fails are removed again.
"""

from __future__ import annotations

import datetime as dt
import json
import uuid
from collections.abc import Iterable, Iterator
from dataclasses import dataclass
from decimal import Decimal
from pathlib import Path
from typing import Any

from django.apps import apps
from django.conf import settings
from django.contrib.auth.models import Group, Permission
from django.contrib.contenttypes.models import ContentType
from django.core import serializers
from django.core.exceptions import ObjectDoesNotExist, ValidationError
from django.core.management.color import no_style
from django.core.serializers.base import DeserializationError
from django.db import DatabaseError, connection, models, transaction

from fleet.archive import (
    ArchiveError,
    manifest_header,
    migration_heads,
    read_archive,
    safe_member_name,
    unapplied_migrations,
    write_archive,
)
from fleet.due.snapshot import rebuild_differences
from fleet.integrity import purging

FORMAT = "holdfast-backup"
# Built by ``migrate`` (content types, permissions) or not worth keeping (sessions).
_NOT_BACKED_UP = frozenset({"contenttypes.contenttype", "auth.permission", "sessions.session"})
# Referred to by natural key, not by id: their ids differ from one database to another.
_BY_NATURAL_KEY: tuple[type[models.Model], ...] = (ContentType, Permission, Group)
# Rows ``migrate`` itself creates: their presence does not make a database "not empty".
_CREATED_BY_MIGRATE = frozenset({"auth.group"})
_BATCH = 1000


class RestoreError(Exception):
    """The restore was refused or failed; nothing was changed."""


@dataclass(frozen=True, slots=True)
class BackupResult:
    path: Path
    rows: int
    tables: int
    media_files: int
    missing_media: tuple[str, ...]


@dataclass(frozen=True, slots=True)
class RestoreResult:
    rows: int
    tables: int
    media_files: int
    state_rows_checked: int


def backup_models() -> list[type[models.Model]]:
    """Every table a backup holds, parents before children."""
    candidates = [
        model
        for model in apps.get_models()
        if model._meta.managed
        and not model._meta.proxy
        and model._meta.label_lower not in _NOT_BACKED_UP
    ]
    return dependency_order(candidates)


def dependency_order(candidates: list[type[models.Model]]) -> list[type[models.Model]]:
    """``candidates`` ordered so that a model comes after every model its foreign keys and
    many-to-many fields point to (a key to itself aside); otherwise in app order."""
    included = set(candidates)
    needs: dict[type[models.Model], set[type[models.Model]]] = {}
    for model in candidates:
        targets = {
            f.related_model
            for f in [*model._meta.fields, *model._meta.many_to_many]
            if f.is_relation and f.related_model is not None
        }
        needs[model] = {t for t in targets if t in included and t is not model}
    ordered: list[type[models.Model]] = []
    placed: set[type[models.Model]] = set()
    while len(ordered) < len(candidates):
        ready = [m for m in candidates if m not in placed and needs[m] <= placed]
        if not ready:
            stuck = ", ".join(m._meta.label for m in candidates if m not in placed)
            raise RuntimeError(f"The foreign keys of {stuck} form a cycle; no order to load them.")
        ordered.append(ready[0])
        placed.add(ready[0])
    return ordered


def _json_default(value: object) -> object:
    if isinstance(value, dt.datetime | dt.date | dt.time):
        return value.isoformat()  # full precision, with the offset of an aware datetime
    if isinstance(value, Decimal | uuid.UUID):
        return str(value)
    raise TypeError(f"cannot write {type(value).__name__} to a backup")


class _NaturalKeys:
    """Turns the ids of content types, permissions and groups into their natural keys."""

    def __init__(self) -> None:
        self._cache: dict[tuple[type[models.Model], Any], list[Any]] = {}

    def key(self, model: type[models.Model], pk: Any) -> list[Any]:
        cached = self._cache.get((model, pk))
        if cached is None:
            # Only models that define ``natural_key`` (users, groups, content types) come here.
            instance: Any = model._base_manager.get(pk=pk)
            cached = list(instance.natural_key())
            self._cache[(model, pk)] = cached
        return cached


def _rows(model: type[models.Model], naturals: _NaturalKeys) -> Iterator[dict[str, Any]]:
    """The model's rows in Django's serialization format, by primary key."""
    fk_natural = {
        f.name: f.related_model
        for f in model._meta.fields
        if f.is_relation and f.related_model in _BY_NATURAL_KEY
    }
    m2m_natural = {
        f.name: f.related_model
        for f in model._meta.many_to_many
        if f.related_model in _BY_NATURAL_KEY
    }
    drop_pk = model in _BY_NATURAL_KEY
    queryset = model._base_manager.order_by("pk")
    if m2m_natural:
        queryset = queryset.prefetch_related(*m2m_natural)
    serializer = serializers.get_serializer("python")()
    batch: list[models.Model] = []

    def flush() -> Iterator[dict[str, Any]]:
        for row in serializer.serialize(batch):
            fields = row["fields"]
            for name, target in fk_natural.items():
                if fields.get(name) is not None:
                    fields[name] = naturals.key(target, fields[name])
            for name, target in m2m_natural.items():
                fields[name] = sorted(naturals.key(target, pk) for pk in fields[name])
            if drop_pk:
                row.pop("pk", None)
            yield row
        batch.clear()

    for instance in queryset.iterator(chunk_size=_BATCH):
        batch.append(instance)
        if len(batch) >= _BATCH:
            yield from flush()
    if batch:
        yield from flush()


def _file_names(model: type[models.Model], row: dict[str, Any]) -> Iterable[str]:
    for f in model._meta.fields:
        if isinstance(f, models.FileField) and row["fields"].get(f.name):
            yield str(row["fields"][f.name])


def backup_create(
    *, path: Path, at: dt.datetime, command: str = "manage.py backup"
) -> BackupResult:
    """Write the whole database content and its media files to the archive at ``path``."""
    pending = unapplied_migrations()
    if pending:
        raise ArchiveError(
            f"The database has {len(pending)} migration(s) not applied ({pending[0]} first); "
            "run manage.py migrate before backing up."
        )
    header = manifest_header(kind=FORMAT, command=command, at=at, using="default")
    media_root = Path(settings.MEDIA_ROOT)
    media: set[str] = set()
    tables: list[dict[str, Any]] = []
    total = 0
    with write_archive(path, at=at) as archive:
        with transaction.atomic():
            _consistent_snapshot()
            naturals = _NaturalKeys()
            for number, model in enumerate(backup_models(), start=1):
                name = f"data/{number:03d}_{model._meta.label_lower}.jsonl"
                rows = 0
                with archive.open(name) as out:
                    for row in _rows(model, naturals):
                        line = json.dumps(row, default=_json_default, allow_nan=False)
                        out.write(line.encode() + b"\n")
                        media.update(_file_names(model, row))
                        rows += 1
                archive.set_rows(name, rows)
                tables.append({"model": model._meta.label_lower, "file": name, "rows": rows})
                total += rows
        missing: list[str] = []
        for file_name in sorted(media):
            source = media_root / safe_member_name(file_name)
            if source.is_file():
                archive.copy_file(f"media/{file_name}", source)
            else:
                missing.append(file_name)
        archive.finish({**header, "tables": tables, "missing_media": missing})
    return BackupResult(
        path=Path(path),
        rows=total,
        tables=len(tables),
        media_files=len(media) - len(missing),
        missing_media=tuple(missing),
    )


def _consistent_snapshot() -> None:
    """On PostgreSQL, read every table from one snapshot (REPEATABLE READ, read only) when the
    backup runs in a transaction of its own. SQLite's transaction already reads one snapshot."""
    if connection.vendor != "postgresql" or len(connection.atomic_blocks) > 1:
        return
    with connection.cursor() as cursor:
        cursor.execute("SET TRANSACTION ISOLATION LEVEL REPEATABLE READ, READ ONLY")


def _has_content() -> bool:
    return any(
        model._base_manager.exists()
        for model in backup_models()
        if model._meta.label_lower not in _CREATED_BY_MIGRATE
    )


def _clear_all() -> None:
    """Delete every backed-up row, children first, and every session, inside the restore's
    transaction (``restore --replace``).

    Groups stay (``migrate`` made them; the restore matches them by name and sets their
    permissions). One DELETE per table, no signals, no cascade collection: the order does the
    work. Closed service records and their entries are deleted here too, through the purge
    marker (``fleet.integrity.purging``): the closed-record triggers let this transaction,
    and only it, delete them.
    """
    from django.contrib.sessions.models import Session

    with purging():
        for model in reversed(backup_models()):
            if model._meta.label_lower in _CREATED_BY_MIGRATE:
                continue
            for m2m in model._meta.many_to_many:
                through = m2m.remote_field.through
                assert through is not None  # a many-to-many always has its table
                through._base_manager.all()._raw_delete(connection.alias)
            model._base_manager.all()._raw_delete(connection.alias)
        Session.objects.all()._raw_delete(connection.alias)


def _check_schema(manifest: dict[str, Any]) -> list[type[models.Model]]:
    pending = unapplied_migrations()
    if pending:
        raise RestoreError(
            f"This database has {len(pending)} migration(s) not applied ({pending[0]} first); "
            "run manage.py migrate, then restore."
        )
    ours = migration_heads()
    theirs = manifest.get("migrations")
    if theirs != ours:
        differ = sorted(
            app for app in set(ours) | set(theirs or {}) if ours.get(app) != (theirs or {}).get(app)
        )
        first = differ[0] if differ else "?"
        raise RestoreError(
            f"The backup was made at other migrations than this database is at ({first}: "
            f"backup {(theirs or {}).get(first)}, here {ours.get(first)}). Restore it with the "
            "Holdfast version that made it, then upgrade and migrate."
        )
    tables = manifest.get("tables")
    if not isinstance(tables, list):
        raise RestoreError("The archive's manifest lists no tables.")
    expected = [m._meta.label_lower for m in backup_models()]
    listed = [str(t.get("model")) for t in tables if isinstance(t, dict)]
    if sorted(listed) != sorted(expected):
        raise RestoreError(
            "The backup's tables are not this database's tables "
            f"({len(listed)} in the backup, {len(expected)} here)."
        )
    return [apps.get_model(label) for label in listed]


def _read_rows(archive: Any, name: str) -> Iterator[dict[str, Any]]:
    with archive.open(name) as member:
        for number, line in enumerate(member, start=1):
            try:
                yield json.loads(line)
            except ValueError as exc:
                raise RestoreError(f"{name} line {number} is not JSON ({exc}).") from exc


def backup_restore(*, path: Path, replace: bool = False, at: dt.datetime) -> RestoreResult:
    """Restore the archive at ``path`` into the database and ``MEDIA_ROOT``, all or nothing."""
    try:
        archive, manifest = read_archive(path, kind=FORMAT)
    except ArchiveError as exc:
        raise RestoreError(str(exc)) from exc
    written: list[Path] = []
    try:
        with archive, transaction.atomic():
            models_in_order = _check_schema(manifest)
            if _has_content():
                if not replace:
                    raise RestoreError(
                        "This database already holds data. Restore into an empty database "
                        "(a new one, migrated), or give --replace to delete everything in it "
                        "first."
                    )
                _clear_all()
            total = 0
            for table, model in zip(manifest["tables"], models_in_order, strict=True):
                rows = _load_table(archive, table["file"])
                if rows != table.get("rows"):
                    raise RestoreError(
                        f"{table['file']} gave {rows} rows; the manifest says {table.get('rows')}."
                    )
                found = model._base_manager.count()
                if found != rows:
                    raise RestoreError(
                        f"{model._meta.label} has {found} rows after the restore, not {rows}."
                    )
                total += rows
            _reset_sequences(models_in_order)
            lines, compared = rebuild_differences(at=at)
            if lines:
                raise RestoreError(
                    f"The restored derived state and due rows differ from a rebuild in "
                    f"{len(lines)} rows (first: {lines[0]}); nothing was restored."
                )
            media = _write_media(archive, manifest, written)
    except BaseException:
        for file in written:
            file.unlink(missing_ok=True)
        raise
    return RestoreResult(
        rows=total, tables=len(models_in_order), media_files=media, state_rows_checked=compared
    )


def _load_table(archive: Any, name: str) -> int:
    rows = 0
    deferred = []
    try:
        for item in serializers.deserialize(
            "python", _read_rows(archive, name), handle_forward_references=True
        ):
            item.save()
            if item.deferred_fields:
                deferred.append(item)
            rows += 1
        for item in deferred:
            item.save_deferred_fields()
    except (DeserializationError, DatabaseError, ValidationError, ObjectDoesNotExist) as exc:
        raise RestoreError(f"{name} could not be loaded: {exc}") from exc
    return rows


def _reset_sequences(model_list: list[type[models.Model]]) -> None:
    statements = connection.ops.sequence_reset_sql(no_style(), model_list)
    if statements:
        with connection.cursor() as cursor:
            for sql in statements:
                cursor.execute(sql)


def _write_media(archive: Any, manifest: dict[str, Any], written: list[Path]) -> int:
    root = Path(settings.MEDIA_ROOT).resolve()
    count = 0
    for name in sorted(manifest["files"]):
        if not name.startswith("media/"):
            continue
        target = (root / name.removeprefix("media/")).resolve()
        if not target.is_relative_to(root):
            raise RestoreError(f"{name} would be written outside MEDIA_ROOT; refused.")
        target.parent.mkdir(parents=True, exist_ok=True)
        existed = target.exists()
        with archive.open(name) as source, target.open("wb") as out:
            if not existed:
                written.append(target)
            while chunk := source.read(1024 * 1024):
                out.write(chunk)
        count += 1
    return count
