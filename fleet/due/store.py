"""Stored due items: derived per unit at each write, read by every page, feed and export.

``refresh_unit`` is what every write service calls inside its transaction, for every unit
whose inputs it changed: it rewrites the unit's derived state (``state.py``) and then its
due rows from the engine. Reading due items is then one query over the stored rows,
classified against the day in SQL.

A due date runs from the unit's last event (``duty.py``), so a stored row stays exact on
every later day with no write; ``rebuild_state --check`` proves stored == rebuilt.
"""

from __future__ import annotations

import datetime as dt
import gc
from collections.abc import Callable, Iterator
from contextlib import contextmanager
from contextvars import ContextVar
from dataclasses import dataclass
from typing import TYPE_CHECKING, TypedDict

from django.db import transaction
from django.db.models import (
    Case,
    Count,
    IntegerField,
    Prefetch,
    Q,
    QuerySet,
    Value,
    When,
    prefetch_related_objects,
)
from django.utils import timezone

from fleet.models import DueRow, ServiceRecord, Transponder, Variant
from fleet.models.bulk import insert_instances, insert_values
from fleet.models.session import UNIT_WRITE_READS, planner_settings, written_join_order

from .engine import (
    INACTIVE,
    UNIT_STATE_PREFETCH,
    VARIANT_PREFETCH,
    evaluate_unit,
    fleet_queryset,
)
from .items import DueItem, DueState, ItemKind, classify
from .rules import Rules
from .state import (
    Derived,
    FleetInputs,
    UnitInputs,
    attach_named_records,
    read_inputs,
    refresh_states,
    refresh_unit_state,
)

if TYPE_CHECKING:
    from django_stubs_ext import WithAnnotations

_ROW_FIELDS = ("unit_id", "kind", "key", "item", "due_on", "basis", "flags", "failed", "position")


def _row_values(
    unit: Transponder,
    *,
    on: dt.date,
    rules_cache: dict[int, Rules],
    derived: Derived | None = None,
) -> list[tuple[object, ...]]:
    """The unit's due rows as the values of ``_ROW_FIELDS``: ``unit`` loaded as
    ``fleet_queryset`` loads it, or with its state rows as just derived (``derived``)."""
    evaluation = evaluate_unit(unit, on=on, rules_cache=rules_cache, derived=derived)
    return [
        (
            unit.pk,
            item.kind.value,
            item.key,
            item.item,
            item.due_on,
            item.basis,
            "\n".join(item.flags),
            item.failed,
            index,
        )
        for index, item in enumerate(evaluation.items)
    ]


def _rows_of(unit: Transponder, *, on: dt.date, rules_cache: dict[int, Rules]) -> list[DueRow]:
    """The unit's due rows (``unit`` loaded as ``fleet_queryset`` loads it), unsaved."""
    return [
        DueRow(**dict(zip(_ROW_FIELDS, values, strict=True)))
        for values in _row_values(unit, on=on, rules_cache=rules_cache)
    ]


# Units read at a time by ``derived_rows`` (its queries repeat per chunk; its memory is a
# chunk's).
DERIVE_CHUNK = 500


def derived_rows(unit_ids: list[int] | None = None) -> Iterator[DueRow]:
    """The due rows the engine derives now from the stored state, unsaved."""
    units = (
        Transponder.objects.all()
        if unit_ids is None
        else Transponder.objects.filter(pk__in=unit_ids)
    )
    cache: dict[int, Rules] = {}
    today = timezone.localdate()
    for unit in fleet_queryset(units.order_by("pk"), share_variants=True).iterator(
        chunk_size=DERIVE_CHUNK
    ):
        yield from _rows_of(unit, on=today, rules_cache=cache)


def store_due_rows(unit: Transponder) -> None:
    """Rewrite the unit's stored due rows. ``unit``'s variant may come with its positions and
    reply steps loaded (``refresh_unit`` loads them once for the state and the due rows); its
    state rows are read here, after they were written."""
    with written_join_order():  # the state row with its nine joined rows
        prefetch_related_objects([unit], *UNIT_STATE_PREFETCH)
    DueRow.objects.filter(unit_id=unit.pk).delete()
    insert_instances(_rows_of(unit, on=timezone.localdate(), rules_cache={}))


# Units whose refresh is put off to the end of ``refreshing_once`` (None: refresh at once).
_deferred: ContextVar[set[int] | None] = ContextVar("holdfast_deferred_refresh", default=None)


