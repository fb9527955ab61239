"""Zip archives with a manifest: what the backup and the export write and the restore reads.

Every archive holds ``manifest.json`` and the files it lists. The manifest names, for each
file, its size in bytes and its SHA-256, and for data files the number of rows; and it says
when the archive was made, by which command, from which version of Holdfast and at which
migration of each app. ``read_archive`` checks all of that before anything is read from it,
so a truncated, tampered or foreign file is refused with a message saying what is wrong.
"""

from __future__ import annotations

import datetime as dt
import hashlib
import io
import json
import zipfile
from collections.abc import Iterator
from contextlib import contextmanager
from dataclasses import dataclass, field
from importlib import metadata
from pathlib import Path, PurePosixPath
from typing import IO, Any

from django.db import connections
from django.db.migrations.executor import MigrationExecutor
from django.db.migrations.loader import MigrationLoader

MANIFEST = "manifest.json"
FORMAT_VERSION = 1
_CHUNK = 1024 * 1024


class ArchiveError(Exception):
    """The archive cannot be used; the message says why, in plain words."""


def app_version() -> str:
    try:
        return metadata.version("holdfast")
    except metadata.PackageNotFoundError:  # running from a checkout that was never installed
        return "unknown"


def migration_heads(using: str = "default") -> dict[str, str]:
    """The latest migration of each app, as the code defines them: ``{"fleet": "0012_…"}``."""
    loader = MigrationLoader(connections[using], ignore_no_migrations=True)
    return {app: name for app, name in sorted(loader.graph.leaf_nodes())}


def unapplied_migrations(using: str = "default") -> list[str]:
    """Migrations the code has and the database has not run, as ``app.name``."""
    executor = MigrationExecutor(connections[using])
    plan = executor.migration_plan(executor.loader.graph.leaf_nodes())
    return [f"{migration.app_label}.{migration.name}" for migration, _ in plan]


def safe_member_name(name: str) -> str:
    """``name`` if it is a plain relative path inside the archive, else ArchiveError."""
    path = PurePosixPath(name)
    if (
        not name
        or "\\" in name
        or path.is_absolute()
        or any(part in ("", ".", "..") for part in name.split("/"))
    ):
        raise ArchiveError(f"The archive names a file outside itself ({name!r}); refused.")
    return name


@dataclass
class ArchiveWriter:
    """Writes files into a zip, hashing each as it goes, then the manifest last."""

    zip: zipfile.ZipFile
    date_time: tuple[int, int, int, int, int, int]
    files: dict[str, dict[str, Any]] = field(default_factory=dict)

    @contextmanager
    def open(self, name: str, *, rows: int | None = None) -> Iterator[_HashingWriter]:
        safe_member_name(name)
        if name in self.files or name == MANIFEST:
            raise ValueError(f"{name} is already in the archive")
        info = zipfile.ZipInfo(name, date_time=self.date_time)
        info.compress_type = zipfile.ZIP_DEFLATED
        with self.zip.open(info, "w", force_zip64=True) as raw:
            writer = _HashingWriter(raw)
            yield writer
        entry: dict[str, Any] = {"bytes": writer.size, "sha256": writer.sha256.hexdigest()}
        if rows is not None:
            entry["rows"] = rows
        self.files[name] = entry

    def set_rows(self, name: str, rows: int) -> None:
        self.files[name]["rows"] = rows

    def write_bytes(self, name: str, data: bytes) -> None:
        with self.open(name) as out:
            out.write(data)

    def copy_file(self, name: str, source: Path) -> None:
        with self.open(name) as out, source.open("rb") as src:
            while chunk := src.read(_CHUNK):
                out.write(chunk)

    def finish(self, header: dict[str, Any]) -> dict[str, Any]:
        manifest = {**header, "format_version": FORMAT_VERSION, "files": self.files}
        info = zipfile.ZipInfo(MANIFEST, date_time=self.date_time)
        info.compress_type = zipfile.ZIP_DEFLATED
        self.zip.writestr(info, json.dumps(manifest, indent=2, sort_keys=True) + "\n")
        return manifest


class _HashingWriter(io.RawIOBase):
    def __init__(self, raw: IO[bytes]) -> None:
        super().__init__()
        self.raw = raw
        self.sha256 = hashlib.sha256()
        self.size = 0

    def writable(self) -> bool:
        return True

    def write(self, data: bytes) -> int:  # type: ignore[override]
        self.raw.write(data)
        self.sha256.update(data)
        self.size += len(data)
        return len(data)


