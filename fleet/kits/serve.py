"""On the vessel's laptop: the kit's working copy, and the environment that serves it.

``working_copy`` unpacks a kit file (``read_kit_file``) into a folder, by default
``~/holdfast-kits/<code>/``, holding ``kit.sqlite3`` (the database the laptop works on),
``secret-key`` (made once, readable by the owner only) and ``media/``. A folder that already
holds a working copy with changes (work recorded on board, even a sign-in) is never overwritten
silently: ``keep`` carries on with it, ``replace`` starts again from the file and keeps the old
copy beside it (``kit.sqlite3.replaced-<time>``).

``kit_environment`` is what ``manage.py kit_serve`` and ``kit_pack --dir`` run with: the
working copy as the database, DEBUG on (the server listens on 127.0.0.1 only, so the debug
pages reach no one but the laptop's user) and the folders inside the working copy.
"""

from __future__ import annotations

import hashlib
import os
import secrets
import shutil
import tempfile
from dataclasses import dataclass
from pathlib import Path

from django.utils import timezone

from fleet.kits.files import DATABASE_MEMBER, read_kit_file

SECRET_FILE = "secret-key"


class WorkingCopyError(Exception):
    """The working copy cannot be used as asked; the message says what to do."""


@dataclass(frozen=True)
class WorkingCopy:
    folder: Path
    db_path: Path
    kit_code: str
    unpacked: bool  # False when an existing working copy is used


def default_folder(code: str) -> Path:
    return Path.home() / "holdfast-kits" / code


def _sha256(path: Path) -> str:
    digest = hashlib.sha256()
    with path.open("rb") as f:
        while chunk := f.read(1024 * 1024):
            digest.update(chunk)
    return digest.hexdigest()


def _changed(existing: Path, fresh: Path) -> bool:
    wal = existing.with_name(existing.name + "-wal")
    if wal.exists() and wal.stat().st_size > 0:
        return True
    return _sha256(existing) != _sha256(fresh)


def working_copy(
    kit_file: Path, *, folder: Path | None = None, keep: bool = False, replace: bool = False
) -> WorkingCopy:
    """Unpack ``kit_file`` into its working folder (see the module docstring)."""
    if keep and replace:
        raise WorkingCopyError("Choose either keep or replace, not both.")
    with tempfile.TemporaryDirectory(prefix="holdfast-unpack-") as work:
        kit = read_kit_file(Path(kit_file), into=Path(work))
        target = Path(folder) if folder is not None else default_folder(kit.kit_code)
        target.mkdir(parents=True, exist_ok=True)
        db_path = target / DATABASE_MEMBER
        unpacked = True
        if db_path.exists():
            if keep or not _changed(db_path, kit.db_path):
                unpacked = False
            elif not replace:
                raise WorkingCopyError(
                    f"{target} already holds a working copy of this kit with changes made since "
                    "it was unpacked (work recorded on board, or a sign-in). Nothing was "
                    "overwritten. Carry on with it (--keep), or start again from the file "
                    "(--replace: the working copy is kept beside it, renamed)."
                )
            else:
                stamp = timezone.now().strftime("%Y%m%d-%H%M%S")
                for suffix in ("", "-wal", "-shm"):
                    old = db_path.with_name(db_path.name + suffix)
                    if old.exists():
                        old.replace(old.with_name(f"{old.name}.replaced-{stamp}"))
        if unpacked:
            shutil.copyfile(kit.db_path, db_path)
    secret = target / SECRET_FILE
    if not secret.exists():
        secret.write_text(secrets.token_urlsafe(48), encoding="utf-8")
        secret.chmod(0o600)
    (target / "media").mkdir(exist_ok=True)
    return WorkingCopy(folder=target, db_path=db_path, kit_code=kit.kit_code, unpacked=unpacked)


def kit_environment(folder: Path) -> dict[str, str]:
    """The environment a process runs with to work on the working copy in ``folder``."""
    folder = Path(folder).resolve()
    db_path = folder / DATABASE_MEMBER
    if not db_path.is_file():
        raise WorkingCopyError(f"{folder} holds no kit working copy ({DATABASE_MEMBER}).")
    secret = folder / SECRET_FILE
    return {
        **os.environ,
        "DATABASE_URL": f"sqlite:///{db_path}",
        "SECRET_KEY": secret.read_text(encoding="utf-8").strip()
        if secret.exists()
        else secrets.token_urlsafe(48),
        "DEBUG": "true",
        "HTTPS": "false",
        "ALLOWED_HOSTS": "127.0.0.1,localhost",
        "MEDIA_ROOT": str(folder / "media"),
        "IMPORT_STAGING_ROOT": str(folder / "import-staging"),
        "KIT_FILES_ROOT": str(folder / "kit-files"),
    }
