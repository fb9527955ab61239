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
from dataclasses import dataclass

from django.db import transaction
from django.db.models import Count, Min, Q, QuerySet
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
class DueList:
    items: list[DueItem]
    overdue: int
    due_soon: int
    units_overdue: int
    oldest_computed_on: dt.date | None


def active_rows(queryset: QuerySet[Transponder] | None = None) -> QuerySet[DueRow]:
    rows = DueRow.objects.exclude(unit__status__in=INACTIVE)
    if queryset is not None:
        rows = rows.filter(unit__in=queryset.values("pk"))
    return rows


def due_list(
    *,
    on: dt.date,
    soon_days: int,
    show: str = "attention",
    units: QuerySet[Transponder] | None = None,
    kind: str = "",
) -> DueList:
    """The fleet's due items for the overview, filtered in SQL (three queries).

    ``show``: "attention" (overdue, due soon, or flagged), "overdue", or "all".
    """
    soon = on + dt.timedelta(days=soon_days)
    rows = active_rows(units)
    totals = rows.aggregate(
        overdue=Count("pk", filter=Q(due_on__lte=on)),
        due_soon=Count("pk", filter=Q(due_on__gt=on, due_on__lte=soon)),
        units_overdue=Count("unit", filter=Q(due_on__lte=on), distinct=True),
        oldest=Min("computed_on"),
    )
    if show == "overdue":
        rows = rows.filter(due_on__lte=on)
    elif show != "all":
        rows = rows.filter(Q(due_on__lte=soon) | ~Q(flags=""))
    if kind:
        rows = rows.filter(kind=kind)
    values = rows.values_list(
        "unit_id",
        "unit__serial",
        "unit__variant__name",
        "unit__place__name",
        "kind",
        "item",
        "due_on",
        "basis",
        "flags",
    )
    items = [
        DueItem(
            unit_id,
            serial,
            variant,
            place or "",
            ItemKind(kind_value),
            item,
            due_on,
            classify(due_on, on, soon_days),
            basis,
            tuple(flags.splitlines()) if flags else (),
        )
        for unit_id, serial, variant, place, kind_value, item, due_on, basis, flags in values
    ]
    items.sort(key=lambda i: (i.state.rank, i.due_on or dt.date.max, i.serial, i.item))
    return DueList(
        items,
        totals["overdue"],
        totals["due_soon"],
        totals["units_overdue"],
        totals["oldest"],
    )


__all__ = ["DueList", "DueState", "due_list", "refresh_unit", "store_due_rows"]
