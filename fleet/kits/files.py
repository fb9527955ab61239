"""The kit file: one zip (``fleet.archive``) carrying a kit's database out to sea and back.

Two kinds, told apart by the manifest's ``format`` and repeated in its ``direction``:

- ``holdfast-kit`` (direction ``out``): written ashore by ``kit_export``;
- ``holdfast-kit-return`` (direction ``return``): written on the vessel by ``kit_pack``.

Each holds ``kit.sqlite3`` (a consistent copy of the kit's SQLite database, one file) and
``manifest.json``: the archive writer's size and SHA-256 of the database, the migrations
Holdfast was at, and the kit's own header under ``kit`` (code, job, made at and by, the
units' serials, sites, users; a returning file adds packed at and by). ``read_kit_file``
checks all of it before anything is used.
"""

from __future__ import annotations

import json
import shutil
import zipfile
from dataclasses import dataclass
from pathlib import Path
from typing import Any

from fleet.archive import ArchiveError, migration_heads, read_archive

KIT_FORMAT = "holdfast-kit"
RETURN_FORMAT = "holdfast-kit-return"
OUT = "out"
RETURN = "return"
DIRECTIONS = {KIT_FORMAT: OUT, RETURN_FORMAT: RETURN}
DATABASE_MEMBER = "kit.sqlite3"


class KitFileError(ArchiveError):
    """The kit file cannot be used; the message says why, in plain words."""


@dataclass(frozen=True)
class KitFile:
    manifest: dict[str, Any]
    db_path: Path
    kit_code: str
    direction: str


def _format_of(path: Path) -> str:
    """The manifest's ``format``, read without checking anything else (that comes next)."""
    if not path.is_file():
        raise KitFileError(f"{path} does not exist or is not a file.")
    try:
        with zipfile.ZipFile(path) as archive:
            manifest = json.loads(archive.read("manifest.json"))
    except KeyError as exc:
        raise KitFileError(f"{path.name} has no manifest: it is not a Holdfast kit file.") from exc
    except (zipfile.BadZipFile, OSError, ValueError, EOFError) as exc:
        raise KitFileError(
            f"{path.name} cannot be read as a kit file: it is truncated, damaged or not a zip "
            f"file ({exc})."
        ) from exc
    found = manifest.get("format") if isinstance(manifest, dict) else None
    if found not in DIRECTIONS:
        raise KitFileError(
            f"{path.name} is not a Holdfast kit file (its manifest says {found!r}); a kit file "
            "comes from kit_export or kit_pack."
        )
    return str(found)


def read_kit_file(path: Path, *, into: Path) -> KitFile:
    """Check the kit file at ``path`` completely and unpack its database into the folder
    ``into`` (created if missing) as ``kit.sqlite3``. Raises ``KitFileError`` for a truncated,
    changed or foreign file, or one made at other migrations than this Holdfast's."""
    path = Path(path)
    kind = _format_of(path)
    try:
        archive, manifest = read_archive(path, kind=kind)
    except KitFileError:
        raise
    except ArchiveError as exc:
        raise KitFileError(f"{path.name} is refused: {exc}") from exc
    with archive:
        header = manifest.get("kit")
        code = header.get("code") if isinstance(header, dict) else None
        if not isinstance(code, str) or not code or DATABASE_MEMBER not in manifest["files"]:
            raise KitFileError(f"{path.name} names no kit or holds no kit database; refused.")
        ours = migration_heads()
        theirs = manifest.get("migrations")
        if theirs != ours:
            raise KitFileError(
                f"{path.name} was made by a Holdfast at other migrations ({_heads(theirs)}) "
                f"than this one ({_heads(ours)}): run the same version of Holdfast ashore and "
                "on board."
            )
        into = Path(into)
        into.mkdir(parents=True, exist_ok=True)
        target = into / DATABASE_MEMBER
        partial = into / (DATABASE_MEMBER + ".partial")
        with archive.open(DATABASE_MEMBER) as src, partial.open("wb") as dst:
            shutil.copyfileobj(src, dst)
        partial.replace(target)
    return KitFile(manifest=manifest, db_path=target, kit_code=code, direction=DIRECTIONS[kind])


def _heads(heads: object) -> str:
    if not isinstance(heads, dict):
        return "unknown"
    return ", ".join(f"{app} {name}" for app, name in sorted(heads.items()) if app == "fleet")