@contextmanager
def refreshing_once(*, at: dt.datetime) -> Iterator[set[int]]:
    """Inside, ``refresh_unit`` only notes the unit; on leaving without an error, each noted
    unit is refreshed once (a bulk import writes many records per unit through the services,
    and the state derived once from all of them equals the state derived after each). Use it
    inside the transaction of the writes. Nested use joins the outer one. The units are
    refreshed by chunks, each unit's state and then the chunk's due rows together."""
    if _deferred.get() is not None:
        yield set()
        return
    pending: set[int] = set()
    token = _deferred.set(pending)
    try:
        yield pending
    finally:
        _deferred.reset(token)
    # As ``rebuild_all`` does, by chunks of units: each unit's state rows, then the chunk's
    # due rows from them; the same rows as ``refresh_unit`` on each.
    unit_ids = sorted(pending)
    for first in range(0, len(unit_ids), REBUILD_CHUNK):
        _rebuild_chunk(unit_ids[first : first + REBUILD_CHUNK], at=at)


@transaction.atomic(savepoint=False)
def refresh_unit(
    unit: Transponder,
    *,
    at: dt.datetime,
    visit: ServiceRecord | None = None,
    new_visit: bool = False,
) -> None:
    """Rewrite the unit's derived state, then its stored due items. The unit row is locked
    first, so two writers refreshing one unit take turns instead of colliding. Inside
    ``refreshing_once`` the unit is only noted, to be refreshed once at its end. ``visit``
    (and ``new_visit``): the write changed only that visit and its entries (it created the
    visit), so a save at the end of the history brings the stored state forward instead
    of deriving it again (``refresh_unit_state``)."""
    pending = _deferred.get()
    if pending is not None:
        pending.add(unit.pk)
        return
    # Locked, then read again inside the lock, with what both steps read of its variant;
    # every read here is of this unit's few rows, by key, and joins two tables at most but
    # for the unit's and the state row's wide reads by key (``UNIT_WRITE_READS``).
    with planner_settings(UNIT_WRITE_READS):
        locked = (
            Transponder.objects.select_for_update(of=("self",))
            .select_related("variant", "place")
            .prefetch_related(*(f"variant__{name}" for name in VARIANT_PREFETCH))
            .get(pk=unit.pk)
        )
        refresh_unit_state(locked, at=at, visit=visit, new_visit=new_visit)
        store_due_rows(locked)


def refresh_units(units: QuerySet[Transponder], *, at: dt.datetime) -> int:
    """``refresh_unit`` for each of ``units`` (a site, variant or rule changed under them),
    by chunks as ``rebuild_all`` does; the unit count."""
    unit_ids = list(units.order_by("pk").values_list("pk", flat=True))
    pending = _deferred.get()
    if pending is not None:
        pending.update(unit_ids)
        return len(unit_ids)
    for first in range(0, len(unit_ids), REBUILD_CHUNK):
        _rebuild_chunk(unit_ids[first : first + REBUILD_CHUNK], at=at)
    return len(unit_ids)


REBUILD_CHUNK = 250


@transaction.atomic
def rebuild_all(*, at: dt.datetime) -> int:
    """Recompute every unit's state and stored due items from its records; the unit count.

    In one transaction, every unit locked first: each kind of record the state reads is
    read in one ordered pass over the whole fleet (``FleetInputs``), handed out by chunks of
    units, each chunk's state rows derived from them by the derivation a write runs
    (``refresh_states``), then its due rows evaluated by the engine from those rows as
    derived (with the tests and checks they name read in three queries, not the rows read
    back); both deleted and written in bulk (``fleet/models/bulk.py``). One pass per kind
    instead of a query per kind per chunk: a chunk's records are found by unit through an
    index, but a database may scan every reading for each (PostgreSQL did, 21 times)."""
    unit_ids = list(
        Transponder.objects.select_for_update().order_by("pk").values_list("pk", flat=True)
    )
    fleet = FleetInputs()
    for first in range(0, len(unit_ids), REBUILD_CHUNK):
        _rebuild_chunk(unit_ids[first : first + REBUILD_CHUNK], at=at, read=fleet.read)
    return len(unit_ids)