def manifest_header(*, kind: str, command: str, at: dt.datetime, using: str) -> dict[str, Any]:
    return {
        "format": kind,
        "created_at": at.isoformat(),
        "command": command,
        "app_version": app_version(),
        "migrations": migration_heads(using),
        "database_vendor": connections[using].vendor,
    }


@contextmanager
def write_archive(path: Path, *, at: dt.datetime) -> Iterator[ArchiveWriter]:
    """Write to ``path`` through a temporary file beside it, so a failed or interrupted run
    never leaves a half-written archive under the final name."""
    path = Path(path)
    partial = path.with_name(path.name + ".partial")
    try:
        with zipfile.ZipFile(partial, "w", compression=zipfile.ZIP_DEFLATED) as archive:
            s = at.astimezone(dt.UTC)
            yield ArchiveWriter(archive, (s.year, s.month, s.day, s.hour, s.minute, s.second))
        partial.replace(path)
    finally:
        partial.unlink(missing_ok=True)


def read_archive(path: Path, *, kind: str) -> tuple[zipfile.ZipFile, dict[str, Any]]:
    """Open ``path`` and check it completely: the manifest, each file's size and SHA-256, and
    that nothing is missing or extra. Returns the open zip and the manifest."""
    path = Path(path)
    if not path.is_file():
        raise ArchiveError(f"{path} does not exist or is not a file.")
    try:
        archive = zipfile.ZipFile(path)
    except (zipfile.BadZipFile, OSError) as exc:
        raise ArchiveError(
            f"{path} is not a readable archive (truncated or not a zip file): {exc}."
        ) from exc
    try:
        manifest = _check(archive, kind=kind)
    except BaseException:
        archive.close()
        raise
    return archive, manifest


def _read_manifest(archive: zipfile.ZipFile, *, kind: str) -> dict[str, Any]:
    """The archive's manifest, refused unless it is a Holdfast ``kind`` archive we can read."""
    try:
        manifest = json.loads(archive.read(MANIFEST))
    except KeyError as exc:
        raise ArchiveError(
            "The archive has no manifest.json; it is not a Holdfast archive."
        ) from exc
    except (zipfile.BadZipFile, OSError, ValueError, EOFError) as exc:
        raise ArchiveError(f"The archive's manifest cannot be read ({exc}).") from exc
    if not isinstance(manifest, dict) or manifest.get("format") != kind:
        found = manifest.get("format") if isinstance(manifest, dict) else None
        raise ArchiveError(f"This is not a Holdfast {kind} archive (format {found!r}).")
    if manifest.get("format_version") != FORMAT_VERSION:
        raise ArchiveError(
            f"This archive has format version {manifest.get('format_version')!r}; this version "
            f"of Holdfast reads version {FORMAT_VERSION}."
        )
    return manifest


def _check(archive: zipfile.ZipFile, *, kind: str) -> dict[str, Any]:
    manifest = _read_manifest(archive, kind=kind)
    files = manifest.get("files")
    if not isinstance(files, dict):
        raise ArchiveError("The archive's manifest lists no files.")
    present = {info.filename for info in archive.infolist() if not info.is_dir()} - {MANIFEST}
    missing = sorted(set(files) - present)
    extra = sorted(present - set(files))
    if missing:
        raise ArchiveError(
            f"The archive is incomplete: {len(missing)} file(s) in the manifest are missing "
            f"(first: {missing[0]})."
        )
    if extra:
        raise ArchiveError(
            f"The archive holds {len(extra)} file(s) the manifest does not list "
            f"(first: {extra[0]}); it was changed after it was made."
        )
    for name, entry in sorted(files.items()):
        safe_member_name(name)
        digest = hashlib.sha256()
        size = 0
        try:
            with archive.open(name) as member:
                while chunk := member.read(_CHUNK):
                    digest.update(chunk)
                    size += len(chunk)
        except (zipfile.BadZipFile, OSError, EOFError, ValueError) as exc:
            raise ArchiveError(f"{name} in the archive is damaged ({exc}).") from exc
        if not isinstance(entry, dict) or size != entry.get("bytes"):
            raise ArchiveError(
                f"{name} has {size} bytes; the manifest says "
                f"{entry.get('bytes') if isinstance(entry, dict) else '?'}. The archive is "
                "truncated or was changed after it was made."
            )
        if digest.hexdigest() != entry.get("sha256"):
            raise ArchiveError(
                f"{name} does not match its SHA-256 in the manifest; the archive was changed "
                "or damaged after it was made."
            )
    return manifest
