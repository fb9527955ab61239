"""Read-only queries that forms and pages share, each written once. Each states how many
queries it makes; tests/test_selectors.py holds it to that."""

import datetime as dt
from collections import defaultdict
from collections.abc import Mapping, Sequence
from dataclasses import dataclass
from typing import Any

from django.db.models import Count, Prefetch, Q
from django.utils import timezone

from fleet.due.acceptance import EntryVerdict, entry_verdict, release_test_failures
from fleet.due.condition import Condition, annotate_condition
from fleet.due.rules import Rules
from fleet.models import (
    AnodePosition,
    AnodeReading,
    BatteryInstall,
    Deployment,
    DueRow,
    ReleaseTest,
    SealChange,
    SealPosition,
    ServiceRecord,
    Transponder,
    UnitHold,
)
from fleet.models.records import entry_kinds


@dataclass(frozen=True, slots=True)
class PreviousAnodeMass:
    mass_g: float
    on: dt.date


def previous_anode_mass(
    *, unit_id: int, position_id: int, before: dt.datetime, exclude_record_id: int | None = None
) -> PreviousAnodeMass | None:
    """The last weighed mass of the anode now fitted at a position, from visits before
    ``before``; ``None`` if it has not been weighed since it was fitted.

    A reading marked *replaced* ends its anode: a new one went on after it, so readings up to
    and including it belong to the old anode. One query.
    """
    rows = AnodeReading.objects.filter(
        record__unit_id=unit_id, position_id=position_id, record__opened_at__lt=before
    )
    if exclude_record_id is not None:
        rows = rows.exclude(record_id=exclude_record_id)
    ordered = rows.order_by("-record__opened_at", "-pk").values_list(
        "mass_g", "replaced", "record__opened_at"
    )
    for mass_g, replaced, opened_at in ordered:
        if replaced:
            return None
        if mass_g is not None:
            return PreviousAnodeMass(mass_g, timezone.localdate(opened_at))
    return None


# The unit page


def unit_records(*, unit: Transponder) -> list[ServiceRecord]:
    """The unit's bench visits with every entry loaded. One query, plus one per entry kind
    and one for amendments (eight) when there is at least one record."""
    return list(
        ServiceRecord.objects.filter(unit=unit)
        .select_related("technician", "place", "closed_by")
        .prefetch_related(
            *(
                Prefetch(kind.related_name(), queryset=kind.with_list_related())
                for kind in entry_kinds()
            ),
            "amendments",
        )
    )


def unit_deployments(*, unit: Transponder) -> list[Deployment]:
    """The unit's deployments with their sites and override authors. One query."""
    return list(Deployment.objects.filter(unit=unit).select_related("site", "override_by"))


def _latest_by_position(entries: list[Any]) -> dict[int, Any]:
    latest: dict[int, Any] = {}
    for entry in entries:  # newest first
        latest.setdefault(entry.position_id, entry)
    return latest


def last_anode_readings(*, unit: Transponder) -> dict[int, AnodeReading]:
    """The newest reading at each anode position, by position id. One query."""
    readings = list(
        AnodeReading.objects.filter(record__unit=unit)
        .select_related("record", "position")
        .order_by("-record__opened_at", "-pk")
    )
    return _latest_by_position(readings)


def last_seal_changes(*, unit: Transponder) -> dict[int, SealChange]:
    """The newest seal change at each seal position, by position id. One query."""
    seal_changes = list(
        SealChange.objects.filter(record__unit=unit)
        .select_related("record", "position")
        .order_by("-record__opened_at", "-pk")
    )
    return _latest_by_position(seal_changes)


def fitted_pack(*, unit: Transponder) -> BatteryInstall | None:
    """The pack in the unit now (installed, not removed). One query."""
    return BatteryInstall.objects.filter(unit=unit, removal__isnull=True).first()


HistoryEntry = tuple[str, dt.datetime, ServiceRecord | Deployment, list[tuple[str, str]]]