@contextmanager
def _collector_paused() -> Iterator[None]:
    """Python's cycle collector off for one chunk: a chunk allocates some hundred thousand
    short-lived rows and records, and each pass of the collector would scan them all (about
    a third of the rebuild's time). What a chunk leaves in cycles is collected after it."""
    enabled = gc.isenabled()
    gc.disable()
    try:
        yield
    finally:
        if enabled:
            gc.enable()


@transaction.atomic
@_collector_paused()
def _rebuild_chunk(
    unit_ids: list[int],
    *,
    at: dt.datetime,
    read: Callable[[list[Transponder]], dict[int, UnitInputs]] = read_inputs,
) -> None:
    variants = Variant.objects.prefetch_related(*VARIANT_PREFETCH)
    units = list(
        Transponder.objects.select_for_update(of=("self",))
        .filter(pk__in=unit_ids)
        .select_related("place")
        .prefetch_related(Prefetch("variant", queryset=variants))
        .order_by("pk")
    )
    derived = refresh_states(units, at=at, read=read)
    # The due rows from the state rows as derived, not read back after their write.
    attach_named_records(derived)
    DueRow.objects.filter(unit_id__in=unit_ids).delete()
    today = timezone.localdate()
    cache: dict[int, Rules] = {}
    insert_values(
        DueRow,
        _ROW_FIELDS,
        (
            row
            for unit, rows in zip(units, derived, strict=True)
            for row in _row_values(unit, on=today, rules_cache=cache, derived=rows)
        ),
    )


def due_rows_snapshot() -> dict[tuple[int, str], tuple[object, ...]]:
    """The stored due rows, comparable with ``derived_snapshot``."""
    rows = DueRow.objects.order_by().values_list(*_ROW_FIELDS)  # into a dict: no sort
    return {(row[0], row[2]): row for row in rows.iterator()}


def derived_snapshot() -> dict[tuple[int, str], tuple[object, ...]]:
    """What the stored due rows would be if rebuilt now from the stored state."""
    return {
        (row.unit_id, row.key): tuple(getattr(row, f) for f in _ROW_FIELDS)
        for row in derived_rows()
    }


@dataclass(frozen=True, slots=True)
class DueTotals:
    overdue: int
    due_soon: int
    units_overdue: int


def active_rows(units: QuerySet[Transponder] | None = None) -> QuerySet[DueRow]:
    rows = DueRow.objects.exclude(unit__hold__in=INACTIVE)
    if units is not None:
        rows = rows.filter(unit__in=units.values("pk"))
    return rows


def state_rank(on: dt.date, soon_days: int) -> Case:
    """The row's ``DueState.rank`` in SQL, the same rule as ``engine.classify``."""
    return Case(
        When(due_on__isnull=True, then=Value(DueState.NO_DATA.rank)),
        When(due_on__lte=on, then=Value(DueState.OVERDUE.rank)),
        When(due_on__lte=on + dt.timedelta(days=soon_days), then=Value(DueState.DUE_SOON.rank)),
        default=Value(DueState.CURRENT.rank),
        output_field=IntegerField(),
    )


def due_totals(
    *, on: dt.date, soon_days: int, units: QuerySet[Transponder] | None = None
) -> DueTotals:
    return due_summary(on=on, soon_days=soon_days, units=units).totals


@dataclass(frozen=True, slots=True)
class DueSummary:
    totals: DueTotals
    listed: int  # rows ``due_queryset`` lists with the same arguments
    listed_flagged: int  # of them, rows with a flag


def _shown(show: str, on: dt.date, soon: dt.date) -> Q:
    """The rows ``show`` lists: "attention" (overdue, due soon, or flagged), "overdue", or
    "all"."""
    if show == "overdue":
        return Q(due_on__lte=on)
    if show == "all":
        return Q()
    return Q(due_on__lte=soon) | ~Q(flags="")


def due_summary(
    *,
    on: dt.date,
    soon_days: int,
    show: str = "attention",
    units: QuerySet[Transponder] | None = None,
    kind: str = "",
) -> DueSummary:
    """The totals, and how many rows ``due_queryset`` lists (and how many of them carry a
    flag) with the same arguments, in one pass over the stored rows. One query."""
    soon = on + dt.timedelta(days=soon_days)
    listed = _shown(show, on, soon) & (Q(kind=kind) if kind else Q())
    counts = active_rows(units).aggregate(
        overdue=Count("pk", filter=Q(due_on__lte=on)),
        due_soon=Count("pk", filter=Q(due_on__gt=on, due_on__lte=soon)),
        units_overdue=Count("unit", filter=Q(due_on__lte=on), distinct=True),
        listed=Count("pk", filter=listed),
        listed_flagged=Count("pk", filter=listed & ~Q(flags="")),
    )
    totals = DueTotals(counts["overdue"], counts["due_soon"], counts["units_overdue"])
    return DueSummary(totals, counts["listed"], counts["listed_flagged"])


