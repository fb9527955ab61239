"""Planner settings for a run of one unit's reads on PostgreSQL.

A write refreshes one unit's derived rows with some twenty small reads, each of a few rows
found by key, and a unit's pages read its rows the same way. Two of PostgreSQL's defaults
cost them more than the rows do:

- ``random_page_cost``: the default 4 models a spinning disk. Against it, reading a unit's
  latest release or pressure test or its sensor checks scanned the whole table of tests
  (1.5–3.5 ms each, 5,000-unit fleet, EXPLAIN ANALYZE) rather than follow the index from
  the unit's few visits. The PostgreSQL manual (runtime-config-query, ``random_page_cost``)
  says a lower value suits storage whose random reads cost little more than sequential
  ones; 1.1 is the value commonly used for solid-state disks (common practice, no
  published source). At 1.1 each took 0.05 ms.
- ``max_parallel_workers_per_gather``: the anode chart of a unit with 5,000 readings read
  its 1,667 readings of one position through a parallel plan, starting a worker process for
  a read of a few milliseconds. None here: one unit's rows are never worth a worker.

Not ``join_collapse_limit``: held at 1 it cut the planning of the state read with its nine
joined rows (7 ms to 1.5 ms on a slow minute), but it also froze the join order of the unit
page's newest reading per position, whose ``IN (subquery)`` then came last: every reading
of the fleet was joined first, 2.5 s.

Both are set with ``set_config(…, true)``, that is ``SET LOCAL``: only inside the current
transaction, and put back when the block ends. If the block raises, the rollback that
follows puts them back (PostgreSQL reverts ``SET LOCAL`` with the transaction or the
savepoint it was made in). Nothing happens on SQLite or outside a transaction.
"""

from __future__ import annotations

from collections.abc import Callable, Iterator
from contextlib import contextmanager
from functools import wraps
from typing import ParamSpec, TypeVar

from django.db import connection, transaction

P = ParamSpec("P")
R = TypeVar("R")

UNIT_READS = {
    "random_page_cost": "1.1",
    "max_parallel_workers_per_gather": "0",
}


@contextmanager
def unit_reads() -> Iterator[None]:
    """Inside, PostgreSQL plans for reads of a few rows by key (``UNIT_READS``)."""
    if connection.vendor != "postgresql" or not connection.in_atomic_block:
        yield
        return
    names = list(UNIT_READS)
    with connection.cursor() as cursor:
        cursor.execute(
            "SELECT "
            + ", ".join("current_setting(%s)" for _ in names)
            + ", "
            + ", ".join("set_config(%s, %s, true)" for _ in names),
            [*names, *(v for n in names for v in (n, UNIT_READS[n]))],
        )
        before = cursor.fetchone()[: len(names)]
    yield
    with connection.cursor() as cursor:
        cursor.execute(
            "SELECT " + ", ".join("set_config(%s, %s, true)" for _ in names),
            [v for pair in zip(names, before, strict=True) for v in pair],
        )


def reading_one_unit(fn: Callable[P, R]) -> Callable[P, R]:
    """``fn`` (a page about one unit) run under ``unit_reads``; on PostgreSQL in a
    transaction of its own for that, which a read-only page costs only its BEGIN and
    COMMIT. On SQLite as it is: a transaction there takes the write lock."""

    @wraps(fn)
    def run(*args: P.args, **kwargs: P.kwargs) -> R:
        if connection.vendor != "postgresql":
            return fn(*args, **kwargs)
        with transaction.atomic(), unit_reads():
            return fn(*args, **kwargs)

    return run
