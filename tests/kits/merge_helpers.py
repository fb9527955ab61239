"""Kit databases for the merge tests, and writing on board through the services.

Until a kit file is needed, a kit database is a copy of the test database (``VACUUM INTO``)
marked as the kit (its Kit row ``here``); ``on_board`` makes it the default database for a
while, so the services write there as the vessel's laptop would. A test using these needs
``transaction=True`` (the copy sees only committed rows).
"""

import datetime as dt
import itertools
from collections.abc import Iterator
from contextlib import contextmanager
from pathlib import Path

from django.db import connections
from django.utils import timezone

from fleet.models import Kit, Transponder
from fleet.models.kits import forget_kit_here

_aliases = itertools.count(1)


def make_kit(*, code: str, units: list[Transponder], by, at: dt.datetime | None = None) -> Kit:
    """The shore's row of a kit exported now for ``units``."""
    at = at or timezone.now()
    kit = Kit.objects.create(
        code=code,
        job=f"Test job {code}",
        created_at=at,
        created_by=by,
        certificate_year=timezone.localdate(at).year,
        certificate_first=9000 + 50 * int(code[1:]),
        certificate_last=9049 + 50 * int(code[1:]),
    )
    kit.units.set(units)
    return kit


@contextmanager
def kit_copy(kit: Kit, directory: Path) -> Iterator[str]:
    """A kit database for ``kit``: the shore database as it is now, marked as the kit."""
    path = directory / f"{kit.code}-{next(_aliases)}.sqlite3"
    with connections["default"].cursor() as cursor:
        cursor.execute("VACUUM INTO %s", [str(path)])
    alias = f"kit_test_{next(_aliases)}"
    with open_alias(path, alias):
        Kit.objects.using(alias).filter(code=kit.code).update(here=True)
        forget_kit_here()
        yield alias


@contextmanager
def open_alias(path: Path, alias: str) -> Iterator[str]:
    """A connection to the SQLite file ``path`` under ``alias``, made on the fly (not in
    ``DATABASES``, so the test runner lets the test use it)."""
    from django.db.backends.sqlite3.base import DatabaseWrapper

    settings = dict(connections["default"].settings_dict)
    settings["NAME"] = str(path)
    connections[alias] = DatabaseWrapper(settings, alias)
    try:
        yield alias
    finally:
        connections[alias].close()
        del connections[alias]
        forget_kit_here()


@contextmanager
def on_board(alias: str) -> Iterator[None]:
    """Within: the services write to the kit database ``alias`` (the vessel's laptop)."""
    shore = connections["default"]
    connections["default"] = connections[alias]
    forget_kit_here()
    try:
        yield
    finally:
        connections["default"] = shore
        forget_kit_here()
