"""Uploaded files waiting between a preview and its confirmation (an import, a kit's return
file): kept on the server under ``IMPORT_STAGING_ROOT``, named by their SHA-256, outside the
media folder (nothing serves them). A file is handed back only while its bytes still match
its name."""

from __future__ import annotations

import hashlib
import re
from dataclasses import dataclass
from pathlib import Path

from django.conf import settings

_CHECKSUM = re.compile(r"^[0-9a-f]{64}$")


def sha256_hex(data: bytes) -> str:
    return hashlib.sha256(data).hexdigest()


def _file_sha256(path: Path) -> str:
    digest = hashlib.sha256()
    with path.open("rb") as stream:
        for chunk in iter(lambda: stream.read(1024 * 1024), b""):
            digest.update(chunk)
    return digest.hexdigest()


@dataclass(frozen=True)
class StagingArea:
    """One kind of waiting file: its folder below the staging root and its suffix."""

    folder: str
    suffix: str

    def path_of(self, digest: str) -> Path:
        if not _CHECKSUM.match(digest):
            raise ValueError("Not a file checksum.")
        root = Path(settings.IMPORT_STAGING_ROOT)
        return (root / self.folder if self.folder else root) / f"{digest}{self.suffix}"

    def stage(self, data: bytes) -> str:
        """Keep ``data`` until it is confirmed or discarded; its SHA-256 is the key."""
        digest = sha256_hex(data)
        path = self.path_of(digest)
        path.parent.mkdir(parents=True, exist_ok=True)
        path.write_bytes(data)
        return digest

    def staged_path(self, digest: str) -> Path | None:
        """Where the file kept under ``digest`` is (None if there is none, or it no longer
        matches its name)."""
        try:
            path = self.path_of(digest)
        except ValueError:
            return None
        if not path.is_file() or _file_sha256(path) != digest:
            return None
        return path

    def staged(self, digest: str) -> bytes | None:
        """The bytes of the file kept under ``digest`` (None as for ``staged_path``)."""
        path = self.staged_path(digest)
        return path.read_bytes() if path is not None else None

    def discard(self, digest: str) -> None:
        try:
            self.path_of(digest).unlink(missing_ok=True)
        except ValueError:
            return
