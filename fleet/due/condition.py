"""A unit's condition, derived from its records at read time. Written once, in SQL.

Only what the records cannot know is set by hand: the hold (quarantined, retired, lost, with a
reason). Everything else follows the records, first match wins:

1. the hold, when there is one: lost, retired, quarantined;
2. in the water: a deployment with no recovery time;
3. on the bench: a service record with no close time;
4. needs work: a stored due row (``DueRow``, kept per unit by the write services) is due on
   or before ``on`` or has no data, or the unit has no stored rows at all (never written
   through a service: nothing is known about it);
5. ready.

``annotate_condition`` adds the condition to a ``Transponder`` queryset as one ``CASE`` over
``EXISTS`` subqueries, so a list, a filter or a count by condition stays one query however many
units there are; ``condition_of`` runs the same expression for one unit.

Example: a unit whose last release test failed on a closed record has a release-test due row
dated the day it was computed, so on that day and after it reads "needs work", never "ready".
"""

from __future__ import annotations

import datetime as dt
from enum import StrEnum
from typing import TypedDict

from django.db.models import Case, CharField, Exists, OuterRef, Q, QuerySet, Value, When
from django_stubs_ext import WithAnnotations

from fleet.models import Deployment, DueRow, ServiceRecord, Transponder, UnitHold


class Condition(StrEnum):
    LOST = "lost"
    RETIRED = "retired"
    QUARANTINED = "quarantined"
    IN_WATER = "in_water"
    ON_BENCH = "on_bench"
    NEEDS_WORK = "needs_work"
    READY = "ready"

    @property
    def label(self) -> str:
        return _LABEL[self]

    @property
    def icon(self) -> str:
        # Shapes of our own, readable in black and white and distinct from the due-state
        # shapes (▲ ◆ ● ○) and the verdict shapes (✔ ! ✖).
        return _ICON[self]

    @property
    def held(self) -> bool:
        return self in HELD

    @classmethod
    def choices(cls) -> list[tuple[str, str]]:
        return [(c.value, c.label) for c in cls]


_LABEL = {
    Condition.LOST: "Lost",
    Condition.RETIRED: "Retired",
    Condition.QUARANTINED: "Quarantined",
    Condition.IN_WATER: "In the water",
    Condition.ON_BENCH: "On the bench",
    Condition.NEEDS_WORK: "Needs work",
    Condition.READY: "Ready",
}
_ICON = {
    Condition.LOST: "?",
    Condition.RETIRED: "⊟",
    Condition.QUARANTINED: "⊘",
    Condition.IN_WATER: "⚓",
    Condition.ON_BENCH: "⚒",
    Condition.NEEDS_WORK: "⚑",
    Condition.READY: "★",
}
HELD = frozenset({Condition.LOST, Condition.RETIRED, Condition.QUARANTINED})
# The hold outranks what the records say, in this order.
_HOLDS = (
    (UnitHold.LOST, Condition.LOST),
    (UnitHold.RETIRED, Condition.RETIRED),
    (UnitHold.QUARANTINED, Condition.QUARANTINED),
)


def condition_expression(on: dt.date) -> Case:
    """The condition of the unit in the outer query, as of the day ``on``."""
    unit = OuterRef("pk")
    in_water = Exists(Deployment.objects.filter(unit=unit, recovered_at__isnull=True))
    on_bench = Exists(ServiceRecord.objects.filter(unit=unit, closed_at__isnull=True))
    rows = DueRow.objects.filter(unit=unit)
    needs_work = Exists(rows.filter(Q(due_on__isnull=True) | Q(due_on__lte=on))) | ~Exists(rows)
    return Case(
        *(When(hold=hold, then=Value(condition.value)) for hold, condition in _HOLDS),
        When(in_water, then=Value(Condition.IN_WATER.value)),
        When(on_bench, then=Value(Condition.ON_BENCH.value)),
        When(needs_work, then=Value(Condition.NEEDS_WORK.value)),
        default=Value(Condition.READY.value),
        output_field=CharField(),
    )


class ConditionColumn(TypedDict):
    """The column ``annotate_condition`` adds: a ``Condition`` value."""

    condition: str


def annotate_condition(
    queryset: QuerySet[Transponder], on: dt.date
) -> QuerySet[WithAnnotations[Transponder, ConditionColumn]]:
    """``queryset`` with a ``condition`` column (a ``Condition`` value) computed in SQL."""
    return queryset.annotate(condition=condition_expression(on))


def condition_of(unit: Transponder, on: dt.date) -> Condition:
    """One unit's condition on ``on``: the same SQL as the lists, one query."""
    value = (
        annotate_condition(Transponder.objects.filter(pk=unit.pk), on)
        .values_list("condition", flat=True)
        .get()
    )
    return Condition(value)