def entry_lines(record: ServiceRecord, rules: Rules) -> list[tuple[str, str]]:
    """(line, warning) for each entry of a prefetched record, kind by kind. No query."""
    lines = []
    for kind in entry_kinds():
        for entry in getattr(record, kind.related_name()).all():
            warning = entry.warning()
            if isinstance(entry, ReleaseTest) and release_test_failures(entry, rules):
                warning = "fault noted"
            lines.append((entry.history_line(), warning))
    return lines


def unit_history(
    records: list[ServiceRecord], deployments: list[Deployment], rules: Rules
) -> list[HistoryEntry]:
    """Bench visits and deployments in one list, newest first: ``(kind, when, item, lines)``
    with kind ``"record"`` or ``"deployment"`` and a record's entry lines. No query."""
    entries: list[HistoryEntry] = [
        ("record", r.opened_at, r, entry_lines(r, rules)) for r in records
    ]
    entries += [("deployment", d.over_side_at, d, []) for d in deployments]
    return sorted(entries, key=lambda item: item[1], reverse=True)


@dataclass(frozen=True, slots=True)
class UnitPage:
    anodes: list[tuple[AnodePosition, AnodeReading | None]]
    seals: list[tuple[SealPosition, SealChange | None]]
    fitted_pack: BatteryInstall | None
    open_deployment: Deployment | None
    open_record: ServiceRecord | None
    history: list[HistoryEntry]


def unit_page(*, unit: Transponder, rules: Rules) -> UnitPage:
    """What the unit page shows besides the due items, for a unit loaded with its variant.

    Queries: anode positions, seal positions, anode readings, seal changes, fitted pack,
    records (plus eight prefetches when there are records), deployments: 7, or 15.
    """
    variant = unit.variant
    anode_positions = list(variant.anode_positions.all())
    seal_positions = list(variant.seal_positions.all())
    last_reading = last_anode_readings(unit=unit)
    last_seal = last_seal_changes(unit=unit)
    pack = fitted_pack(unit=unit)
    records = unit_records(unit=unit)
    deployments = unit_deployments(unit=unit)
    return UnitPage(
        anodes=[(p, last_reading.get(p.pk)) for p in anode_positions],
        seals=[(p, last_seal.get(p.pk)) for p in seal_positions],
        fitted_pack=pack,
        open_deployment=next((d for d in deployments if d.recovered_at is None), None),
        open_record=next((r for r in records if r.closed_at is None), None),
        history=unit_history(records, deployments, rules),
    )


# The record page


def record_sections(
    *, record: ServiceRecord, rules: Rules
) -> list[tuple[str, list[tuple[Any, EntryVerdict | None]]]]:
    """The record's entries by kind, titled, in page order, each with its verdict when it is
    a test (``fleet.due.acceptance.entry_verdict``). One query per entry kind."""
    variant = record.unit.variant
    return [
        (
            kind.plural_title(),
            [
                (entry, entry_verdict(entry, variant, rules))
                for entry in kind.with_list_related(getattr(record, kind.related_name()).all())
            ],
        )
        for kind in entry_kinds()
    ]


def record_amendments(*, record: ServiceRecord) -> list[Any]:
    """The record's amendments with their authors and targets' types. One query."""
    return list(record.amendments.select_related("created_by", "target_type"))


# The overview


@dataclass(frozen=True, slots=True)
class FleetCounts:
    by_condition: dict[Condition, int]  # every condition, in Condition order, zero where none
    total: int
    by_place: Sequence[Mapping[str, Any]]  # {"place__name": ..., "n": ...}, by place name


def fleet_counts(*, on: dt.date) -> FleetCounts:
    """Units by their condition on ``on`` and by place. Two queries."""
    counted = dict(
        annotate_condition(Transponder.objects.order_by(), on)
        .values("condition")
        .annotate(n=Count("pk"))
        .values_list("condition", "n")
    )
    by_place = list(
        Transponder.objects.values("place__name").annotate(n=Count("pk")).order_by("place__name")
    )
    by_condition = {c: counted.get(c.value, 0) for c in Condition}
    return FleetCounts(by_condition=by_condition, total=sum(counted.values()), by_place=by_place)


