"""Read-only queries that forms and pages share, each written once. Each states how many
queries it makes; tests/test_selectors.py holds it to that."""

import datetime as dt
from collections import defaultdict
from collections.abc import Collection, Iterable, Mapping, Sequence
from dataclasses import dataclass
from typing import Any, TypeVar

from django.core.exceptions import ValidationError
from django.db.models import (
    Count,
    DateField,
    F,
    Field,
    Model,
    OuterRef,
    Prefetch,
    Q,
    QuerySet,
    Subquery,
    TimeField,
)
from django.utils import timezone
from django.utils.text import capfirst

from fleet.due.acceptance import EntryVerdict, entry_verdict
from fleet.due.condition import Condition, annotate_condition
from fleet.due.rules import Rules
from fleet.formatting import field_label, field_value
from fleet.models import (
    Amendment,
    AnodePosition,
    AnodeReading,
    BatteryInstall,
    Deployment,
    DueRow,
    Kit,
    SealChange,
    SealPosition,
    SealState,
    ServiceRecord,
    Transponder,
    UnitHold,
    Variant,
)
from fleet.models.records import entry_kinds

_E = TypeVar("_E", AnodeReading, SealChange)


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
    return previous_anode_masses(
        unit_id=unit_id,
        position_ids=[position_id],
        before=before,
        exclude_record_id=exclude_record_id,
    )[position_id]


def previous_anode_masses(
    *,
    unit_id: int,
    position_ids: Collection[int],
    before: dt.datetime,
    exclude_record_id: int | None = None,
) -> dict[int, PreviousAnodeMass | None]:
    """``previous_anode_mass`` of each of ``position_ids`` (the same ``before``), in one
    query."""
    rows = AnodeReading.objects.filter(
        record__unit_id=unit_id, position_id__in=position_ids, record__opened_at__lt=before
    )
    if exclude_record_id is not None:
        rows = rows.exclude(record_id=exclude_record_id)
    ordered = rows.order_by("-record__opened_at", "-pk").values_list(
        "position_id", "mass_g", "replaced", "record__opened_at"
    )
    found: dict[int, PreviousAnodeMass | None] = {}
    for position_id, mass_g, replaced, opened_at in ordered:
        if position_id in found:
            continue
        if replaced:
            found[position_id] = None
        elif mass_g is not None:
            found[position_id] = PreviousAnodeMass(mass_g, timezone.localdate(opened_at))
    return {position_id: found.get(position_id) for position_id in position_ids}


# The unit page


def unit_records(*, unit: Transponder, pks: list[int] | None = None) -> list[ServiceRecord]:
    """The unit's bench visits (only ``pks`` if given) with every entry loaded. One query,
    plus one per entry kind and one for amendments when there is at least one record."""
    if pks is not None and not pks:
        return []
    records = ServiceRecord.objects.filter(unit=unit)
    if pks is not None:
        records = records.filter(pk__in=pks)
    return list(
        records.select_related("technician", "place", "closed_by").prefetch_related(
            *(
                Prefetch(kind.related_name(), queryset=kind.with_list_related())
                for kind in entry_kinds()
            ),
            "amendments",
        )
    )


def unit_deployments(*, unit: Transponder, pks: list[int] | None = None) -> list[Deployment]:
    """The unit's deployments (only ``pks`` if given) with their sites and override authors.
    One query (none for an empty ``pks``)."""
    if pks is not None and not pks:
        return []
    deployments = Deployment.objects.filter(unit=unit)
    if pks is not None:
        deployments = deployments.filter(pk__in=pks)
    return list(deployments.select_related("site", "override_by"))


def _newest_per_position(entries: QuerySet[_E], positions: QuerySet[Any]) -> dict[int, _E]:
    """The newest of ``entries`` at each of ``positions``, picked in SQL: for each position,
    the unit's visits are walked newest first (their index on unit and opening time) until
    one holds an entry there, so the cost does not grow with the unit's history. The
    position is matched as an expression (``position_id + 0``) so that SQLite's planner does
    not take the position's index instead, which holds that position's entries across the
    whole fleet. One query."""
    newest = (
        entries.alias(position_no=F("position_id") + 0)
        .filter(position_no=OuterRef("pk"))
        .order_by("-record__opened_at", "-pk")
        .values("pk")[:1]
    )
    picked = positions.order_by().annotate(newest=Subquery(newest)).values("newest")
    rows = entries.model._default_manager.filter(pk__in=picked)
    return {entry.position_id: entry for entry in rows.select_related("record", "position")}