class StateRankColumn(TypedDict):
    """The column ``due_queryset`` adds: ``state_rank``, most urgent lowest."""

    state_rank: int


if TYPE_CHECKING:
    # Only for the checker: at run time the alias cannot take the column's type.
    RankedDueRow = WithAnnotations[DueRow, StateRankColumn]


def due_queryset(
    *,
    on: dt.date,
    soon_days: int,
    show: str = "attention",
    units: QuerySet[Transponder] | None = None,
    kind: str = "",
) -> QuerySet[RankedDueRow]:
    """Stored due items with their state rank, most urgent first; filtered and sorted in SQL.

    ``show``: "attention" (overdue, due soon, or flagged), "overdue", or "all".
    """
    soon = on + dt.timedelta(days=soon_days)
    rows = active_rows(units).filter(_shown(show, on, soon))
    if kind:
        rows = rows.filter(kind=kind)
    return (
        rows.select_related("unit__variant", "unit__place")
        .annotate(state_rank=state_rank(on, soon_days))
        .order_by("state_rank", "due_on", "unit__serial", "item")
    )


def due_items_stored(
    *, on: dt.date, soon_days: int, show: str = "all", units: QuerySet[Transponder] | None = None
) -> list[DueItem]:
    """The stored rows as ``DueItem``s (for the calendar feed and other plain consumers)."""
    return [
        DueItem(
            row.unit_id,
            row.unit.serial,
            row.unit.variant.name,
            row.unit.place.name if row.unit.place else "",
            ItemKind(row.kind),
            row.key,
            row.item,
            row.due_on,
            classify(row.due_on, on, soon_days),
            row.basis,
            tuple(row.flags.splitlines()),
            row.failed,
        )
        for row in due_queryset(on=on, soon_days=soon_days, show=show, units=units)
    ]


def unit_due_items(unit: Transponder, *, on: dt.date, soon_days: int) -> list[DueItem]:
    """One unit's stored due items in the unit page's order (one query)."""
    place = unit.place.name if unit.place else ""
    return [
        DueItem(
            unit.pk,
            unit.serial,
            unit.variant.name,
            place,
            ItemKind(row.kind),
            row.key,
            row.item,
            row.due_on,
            classify(row.due_on, on, soon_days),
            row.basis,
            tuple(row.flags.splitlines()),
            row.failed,
        )
        for row in DueRow.objects.filter(unit=unit).order_by("position")
    ]


EXPORT_HEADER = ("State", "Unit", "Variant", "Place", "Kind", "Item", "Due", "Basis", "Flags")


# What a list of due rows shows of each (the overview's table and the CSV export, beside
# ``state_rank``): a listing reads only these.
LISTED_COLUMNS = (
    "unit__serial",
    "unit__variant__name",
    "unit__place__name",
    "kind",
    "item",
    "due_on",
    "basis",
    "flags",
)


def export_rows(rows: QuerySet[RankedDueRow]) -> Iterator[tuple[object, ...]]:
    """The rows of ``due_queryset`` as plain cells for a CSV export, header first; reads the
    values straight from the query (no model instances), so a whole fleet exports quickly."""
    yield EXPORT_HEADER
    values = rows.values_list("state_rank", *LISTED_COLUMNS)
    for rank, serial, variant, place, kind, item, due_on, basis, flags in values.iterator():
        yield (
            DueState.from_rank(rank).label,
            serial,
            variant,
            place or "",
            _KIND_LABEL[kind],
            item,
            due_on.isoformat() if due_on else "",
            basis,
            "; ".join(flags.splitlines()),
        )


_KIND_LABEL = {kind.value: kind.label for kind in ItemKind}

__all__ = [
    "export_rows",
    "DueTotals",
    "derived_snapshot",
    "due_rows_snapshot",
    "rebuild_all",
    "refresh_units",
    "unit_due_items",
    "due_items_stored",
    "due_queryset",
    "due_totals",
    "refresh_unit",
    "refreshing_once",
    "store_due_rows",
]
