"""Uploaded kit return files waiting between the merge preview and its confirmation: kept on
the server under their SHA-256, beside the import files, outside the media folder (nothing
serves them)."""

from __future__ import annotations

import hashlib
import re
from pathlib import Path

from django.conf import settings

_CHECKSUM = re.compile(r"^[0-9a-f]{64}$")


def path_of(digest: str) -> Path:
    if not _CHECKSUM.match(digest):
        raise ValueError("Not a file checksum.")
    return Path(settings.IMPORT_STAGING_ROOT) / "kits" / f"{digest}.zip"


def stage(data: bytes) -> str:
    """Keep ``data`` until it is merged or discarded; its SHA-256 is the key."""
    digest = hashlib.sha256(data).hexdigest()
    path = path_of(digest)
    path.parent.mkdir(parents=True, exist_ok=True)
    path.write_bytes(data)
    return digest


def staged(digest: str) -> Path | None:
    """The file kept under ``digest`` (None if there is none)."""
    try:
        path = path_of(digest)
    except ValueError:
        return None
    return path if path.is_file() else None


def discard(digest: str) -> None:
    try:
        path_of(digest).unlink(missing_ok=True)
    except ValueError:
        return