def last_anode_readings(*, unit: Transponder) -> dict[int, AnodeReading]:
    """The newest reading at each anode position, by position id. One query."""
    return _newest_per_position(
        AnodeReading.objects.filter(record__unit=unit),
        AnodePosition.objects.filter(variant_id=unit.variant_id),
    )


def last_seal_changes(*, unit: Transponder) -> dict[int, SealChange]:
    """The newest seal change at each seal position, by position id. One query.

    Rings are changed every year or two and the unit is opened far more often, so a walk of
    the visits newest first would read every visit since the last change. The unit's seal
    state (derived by every write of a visit or a change) holds the opening time of the
    visit that fitted the ring now in (``fitted_at``): the change is looked up in that visit
    alone, the newest there, as the state derives it. A unit never written has neither."""
    fitted = SealState.objects.filter(unit=unit, position_id=OuterRef("pk")).values("fitted_at")[:1]
    at_fitting = (
        SealChange.objects.filter(record__unit=unit)
        .alias(position_no=F("position_id") + 0)
        .filter(position_no=OuterRef("pk"), record__opened_at=OuterRef("fitted"))
        .order_by("-pk")
        .values("pk")[:1]
    )
    picked = (
        SealPosition.objects.filter(variant_id=unit.variant_id)
        .order_by()
        .annotate(fitted=Subquery(fitted))
        .annotate(newest=Subquery(at_fitting))
        .values("newest")
    )
    rows = SealChange.objects.filter(pk__in=picked).select_related("record", "position")
    return {change.position_id: change for change in rows}


def fitted_pack(*, unit: Transponder) -> BatteryInstall | None:
    """The pack in the unit now (installed, not removed). One query."""
    return BatteryInstall.objects.filter(unit=unit, removal__isnull=True).first()


HistoryEntry = tuple[
    str, dt.datetime, ServiceRecord | Deployment, list[tuple[str, str, EntryVerdict | None]]
]


def entry_lines(
    record: ServiceRecord, rules: Rules, variant: Variant
) -> list[tuple[str, str, EntryVerdict | None]]:
    """(line, warning, verdict) for each entry of a prefetched record, kind by kind: the line
    carries the entry's numbers, the verdict is a test's (the rules readiness applies).
    No query."""
    lines = []
    for kind in entry_kinds():
        for entry in getattr(record, kind.related_name()).all():
            verdict = entry_verdict(entry, variant, rules)
            lines.append((entry.history_line(), entry.warning(), verdict))
    return lines


def unit_history(
    records: list[ServiceRecord],
    deployments: list[Deployment],
    rules: Rules,
    variant: Variant,
) -> list[HistoryEntry]:
    """Bench visits and deployments in one list, newest first: ``(kind, when, item, lines)``
    with kind ``"record"`` or ``"deployment"`` and a record's entry lines. No query."""
    entries: list[HistoryEntry] = [
        ("record", r.opened_at, r, entry_lines(r, rules, variant)) for r in records
    ]
    entries += [("deployment", d.over_side_at, d, []) for d in deployments]
    return sorted(entries, key=lambda item: item[1], reverse=True)


HISTORY_PER_PAGE = 20


