"""Kits for the merge tests, and writing on board through the services.

``exported_kit`` exports a kit as the shore does (``kit_export``), unpacks its file and opens
its database; ``on_board`` makes that database the default one for a while, so the services
write there as they do on the vessel's laptop.
"""

import itertools
from collections.abc import Iterator, Sequence
from contextlib import contextmanager
from pathlib import Path

from django.contrib.auth.models import User
from django.db import connections

from fleet.kits.db import kit_database
from fleet.kits.files import read_kit_file
from fleet.models import Kit, Site, Transponder
from fleet.models.kits import forget_kit_here
from fleet.services.kits import kit_export

_numbers = itertools.count(1)


@contextmanager
def exported_kit(
    units: Sequence[Transponder],
    *,
    by: User,
    users: Sequence[User],
    sites: Sequence[Site],
    directory: Path,
) -> Iterator[tuple[Kit, str]]:
    """A kit of ``units`` exported now; yields the shore's Kit row and the kit database's
    alias."""
    n = next(_numbers)
    out = directory / f"kit-{n}.holdfast-kit"
    kit = kit_export(units=units, sites=sites, users=users, job=f"Test job {n}", by=by, out=out)
    kit_file = read_kit_file(out, into=directory / f"kit-{n}")
    with kit_database(kit_file.db_path) as alias:
        yield kit, alias


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
