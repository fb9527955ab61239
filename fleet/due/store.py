"""Stored due items: computed per unit at each write, read fleet-wide by the overview.

``refresh_unit`` is what every write service calls inside its transaction: it rewrites the
unit's derived state (``state.py``) and then its due rows from the engine. Reading a fleet's
due list is then one query over the stored rows, classified against today's date in SQL.

A projection that depends on the passage of time (a unit sitting in store spreads its wear
over a falling share of time in the water) drifts slowly between writes; ``rebuild_state``
run daily keeps every row current, and the overview says when its rows were computed.
"""

from __future__ import annotations

import datetime as dt
from collections.abc import Iterator
from dataclasses import dataclass

from django.db import transaction
from django.db.models import Case, Count, IntegerField, Min, Q, QuerySet, Value, When
from django.utils import timezone

from fleet.models import DueRow, Transponder

from .engine import INACTIVE, DueItem, DueState, ItemKind, classify, evaluate_unit, fleet_queryset
from .state import refresh_unit_state


def store_due_rows(unit: Transponder, *, at: dt.datetime) -> list[DueRow]:
    loaded = fleet_queryset(Transponder.objects.filter(pk=unit.pk)).get()
    on = timezone.localdate(at)
    evaluation = evaluate_unit(loaded, on=on, at=at)
    DueRow.objects.filter(unit_id=unit.pk).delete()
    return DueRow.objects.bulk_create(
        DueRow(
            unit_id=unit.pk,
            kind=item.kind.value,
            item=item.item,
            due_on=item.due_on,
            basis=item.basis,
            flags="\n".join(item.flags),
            computed_on=on,
        )
        for item in evaluation.items
    )


@transaction.atomic
def refresh_unit(unit: Transponder, *, at: dt.datetime) -> None:
    """Rewrite the unit's derived state, then its stored due items."""
    refresh_unit_state(unit, at=at)
    store_due_rows(unit, at=at)


@dataclass(frozen=True, slots=True)
class DueTotals:
    overdue: int
    due_soon: int
    units_overdue: int
    oldest_computed_on: dt.date | None


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
    soon = on + dt.timedelta(days=soon_days)
    totals = active_rows(units).aggregate(
        overdue=Count("pk", filter=Q(due_on__lte=on)),
        due_soon=Count("pk", filter=Q(due_on__gt=on, due_on__lte=soon)),
        units_overdue=Count("unit", filter=Q(due_on__lte=on), distinct=True),
        oldest=Min("computed_on"),
    )
    return DueTotals(
        totals["overdue"], totals["due_soon"], totals["units_overdue"], totals["oldest"]
    )


def due_queryset(
    *,
    on: dt.date,
    soon_days: int,
    show: str = "attention",
    units: QuerySet[Transponder] | None = None,
    kind: str = "",
) -> QuerySet[DueRow]:
    """Stored due items with their state rank, most urgent first; filtered and sorted in SQL.

    ``show``: "attention" (overdue, due soon, or flagged), "overdue", or "all".
    """
    soon = on + dt.timedelta(days=soon_days)
    rows = active_rows(units)
    if show == "overdue":
        rows = rows.filter(due_on__lte=on)
    elif show != "all":
        rows = rows.filter(Q(due_on__lte=soon) | ~Q(flags=""))
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
            row.item,
            row.due_on,
            classify(row.due_on, on, soon_days),
            row.basis,
            tuple(row.flags.splitlines()),
        )
        for row in due_queryset(on=on, soon_days=soon_days, show=show, units=units)
    ]


EXPORT_HEADER = ("State", "Unit", "Variant", "Place", "Kind", "Item", "Due", "Basis", "Flags")


def export_rows(rows: QuerySet[DueRow]) -> Iterator[tuple[object, ...]]:
    """The rows of ``due_queryset`` as plain cells for a CSV export, header first; reads the
    values straight from the query (no model instances), so a whole fleet exports quickly."""
    yield EXPORT_HEADER
    values = rows.values_list(
        "state_rank",
        "unit__serial",
        "unit__variant__name",
        "unit__place__name",
        "kind",
        "item",
        "due_on",
        "basis",
        "flags",
    )
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
    "due_items_stored",
    "due_queryset",
    "due_totals",
    "refresh_unit",
    "store_due_rows",
]