@dataclass(frozen=True, slots=True)
class HistoryPage:
    """One page of a unit's history (bench visits and deployments, newest first)."""

    entries: list[HistoryEntry]
    number: int
    total: int
    per_page: int = HISTORY_PER_PAGE

    @property
    def num_pages(self) -> int:
        return max(1, -(-self.total // self.per_page))

    @property
    def has_previous(self) -> bool:
        return self.number > 1

    @property
    def has_next(self) -> bool:
        return self.number < self.num_pages

    @property
    def previous_page_number(self) -> int:
        return self.number - 1

    @property
    def next_page_number(self) -> int:
        return self.number + 1


def unit_history_page(*, unit: Transponder, rules: Rules, number: int = 1) -> HistoryPage:
    """Page ``number`` of the unit's history, reading only that page's visits and
    deployments in full. The newest ``number × per page`` of each kind, as keys, are merged
    to find the page; so the first page costs the same whatever the unit's history.

    Queries: the two counts, the keys of each kind (4); the page's records (1 + 9 prefetches)
    and deployments (1), each only when the page has one.
    """
    records = ServiceRecord.objects.filter(unit=unit)
    deployments = Deployment.objects.filter(unit=unit)
    total = records.count() + deployments.count()
    per_page = HISTORY_PER_PAGE
    number = min(max(1, number), max(1, -(-total // per_page)))
    upto = number * per_page
    keys: list[tuple[dt.datetime, str, int]] = [
        (when, "record", pk)
        for pk, when in records.order_by("-opened_at", "-pk").values_list("pk", "opened_at")[:upto]
    ]
    keys += [
        (when, "deployment", pk)
        for pk, when in deployments.order_by("-over_side_at", "-pk").values_list(
            "pk", "over_side_at"
        )[:upto]
    ]
    keys.sort(key=lambda key: key[0], reverse=True)
    shown = keys[upto - per_page : upto]
    page_records = unit_records(unit=unit, pks=[pk for _, kind, pk in shown if kind == "record"])
    page_deployments = unit_deployments(
        unit=unit, pks=[pk for _, kind, pk in shown if kind == "deployment"]
    )
    return HistoryPage(
        unit_history(page_records, page_deployments, rules, unit.variant), number, total
    )


@dataclass(frozen=True, slots=True)
class UnitPage:
    anodes: list[tuple[AnodePosition, AnodeReading | None]]
    seals: list[tuple[SealPosition, SealChange | None]]
    fitted_pack: BatteryInstall | None
    open_deployment: Deployment | None
    open_record: ServiceRecord | None
    history_page: HistoryPage

    @property
    def history(self) -> list[HistoryEntry]:
        return self.history_page.entries


def unit_page(*, unit: Transponder, rules: Rules, history_page: int = 1) -> UnitPage:
    """What the unit page shows besides the due items, for a unit loaded with its variant;
    the history one page at a time (``unit_history_page``), so the page costs the same
    whatever the unit's history.

    Queries: anode positions, seal positions, last anode readings, last seal changes, fitted
    pack, open deployment, open record, then the history page (4, plus 10 for its records
    and 1 for its deployments when it has any): 11 to 22.
    """
    variant = unit.variant
    anode_positions = list(variant.anode_positions.all())
    seal_positions = list(variant.seal_positions.all())
    last_reading = last_anode_readings(unit=unit)
    last_seal = last_seal_changes(unit=unit)
    pack = fitted_pack(unit=unit)
    open_deployment = (
        Deployment.objects.filter(unit=unit, recovered_at__isnull=True)
        .select_related("site")
        .first()
    )
    open_record = ServiceRecord.objects.filter(unit=unit, closed_at__isnull=True).first()
    return UnitPage(
        anodes=[(p, last_reading.get(p.pk)) for p in anode_positions],
        seals=[(p, last_seal.get(p.pk)) for p in seal_positions],
        fitted_pack=pack,
        open_deployment=open_deployment,
        open_record=open_record,
        history_page=unit_history_page(unit=unit, rules=rules, number=history_page),
    )


# The record page


@dataclass(frozen=True, slots=True)
class EntryCell:
    """One recorded value: its label, the value in words with its unit, and whether the
    entry's verdict failed on it."""

    label: str
    text: str
    failed: bool = False
    whole: bool = False  # a date, time or serial: never broken across lines


def _kept_whole(model: type[Model], name: str) -> bool:
    """Whether a value of this field is printed on one line (dates, times, serials)."""
    field = model._meta.get_field(name)
    return isinstance(field, DateField | TimeField) or name.endswith(("serial", "_at", "_on"))


@dataclass(frozen=True, slots=True)
class EntryRow:
    entry: Any
    cells: tuple[EntryCell, ...]
    verdict: EntryVerdict | None


@dataclass(frozen=True, slots=True)
class EntrySection:
    title: str
    labels: tuple[str, ...]
    rows: tuple[EntryRow, ...]
    singular: str = ""

    @property
    def judged(self) -> bool:
        """Whether this kind's entries carry a verdict (tests and checks)."""
        return any(row.verdict is not None for row in self.rows)


def entry_row(entry: Any, verdict: EntryVerdict | None, *, utc: bool = False) -> EntryRow:
    """Every value the entry records, labelled and in words, with its verdict. No query
    beyond the keys ``list_select_related`` names."""
    failed = set(verdict.failed_fields) if verdict is not None else set()
    cells = tuple(
        EntryCell(
            field_label(entry, name),
            field_value(entry, name, utc=utc),
            name in failed,
            _kept_whole(type(entry), name),
        )
        for name in type(entry).shown_fields()
    )
    return EntryRow(entry, cells, verdict)


def record_sections(
    *, record: ServiceRecord, rules: Rules, utc: bool = False
) -> list[EntrySection]:
    """The record's entries by kind, titled, in page order, each with its values and, when it
    is a test, its verdict (``fleet.due.acceptance.entry_verdict``, the same rules readiness
    applies). One query per entry kind."""
    variant = record.unit.variant
    sections = []
    for kind in entry_kinds():
        entries = kind.with_list_related(getattr(record, kind.related_name()).order_by("pk"))
        sections.append(
            EntrySection(
                kind.plural_title(),
                tuple(field_label(kind, name) for name in kind.shown_fields()),
                tuple(
                    entry_row(entry, entry_verdict(entry, variant, rules), utc=utc)
                    for entry in entries
                ),
                str(capfirst(kind._meta.verbose_name)),
            )
        )
    return sections


def stored_words(model: type[Model], field_name: str, stored: str, *, utc: bool = False) -> str:
    """A value kept as text by an amendment (``Field.value_to_string``) in words, as the
    record page prints the live value: "li_socl2" -> the chemistry's label, "False" -> No."""
    if stored == "":
        return "(empty)"
    field = model._meta.get_field(field_name)
    probe = model()
    if not isinstance(field, Field):
        return stored
    try:
        value = field.to_python(stored)
    except ValidationError:
        return stored
    if field.is_relation and field.related_model is not None:
        related = field.related_model._default_manager.filter(pk=value).first()
        return str(related) if related is not None else stored
    setattr(probe, field.attname, value)
    return field_value(probe, field_name, utc=utc)


EntryNames = dict[tuple[type[Model], int], str]


def entry_names(entries: Iterable[Model]) -> EntryNames:
    """How pages and paper name a record's entries: the kind and the entry's number among
    its kind, in the order given ("Anode reading 2"), never a database key (which means
    nothing on the bench and changes when a vessel kit is merged). Give the entries in page
    order: each kind by primary key, as ``record_sections`` and ``amendable_targets`` list
    them. No query."""
    counts: dict[type[Model], int] = {}
    names: EntryNames = {}
    for entry in entries:
        kind = type(entry)
        if kind is ServiceRecord or entry.pk is None:
            continue
        counts[kind] = counts.get(kind, 0) + 1
        names[(kind, entry.pk)] = f"{capfirst(kind._meta.verbose_name)} {counts[kind]}"
    return names


def section_entry_names(sections: Iterable[EntrySection]) -> EntryNames:
    return entry_names(row.entry for section in sections for row in section.rows)


def target_label(model: type[Model] | None, target_id: int, names: EntryNames | None = None) -> str:
    """What an amendment corrected, for people: "Pressure test 2", or "Visit"."""
    if model is None or model is ServiceRecord:
        return "Visit (the record itself)"
    named = (names or {}).get((model, target_id))
    if named:
        return named
    # Not on the record's page any more: say which kind, and the key as the last resort.
    return f"{capfirst(model._meta.verbose_name)} (entry {target_id})"


@dataclass(frozen=True, slots=True)
class AmendmentLine:
    created_at: dt.datetime
    created_by: Any
    target_label: str
    field_label: str
    original_words: str
    corrected_words: str
    reason: str
    target_key: tuple[Any, int] | None = None  # (model, pk) of what was corrected


def amendment_line(
    amendment: Amendment, *, utc: bool = False, names: EntryNames | None = None
) -> AmendmentLine:
    model = amendment.target_type.model_class()
    if model is None:  # a kind no longer installed: show what was stored
        label, original, corrected = (
            amendment.field_name,
            amendment.original_value or "(empty)",
            amendment.corrected_value or "(empty)",
        )
    else:
        label = field_label(model, amendment.field_name)
        original = stored_words(model, amendment.field_name, amendment.original_value, utc=utc)
        corrected = stored_words(model, amendment.field_name, amendment.corrected_value, utc=utc)
    return AmendmentLine(
        amendment.created_at,
        amendment.created_by,
        target_label(model, amendment.target_id, names),
        label,
        original,
        corrected,
        amendment.reason,
        (model, amendment.target_id) if model is not None else None,
    )


def record_amendments(
    *, record: ServiceRecord, utc: bool = False, names: EntryNames | None = None
) -> list[AmendmentLine]:
    """The record's amendments with their authors, in words (labels, not field names). One
    query (plus one per amended related key, which no kind amends today)."""
    return [
        amendment_line(a, utc=utc, names=names)
        for a in record.amendments.select_related("created_by", "target_type").order_by(
            "created_at", "pk"
        )
    ]


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


# The fleet list and the bench-visit list


def with_next_due(queryset: QuerySet[Transponder]) -> QuerySet[Transponder]:
    """``queryset`` with ``next_due_on`` and ``next_due_item``: the unit's earliest stored due
    row that has a date (an item with no data to date it is left out), ties broken by the
    unit page's order. Two subqueries in the list's one query, so sorting on it is SQL too."""
    rows = DueRow.objects.filter(unit_id=OuterRef("pk"), due_on__isnull=False).order_by(
        "due_on", "position"
    )
    return queryset.annotate(
        next_due_on=Subquery(rows.values("due_on")[:1]),
        next_due_item=Subquery(rows.values("item")[:1]),
    )


def service_records_list() -> QuerySet[ServiceRecord]:
    """Every bench visit, newest first, with what the list shows (unit, technician, place)
    joined in: a page of it is one query, plus one to count."""
    return ServiceRecord.objects.select_related("unit", "technician", "place").order_by(
        "-opened_at", "-pk"
    )


# Label sheets

# Lost and retired units are not on the shelf to be labelled: a sheet leaves them out unless
# asked. A quarantined unit is still in the workshop, so it keeps its label.
HOLDS_LEFT_OFF_LABELS = (UnitHold.LOST, UnitHold.RETIRED)


@dataclass(frozen=True, slots=True)
class LabelSelection:
    units: list[Transponder]  # to print, by serial, with their variants
    left_out: list[str]  # serials of lost or retired units left off the sheet
    unknown: list[str]  # asked-for serials no unit has


def label_units(
    *, serials: Sequence[str] | None, variant_id: int | None, include_held: bool
) -> LabelSelection:
    """The units a label sheet prints: the ``serials`` asked for (every unit when ``None``),
    of one variant if given, lost and retired ones left out unless ``include_held``. One
    query."""
    units = Transponder.objects.select_related("variant").order_by("serial")
    if variant_id is not None:
        units = units.filter(variant_id=variant_id)
    if serials is not None:
        units = units.filter(serial__in=serials)
    found = list(units)
    held = {u.serial for u in found if u.hold in HOLDS_LEFT_OFF_LABELS and not include_held}
    known = {u.serial for u in found}
    return LabelSelection(
        units=[u for u in found if u.serial not in held],
        left_out=sorted(held),
        unknown=sorted(set(serials or ()) - known),
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


def kit_rows() -> list[Kit]:
    """The kits page: every kit, newest first, with who made it and how many units it took
    (``unit_count``), in one query."""
    return list(
        Kit.objects.select_related("created_by")
        .annotate(unit_count=Count("units", distinct=True))
        .order_by("-created_at", "-pk")
    )
