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

Not ``join_collapse_limit`` for all of them: held at 1 it cut the planning of the state read
with its nine joined rows (7 ms to 1.5 ms on a slow minute), but it also froze the join
order of the unit page's newest reading per position, whose ``IN (subquery)`` then came
last: every reading of the fleet was joined first, 2.5 s. It is set around the wide reads
(``written_join_order``), or for a whole page or refresh whose other reads join two tables
at most, of which PostgreSQL still chooses the one to drive (``UNIT_WRITE_READS``,
``reading_one_unit_in_written_order``).

All are set with ``set_config(…, true)``, that is ``SET LOCAL``: only inside the current
transaction, and put back when the block ends, by a statement, or, if the transaction can
take none after an error, by the rollback that must follow (PostgreSQL reverts ``SET LOCAL``
with the transaction or the savepoint it was made in). Nothing happens on SQLite or outside
a transaction.
"""

from __future__ import annotations

from collections.abc import Callable, Iterator, Mapping
from contextlib import AbstractContextManager, contextmanager, suppress
from contextvars import ContextVar
from functools import wraps
from typing import ParamSpec, TypeVar

from django.db import DatabaseError, connection, transaction

P = ParamSpec("P")
R = TypeVar("R")

UNIT_READS = {
    "random_page_cost": "1.1",
    "max_parallel_workers_per_gather": "0",
}


# The wide reads of one unit: the unit or its state row with every row they point to.
WRITTEN_JOIN_ORDER = {"join_collapse_limit": "1"}

# A write's refresh of one unit: its reads join two tables at most, but for the unit with
# its variant and place and the state row with its nine joined rows, which want the
# written order (``written_join_order``).
UNIT_WRITE_READS = {**UNIT_READS, **WRITTEN_JOIN_ORDER}

# What the enclosing ``planner_settings`` blocks have set, in this thread's connection.
_in_force: ContextVar[Mapping[str, str] | None] = ContextVar(
    "holdfast_planner_settings", default=None
)


@contextmanager
def planner_settings(values: Mapping[str, str], *, until_commit: bool = False) -> Iterator[None]:
    """Inside, PostgreSQL's planner runs with ``values``, set by ``set_config(…, true)`` in one
    statement that also reads what they were, and put back in one more on leaving (nothing
    on SQLite or outside a transaction). Put back after an error too, where the transaction
    still takes statements (a caller may catch a ``DoesNotExist`` and go on); where it does
    not, its rollback puts them back. Inside a block that has set them all already, nothing
    is sent.

    ``until_commit``: the caller ends the whole transaction right after the block (its
    outermost ``atomic``), whose end puts them back: no statement is sent for it."""
    if connection.vendor != "postgresql" or not connection.in_atomic_block:
        yield
        return
    in_force = _in_force.get() or {}
    if all(in_force.get(name) == value for name, value in values.items()):
        yield  # an enclosing block has set them all: nothing to send
        return
    token = _in_force.set({**in_force, **values})
    try:
        with _sent(values, until_commit=until_commit):
            yield
    finally:
        _in_force.reset(token)


@contextmanager
def _sent(values: Mapping[str, str], *, until_commit: bool) -> Iterator[None]:
    names = list(values)
    if until_commit:
        with connection.cursor() as cursor:
            cursor.execute(
                "SELECT " + ", ".join("set_config(%s, %s, true)" for _ in names),
                [v for n in names for v in (n, values[n])],
            )
        yield
        return
    with connection.cursor() as cursor:
        cursor.execute(
            "SELECT "
            + ", ".join("current_setting(%s)" for _ in names)
            + ", "
            + ", ".join("set_config(%s, %s, true)" for _ in names),
            [*names, *(v for n in names for v in (n, values[n]))],
        )
        before = cursor.fetchone()[: len(names)]

    def put_back() -> None:
        with connection.cursor() as cursor:
            cursor.execute(
                "SELECT " + ", ".join("set_config(%s, %s, true)" for _ in names),
                [v for pair in zip(names, before, strict=True) for v in pair],
            )

    try:
        yield
    except BaseException:
        if not connection.needs_rollback:
            with suppress(DatabaseError):  # an aborted transaction: its rollback does it
                put_back()
        raise
    put_back()


def unit_reads() -> AbstractContextManager[None]:
    """Inside, PostgreSQL plans for reads of a few rows by key (``UNIT_READS``)."""
    return planner_settings(UNIT_READS)


def written_join_order() -> AbstractContextManager[None]:
    """Inside, PostgreSQL joins in the order the query is written (``join_collapse_limit``
    1), for the wide reads of one unit only: a unit, or its state row, with the six to
    twelve rows its keys point to, each a LEFT JOIN by primary key, for which the written
    order is the best there is. Searching the orders of so many joins took longer than the
    read: planning the state row's 7–11 ms against 0.4–0.7 ms to run it, and 1.5 ms planned
    in the written order (EXPLAIN ANALYZE, 5,000-unit fleet, on a slow minute). Not for
    reads whose joins filter (see the module's note on the unit page)."""
    return planner_settings(WRITTEN_JOIN_ORDER)


def _reading_under(values: Mapping[str, str]) -> Callable[[Callable[P, R]], Callable[P, R]]:
    def decorate(fn: Callable[P, R]) -> Callable[P, R]:
        @wraps(fn)
        def run(*args: P.args, **kwargs: P.kwargs) -> R:
            if connection.vendor != "postgresql":
                return fn(*args, **kwargs)
            # Its own transaction (not a savepoint in a caller's): its COMMIT puts the
            # settings back, with no statement of their own.
            own = not connection.in_atomic_block
            with transaction.atomic(), planner_settings(values, until_commit=own):
                return fn(*args, **kwargs)

        return run

    return decorate


def reading_one_unit(fn: Callable[P, R]) -> Callable[P, R]:
    """``fn`` (a page about one unit) run under ``unit_reads``; on PostgreSQL in a
    transaction of its own for that, which a read-only page costs only its BEGIN and
    COMMIT. On SQLite as it is: a transaction there takes the write lock."""
    return _reading_under(UNIT_READS)(fn)


def reading_one_unit_in_written_order(fn: Callable[P, R]) -> Callable[P, R]:
    """``reading_one_unit`` with ``written_join_order`` for the whole page: for a page whose
    one wide read is the unit with its joined rows and whose other reads join two tables at
    most, for which the setting changes nothing (PostgreSQL still weighs both sides of a
    single join). One statement instead of three."""
    return _reading_under({**UNIT_READS, **WRITTEN_JOIN_ORDER})(fn)
