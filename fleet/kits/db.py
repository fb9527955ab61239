"""A kit's SQLite file opened beside the main database, under a connection alias of its own.

``kit_database(path)`` registers a temporary alias (``kit_<random>``, in this thread only)
with the same options as the SQLite main database (IMMEDIATE transactions, WAL, a busy
timeout), yields its name, and closes and removes it afterwards. The export writes a new kit
through it; the merge reads a returning kit through it. Queries name the alias
(``Model.objects.using(alias)``); nothing else in the process sees it. A new kit database is
migrated in a child process instead (``fleet.services.kits``): some data migrations query the
default database, which must never be the one migrated by accident.
"""

from __future__ import annotations

import secrets
import sqlite3
from collections.abc import Iterator
from contextlib import contextmanager
from pathlib import Path
from typing import Any

from django.conf import settings
from django.db import connections
from django.db.utils import load_backend


def _settings_for(path: Path) -> dict[str, Any]:
    return {
        "ENGINE": "django.db.backends.sqlite3",
        "NAME": str(path),
        "OPTIONS": dict(settings.HOLDFAST_SQLITE_OPTIONS),
        "TIME_ZONE": None,
        "CONN_MAX_AGE": 0,
        "CONN_HEALTH_CHECKS": False,
        "AUTOCOMMIT": True,
        "ATOMIC_REQUESTS": False,
        "USER": "",
        "PASSWORD": "",
        "HOST": "",
        "PORT": "",
        "TEST": {"NAME": str(path), "MIRROR": None, "CHARSET": None, "COLLATION": None},
    }


@contextmanager
def kit_database(path: Path) -> Iterator[str]:
    """Open the SQLite file ``path`` (created if missing) under a new alias; yield the alias."""
    alias = f"kit_{secrets.token_hex(6)}"
    # A connection made here, not listed in settings.DATABASES: only this thread sees it.
    backend = load_backend("django.db.backends.sqlite3")
    connections[alias] = backend.DatabaseWrapper(_settings_for(Path(path)), alias)
    try:
        yield alias
    finally:
        connections[alias].close()
        del connections[alias]


def copy_database(source: Path, target: Path) -> None:
    """A consistent copy of the SQLite file ``source`` at ``target`` (SQLite's online backup:
    whatever another connection is writing, the copy is one committed state), in rollback
    journal mode so it is a single file."""
    target.unlink(missing_ok=True)
    with sqlite3.connect(source) as src, sqlite3.connect(target) as dst:
        src.backup(dst)
        dst.execute("PRAGMA journal_mode=DELETE")
    src.close()
    dst.close()