def open_records(*, limit: int = 20) -> list[ServiceRecord]:
    """Bench visits not yet closed, oldest first, with unit and technician. One query."""
    return list(
        ServiceRecord.objects.filter(closed_at__isnull=True)
        .select_related("unit", "technician")
        .order_by("opened_at")[:limit]
    )


def units_in_water(*, limit: int = 50) -> list[Deployment]:
    """Deployments not yet recovered, longest in the water first, with unit and site. One
    query. A unit held as lost is left out: it is not in the water as far as anyone knows."""
    return list(
        Deployment.objects.filter(recovered_at__isnull=True)
        .exclude(unit__hold=UnitHold.LOST)
        .select_related("unit", "site")
        .order_by("over_side_at")[:limit]
    )


@dataclass(frozen=True, slots=True)
class TimelineSpan:
    """A stretch of time on the timeline: a deployment or a bench visit. ``end`` None: still
    open (drawn to the window's "today")."""

    start: dt.date
    end: dt.date | None
    label: str
    lost: bool = False


@dataclass(frozen=True, slots=True)
class TimelineRow:
    serial: str
    variant: str
    deployments: tuple[TimelineSpan, ...]
    visits: tuple[TimelineSpan, ...]
    due: tuple[tuple[dt.date, str], ...]  # (due date, item)


def timeline_rows(
    *, units: Sequence[Transponder], start: dt.date, end: dt.date
) -> list[TimelineRow]:
    """Each unit's deployments, bench visits and due dates touching ``start``..``end``.

    Three queries whatever the number of units (deployments with their site, bench visits,
    due rows); ``units`` come in with their variant selected.
    """
    ids = [u.pk for u in units]
    lo = dt.datetime.combine(start, dt.time.min, tzinfo=dt.UTC)
    hi = dt.datetime.combine(end, dt.time.max, tzinfo=dt.UTC)
    deployments: dict[int, list[TimelineSpan]] = defaultdict(list)
    lost = {u.pk for u in units if u.hold == UnitHold.LOST}
    for d in (
        Deployment.objects.filter(unit_id__in=ids, over_side_at__lte=hi)
        .filter(Q(recovered_at__isnull=True) | Q(recovered_at__gte=lo))
        .select_related("site")
        .order_by("over_side_at")
    ):
        open_and_lost = d.recovered_at is None and d.unit_id in lost
        deployments[d.unit_id].append(
            TimelineSpan(
                timezone.localdate(d.over_side_at),
                timezone.localdate(d.recovered_at) if d.recovered_at else None,
                d.site.name,
                lost=open_and_lost,
            )
        )
    visits: dict[int, list[TimelineSpan]] = defaultdict(list)
    for r in (
        ServiceRecord.objects.filter(unit_id__in=ids, opened_at__lte=hi)
        .filter(Q(closed_at__isnull=True) | Q(closed_at__gte=lo))
        .order_by("opened_at")
        .values_list("unit_id", "opened_at", "closed_at")
    ):
        unit_id, opened_at, closed_at = r
        visits[unit_id].append(
            TimelineSpan(
                timezone.localdate(opened_at),
                timezone.localdate(closed_at) if closed_at else None,
                "bench visit",
            )
        )
    due: dict[int, list[tuple[dt.date, str]]] = defaultdict(list)
    for unit_id, due_on, item in (
        DueRow.objects.filter(unit_id__in=ids, due_on__range=(start, end))
        .order_by("due_on")
        .values_list("unit_id", "due_on", "item")
    ):
        if due_on is not None:  # within the range: never None, but the column allows it
            due[unit_id].append((due_on, item))
    return [
        TimelineRow(
            serial=u.serial,
            variant=u.variant.name,
            deployments=tuple(deployments[u.pk]),
            visits=tuple(visits[u.pk]),
            due=tuple(due[u.pk]),
        )
        for u in units
    ]
