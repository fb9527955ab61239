"""Uploaded import files waiting between the preview and the confirm: kept on the server,
named by their SHA-256, outside the media folder (nothing serves them)."""

from __future__ import annotations

import re
from pathlib import Path

from django.conf import settings

from .parsing import checksum

_CHECKSUM = re.compile(r"^[0-9a-f]{64}$")


def _path(digest: str) -> Path:
    if not _CHECKSUM.match(digest):
        raise ValueError("Not a file checksum.")
    return Path(settings.IMPORT_STAGING_ROOT) / f"{digest}.csv"


def stage(data: bytes) -> str:
    """Keep ``data`` until it is confirmed or discarded; its checksum is the key."""
    digest = checksum(data)
    path = _path(digest)
    path.parent.mkdir(parents=True, exist_ok=True)
    path.write_bytes(data)
    return digest


def staged(digest: str) -> bytes | None:
    """The file kept under ``digest``, or None if there is none (or it no longer matches)."""
    try:
        path = _path(digest)
    except ValueError:
        return None
    if not path.is_file():
        return None
    data = path.read_bytes()
    return data if checksum(data) == digest else None


def discard(digest: str) -> None:
    try:
        _path(digest).unlink(missing_ok=True)
    except ValueError:
        return
