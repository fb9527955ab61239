"""Importing a spreadsheet of history: check it all, show it, then write it all or nothing.

``import_preview`` reads the file and checks every row without writing anything: each cell is
read by its column's parser (``fleet.imports.parsing``), each record is built and validated by
its model (``full_clean``, the check every service runs), and rows are checked against each
other (a serial twice, overlapping deployments, a visit's rows apart). It returns what would be
created and every bad row with its row number, column and a plain message.

``import_commit`` does the same while writing through the services a person's typing goes
through (``unit_save``, ``site_save``, ``deployment_backfill``, ``service_record_save`` then
``service_record_close``), in one transaction: any bad row, or a file already imported (same
checksum), and nothing is written. Each unit's derived state and due rows are refreshed once,
at the end (``refreshing_once``), which equals refreshing after every record.

Historical visits arrive closed, opened and closed by the importer (the technician column
names who did the work, the importer by default); ``ImportBatch`` keeps the file's name,
checksum, who imported it and when, ``ImportedRow`` the row each record came from.
"""

from __future__ import annotations

import datetime as dt
from collections import Counter
from collections.abc import Callable, Iterable, Mapping
from dataclasses import dataclass, field
from typing import Any, cast

from django.contrib.auth.models import User
from django.contrib.contenttypes.models import ContentType
from django.core.exceptions import NON_FIELD_ERRORS, ValidationError
from django.db import IntegrityError, models, transaction
from django.utils import timezone

from fleet.due.store import refreshing_once
from fleet.imports import columns as cols
from fleet.imports import parsing
from fleet.models import (
    AnodePosition,
    AnodeReading,
    BatteryInstall,
    Deployment,
    ImportBatch,
    ImportedRow,
    Place,
    SealPosition,
    ServiceRecord,
    Site,
    Transponder,
    Variant,
)
from fleet.models.records import Entry, EntryValues, PackRemoval, check_entry_values
from fleet.models.validators import DATE_VALIDATORS
from fleet.selectors import previous_anode_masses
from fleet.services.bulk import drawing_keys_ahead, insert_plain
from fleet.services.deployments import backfill_refusal, deployment_backfill
from fleet.services.records import PastVisit, check_can_open_record, service_records_import
from fleet.services.reference import site_save, unit_save

SAMPLE_ROWS = 10
LINK_BATCH = 2000


@dataclass(frozen=True, slots=True)
class Problem:
    """A bad row: its number as the spreadsheet shows it (1 is the header), the column, and
    what is wrong in plain words. Row 1 problems are about the header or the whole file."""

    row: int
    column: str
    message: str


@dataclass
class Outcome:
    """What a file would create (or created), and every problem found."""

    kind: str
    file_name: str
    checksum: str
    rows: int = 0
    counts: dict[str, int] = field(default_factory=dict)
    header: tuple[str, ...] = ()
    sample: list[tuple[int, list[str]]] = field(default_factory=list)
    problems: list[Problem] = field(default_factory=list)
    # Rows that are possible but unlikely (an anode heavier than its last reading): imported
    # only when whoever imports says they checked them (``accept_flagged``).
    flagged: list[Problem] = field(default_factory=list)
    batch: ImportBatch | None = None

    @property
    def ok(self) -> bool:
        return not self.problems


class ImportRefusedError(Exception):
    """The file has problems; nothing was written. ``outcome`` names them all."""

    def __init__(self, outcome: Outcome) -> None:
        super().__init__(f"{len(outcome.problems)} problem(s); nothing was imported.")
        self.outcome = outcome


@dataclass(frozen=True, slots=True)
class Kind:
    key: str
    title: str
    columns: Callable[[], list[cols.Column]]


KINDS: dict[str, Kind] = {
    kind.key: kind
    for kind in (
        Kind("units", "Units", cols.unit_columns),
        Kind("sites", "Sites", cols.site_columns),
        Kind("deployments", "Past deployments", cols.deployment_columns),
        Kind("visits", "Bench visits and their entries", cols.visit_columns),
    )
}


class _Run:
    """One pass over a file: the problems, the counts, the lookups, and the rows written."""

    def __init__(self, *, outcome: Outcome, by: User, write: bool) -> None:
        self.outcome = outcome
        self.by = by
        self.write = write
        self.zone = cols.local_zone()
        self.counts: Counter[str] = Counter()
        self.links: list[tuple[int, int, int]] = []  # (content type id, pk, row)
        self._found: dict[tuple[object, ...], models.Model | None] = {}
        self.seen: dict[tuple[object, ...], int] = {}
        self.last_visit: dict[int, dt.datetime] = {}
        self.checked_units: set[int] = set()
        self.packs_in_file: dict[tuple[int, str], BatteryInstall] = {}
        self.deployments_in_file: dict[int, list[tuple[dt.datetime, dt.datetime, int]]] = {}
        self.pending: list[_Visit] = []
        # (unit, anode position) -> the last weighed mass of the anode fitted there, as the
        # file's rows so far leave it (None: not weighed since it was fitted).
        # (The day: a date from the database; a visit's moment for a row of the file.)
        self.anode_mass: dict[tuple[int, int], tuple[float, dt.date] | None] = {}
        # Read off the models once a run, not once a row (they do not change while it runs).
        self.visit_columns = _visit_columns()
        self.entry_columns: dict[type[Entry], list[cols.Column]] = {}
        self.fields: dict[tuple[type[models.Model], str], models.Field[Any, Any]] = {}
        self.readers: dict[tuple[type[models.Model], str], Callable[[str], object]] = {}
        self.kinds: dict[str, type[Entry]] = {}
        self.references: dict[tuple[type[models.Model], str, int | None], models.Model | None] = {}
        self.own_columns: dict[type[Entry], frozenset[str]] = {}
        self.type_ids: dict[type[models.Model], int] = {}

    def columns_of(self, kind: type[Entry]) -> list[cols.Column]:
        if kind not in self.entry_columns:
            self.entry_columns[kind] = cols.entry_columns(kind)
        return self.entry_columns[kind]

    def field(self, model: type[models.Model], name: str) -> models.Field[Any, Any]:
        key = (model, name)
        if key not in self.fields:
            self.fields[key] = cast("models.Field[Any, Any]", model._meta.get_field(name))
        return self.fields[key]

    def reader(self, model: type[models.Model], name: str) -> Callable[[str], object]:
        """``cols.convert`` for the field, its rules looked up once a run."""
        key = (model, name)
        if key not in self.readers:
            self.readers[key] = cols.cell_reader(self.field(model, name), self.zone)
        return self.readers[key]

    def entry_kind(self, text: str) -> type[Entry]:
        """The entry kind the ``entry`` cell names (``cols.entry_kind_named``, once a text)."""
        if text not in self.kinds:
            self.kinds[text] = cols.entry_kind_named(text)
        return self.kinds[text]

    def own(self, kind: type[Entry]) -> frozenset[str]:
        """The columns a row of ``kind`` may fill: its own, the visit's and ``entry``."""
        if kind not in self.own_columns:
            names = {c.name for c in self.columns_of(kind)}
            self.own_columns[kind] = frozenset(names | set(_VISIT_COLUMN) | {cols.ENTRY_COLUMN})
        return self.own_columns[kind]

    @property
    def writing(self) -> bool:
        """Write while the file is clean so far; after a problem, only check the rest."""
        return self.write and not self.outcome.problems

    def problem(self, row: int, column: str, message: str) -> None:
        self.outcome.problems.append(Problem(row, column, message))

    def refusal(
        self, row: int, exc: ValidationError, names: Mapping[str, str], default: str
    ) -> None:
        """Every message of a validation error, against the column of its field."""
        if hasattr(exc, "error_dict"):
            for name, messages in exc.message_dict.items():
                column = default if name == NON_FIELD_ERRORS else names.get(name, name)
                for message in messages:
                    self.problem(row, column, message)
        else:
            for message in exc.messages:
                self.problem(row, default, message)

    def link(self, instance: models.Model | EntryValues, row: int) -> None:
        model = instance.kind if isinstance(instance, EntryValues) else type(instance)
        if model not in self.type_ids:
            self.type_ids[model] = ContentType.objects.get_for_model(model).pk
        self.links.append((self.type_ids[model], cast(int, instance.pk), row))

    def find(self, model: type[models.Model], **lookup: object) -> models.Model | None:
        key = (model, *sorted(lookup.items()))
        if key not in self._found:
            queryset = model._default_manager.filter(**lookup)
            if model is Transponder:
                queryset = queryset.select_related("variant")
            self._found[key] = queryset.first()
        return self._found[key]


def _reference(
    run: _Run, model: type[models.Model], text: str, unit: Transponder | None
) -> models.Model | None:
    """The record a key cell names, or None (looked up once a run, a pack apart)."""
    if model is BatteryInstall:
        return _reference_of(run, model, text, unit)
    key = (model, text, unit.variant_id if unit is not None else None)
    if key not in run.references:
        run.references[key] = _reference_of(run, model, text, unit)
    return run.references[key]


def _reference_of(
    run: _Run, model: type[models.Model], text: str, unit: Transponder | None
) -> models.Model | None:
    if model is Transponder:
        return run.find(Transponder, serial=text.upper())
    if model is User:
        return run.find(User, username=text)
    if model in (Variant, Place, Site):
        return run.find(model, name=text)
    if unit is not None and model in (AnodePosition, SealPosition):
        return run.find(model, variant_id=unit.variant_id, name=text)
    if unit is not None and model is BatteryInstall:
        # Not kept: a pack fitted by an earlier visit of the same file is written by then.
        return (
            BatteryInstall.objects.filter(unit=unit, pack_serial=text)
            .order_by("-installed_on", "-pk")
            .first()
        )
    return None


def _missing(model: type[models.Model], text: str, unit: Transponder | None) -> str:
    what = str(model._meta.verbose_name)
    if model is BatteryInstall:
        return f"No pack {text!r} has been fitted to {unit}."
    if unit is not None and model in (AnodePosition, SealPosition):
        return f"{unit.variant} has no {what} named {text!r}."
    return f"No {what} {text!r} is recorded."


def _values(
    run: _Run,
    row: int,
    model: type[models.Model],
    columns: Iterable[cols.Column],
    cells: Mapping[str, str],
    unit: Transponder | None = None,
) -> tuple[dict[str, Any], bool]:
    """The fields' values from the row's cells, keys looked up; False if a cell is bad."""
    values: dict[str, Any] = {}
    good = True
    bad: list[str] = []
    for column in columns:
        text = cells.get(column.name, "")
        field = run.field(model, column.field)
        if column.required and not text:
            run.problem(row, column.name, "This column needs a value.")
            good = False
            bad.append(column.field)
            continue
        try:
            value = run.reader(model, column.field)(text)
        except parsing.CellError as exc:
            run.problem(row, column.name, str(exc))
            good = False
            bad.append(column.field)
            continue
        if isinstance(field, models.ForeignKey) and value is not None:
            related = field.related_model
            found = _reference(run, related, str(value), unit)
            if found is None and not (related is BatteryInstall and unit is not None):
                run.problem(row, column.name, _missing(related, str(value), unit))
                good = False
                bad.append(column.field)
                continue
            value = found
        values[column.field] = value
    if not good:
        _field_checks(run, row, model(**values), columns, bad)
    return values, good


def _field_checks(
    run: _Run,
    row: int,
    instance: models.Model,
    columns: Iterable[cols.Column],
    bad: list[str],
) -> None:
    """A row with a bad cell: the other cells' own checks too (each field's validators, not
    the model's ``clean()``, which compares fields and needs them all), so that every problem
    of the row is named at once."""
    names = {c.field: c.name for c in columns}
    exclude = [*bad, *(f.name for f in instance._meta.fields if f.name not in names)]
    try:
        instance.clean_fields(exclude=exclude)
    except ValidationError as exc:
        run.refusal(row, exc, names, next(iter(names.values())))


def _full_clean(
    run: _Run, row: int, instance: models.Model, names: Mapping[str, str], default: str
) -> bool:
    exclude = [
        f.name
        for f in instance._meta.concrete_fields
        if isinstance(f, models.ForeignKey) and getattr(instance, f.attname) is None
    ]
    try:
        instance.full_clean(exclude=exclude)
    except ValidationError as exc:
        run.refusal(row, exc, names, default)
        return False
    return True


# --- Units, sites and deployments: one row, one record --------------------------------------


def _save_simple(run: _Run, row: int, instance: models.Model) -> bool:
    with transaction.atomic():
        if isinstance(instance, Transponder):
            unit_save(unit=instance)
        elif isinstance(instance, Site):
            site_save(site=instance)
        elif isinstance(instance, Deployment):
            deployment_backfill(deployment=instance, by=run.by)
    run.link(instance, row)
    return True


def _in_file(run: _Run, row: int, instance: models.Model) -> str:
    """Why this row clashes with an earlier row of the same file ("" when it does not)."""
    if isinstance(instance, Transponder | Site):
        name = instance.serial if isinstance(instance, Transponder) else instance.name
        key = (type(instance), name.upper())
        if key in run.seen:
            return f"{name} is already in row {run.seen[key]} of this file."
        run.seen[key] = row
    if isinstance(instance, Deployment) and instance.recovered_at is not None:
        earlier = run.deployments_in_file.setdefault(instance.unit_id, [])
        for over, back, other in earlier:
            if over < instance.recovered_at and instance.over_side_at < back:
                return f"This deployment overlaps the one in row {other} of this file."
        earlier.append((instance.over_side_at, instance.recovered_at, row))
    return ""


def _check_simple(run: _Run, row: int, instance: models.Model, names: Mapping[str, str]) -> bool:
    first = next(iter(names.values()))
    if isinstance(instance, Deployment):
        refusal = backfill_refusal(instance)
        if refusal:
            run.problem(row, "over_side_at", refusal)
            return False
    return _full_clean(run, row, instance, names, first)


def _run_simple(run: _Run, table: parsing.Table, kind: Kind) -> None:
    model: type[models.Model] = {
        "units": Transponder,
        "sites": Site,
        "deployments": Deployment,
    }[kind.key]
    columns = kind.columns()
    names = {c.field: c.name for c in columns}
    label = str(model._meta.verbose_name_plural)
    for row, cells in table.rows():
        run.outcome.rows += 1
        values, good = _values(run, row, model, columns, cells)
        if not good:
            continue
        instance = model(**values)
        clash = _in_file(run, row, instance)
        if clash:
            run.problem(row, columns[0].name, clash)
            continue
        if run.writing:
            try:
                _save_simple(run, row, instance)
            except ValidationError as exc:
                run.refusal(row, exc, names, columns[0].name)
                continue
        elif not _check_simple(run, row, instance, names):
            continue
        run.counts[label] += 1


# --- Bench visits: the rows of one visit, one entry a row -----------------------------------


@dataclass
class _Visit:
    row: int
    record: ServiceRecord
    closed_at: dt.datetime
    # A kind ``checked_as_values`` (anode readings) as plain values, any other as a model.
    entries: list[tuple[int, Entry | EntryValues]] = field(default_factory=list)


def _kind_of(entry: Entry | EntryValues) -> type[Entry]:
    return entry.kind if isinstance(entry, EntryValues) else type(entry)


_VISIT_COLUMN = {name: f for name, f in cols.VISIT_FIELDS}
_VISIT_NAMES = {f: name for name, f in cols.VISIT_FIELDS}


def _visit_columns() -> list[cols.Column]:
    return [c for c in cols.visit_columns() if c.name in _VISIT_COLUMN]


def _entry(
    run: _Run, row: int, cells: Mapping[str, str], record: ServiceRecord
) -> Entry | EntryValues | None:
    try:
        kind = run.entry_kind(cells.get(cols.ENTRY_COLUMN, ""))
    except parsing.CellError as exc:
        run.problem(row, cols.ENTRY_COLUMN, str(exc))
        return None
    columns = run.columns_of(kind)
    own = run.own(kind)
    stray = [name for name, text in cells.items() if text and name not in own]
    for name in stray:
        article = "an" if kind.kind_label[:1] in "aeiou" else "a"
        run.problem(row, name, f"Not used by {article} {kind.kind_label}; leave it blank.")
    values, good = _values(run, row, kind, columns, cells, unit=record.unit)
    if not good or stray:
        return None
    if kind.checked_as_values():
        # Checked and written without a model instance each, by the same rules.
        return EntryValues(kind, values)
    entry = kind(**values)
    entry.record = record
    if isinstance(entry, BatteryInstall):
        entry.unit = record.unit
        run.packs_in_file[(record.unit_id, entry.pack_serial)] = entry
    if isinstance(entry, PackRemoval) and values.get("install") is None:
        # A pack fitted by an earlier row of the file: its install is written by then.
        serial = cells.get("pack_serial", "")
        install = run.packs_in_file.get((record.unit_id, serial))
        if install is None:
            run.problem(row, "pack_serial", _missing(BatteryInstall, serial, record.unit))
            return None
        entry.install = install
    return entry


def _visit_head(run: _Run, group: list[tuple[int, dict[str, str]]]) -> _Visit | None:
    """The visit from its first row, each later row's visit cells checked against it."""
    row, cells = group[0]
    for later, other in group[1:]:
        for name in _VISIT_COLUMN:
            if other.get(name) and other[name] != cells.get(name, ""):
                run.problem(later, name, f"Differs from row {row}, where this visit begins.")
    values, good = _values(run, row, ServiceRecord, run.visit_columns, cells)
    if not good:
        return None
    opened_at: dt.datetime = values["opened_at"]
    closed_at: dt.datetime = values.pop("closed_at") or opened_at
    try:
        for check in DATE_VALIDATORS:
            check(closed_at)
    except ValidationError as exc:
        run.refusal(row, exc, {}, "visit_closed_at")
        return None
    if closed_at < opened_at or closed_at > timezone.now():
        run.problem(
            row, "visit_closed_at", "A visit closes after it opened, and not in the future."
        )
        return None
    values["technician"] = values.get("technician") or run.by
    record = ServiceRecord(**values, created_by=run.by)
    unit = record.unit
    last = run.last_visit.get(unit.pk)
    if last is not None and opened_at < last:
        run.problem(
            row,
            "visit_opened_at",
            f"{unit.serial}'s visits must follow in date order: an earlier row has a visit on "
            f"{timezone.localtime(last):%Y-%m-%d}. Sort the sheet by unit, then visit date.",
        )
        return None
    run.last_visit[unit.pk] = opened_at
    return _Visit(row, record, closed_at)


def _check_visit(run: _Run, visit: _Visit) -> bool:
    before = len(run.outcome.problems)
    record, unit = visit.record, visit.record.unit
    if unit.pk not in run.checked_units:
        run.checked_units.add(unit.pk)
        try:
            check_can_open_record(unit)
        except ValidationError as exc:
            run.refusal(visit.row, exc, {}, "unit")
    _full_clean(run, visit.row, record, _VISIT_NAMES, "visit_opened_at")
    for row, entry in visit.entries:
        names = {c.field: c.name for c in run.columns_of(_kind_of(entry))}
        if isinstance(entry, EntryValues):
            try:
                check_entry_values(entry.kind, dict(entry.values), unit_variant_id=unit.variant_id)
            except ValidationError as exc:
                run.refusal(row, exc, names, cols.ENTRY_COLUMN)
            continue
        _full_clean(run, row, entry, names, cols.ENTRY_COLUMN)
    return len(run.outcome.problems) == before


def _flag_heavier(run: _Run, visit: _Visit) -> None:
    """Flag each anode reading heavier than the last reading of the same anode (from the
    database, or an earlier row of the file): an anode only loses mass, so it is likely a
    misread or another anode, as the bench-visit form asks. One query per visit that names
    a position of its unit the file has not named before."""
    record = visit.record
    readings = [(row, e) for row, e in visit.entries if _kind_of(e) is AnodeReading]
    new = [
        position
        for _, e in readings
        if (record.unit_id, position := _reading_value(e, "position_id")) not in run.anode_mass
    ]
    if new:
        found = previous_anode_masses(
            unit_id=record.unit_id, position_ids=new, before=record.opened_at
        )
        for position, previous in found.items():
            run.anode_mass[(record.unit_id, position)] = (
                (previous.mass_g, previous.on) if previous is not None else None
            )
    for row, entry in readings:
        key = (record.unit_id, _reading_value(entry, "position_id"))
        mass_g = _reading_value(entry, "mass_g")
        last = run.anode_mass[key]
        if mass_g is not None and last is not None and mass_g > last[0]:
            # A reading of the file keeps its visit's moment; its day is read when shown.
            on = last[1]
            day = timezone.localdate(on) if isinstance(on, dt.datetime) else on
            run.outcome.flagged.append(
                Problem(
                    row,
                    "mass_g",
                    f"{mass_g:g} g is heavier than this anode's last reading "
                    f"({last[0]:g} g on {day}); an anode only loses mass. Check it is "
                    "the same anode and the reading is right.",
                )
            )
        if _reading_value(entry, "replaced"):
            run.anode_mass[key] = None
        elif mass_g is not None:
            run.anode_mass[key] = (mass_g, record.opened_at)


def _reading_value(entry: Entry | EntryValues, name: str) -> Any:
    if not isinstance(entry, EntryValues):
        return getattr(entry, name)
    if name == "position_id":
        return entry.values["position"].pk
    return entry.values.get(name)


def _forget_keys(instance: models.Model) -> None:
    """Clear the keys of ``instance`` that point at objects no longer saved."""
    for f in instance._meta.concrete_fields:
        if isinstance(f, models.ForeignKey) and f.is_cached(instance):
            related = getattr(instance, f.name)
            if related is not None and related.pk is None:
                setattr(instance, f.attname, None)


def _flush(run: _Run) -> None:
    """Write the visits waiting for one unit, in one call of the service."""
    visits, run.pending = run.pending, []
    if not visits:
        return
    past = [
        PastVisit(record=v.record, entries=[e for _, e in v.entries], closed_at=v.closed_at)
        for v in visits
    ]
    try:
        # The service is atomic: a unit it refuses leaves nothing (its savepoint rolled back).
        service_records_import(unit_id=visits[0].record.unit_id, visits=past, by=run.by)
    except ValidationError as exc:
        # Say which row: check the visits' rows one by one; else the service's own words.
        before = len(run.outcome.problems)
        for visit in visits:  # as they were before the rolled-back write
            visit.record.pk, visit.record.closed_at = None, None
            visit.record._state.adding = True
            for _, entry in visit.entries:
                entry.pk = None
        for visit in visits:
            for _, entry in visit.entries:
                if isinstance(entry, EntryValues):
                    entry.values.pop("record", None)
                else:
                    _forget_keys(entry)
            _check_visit(run, visit)
        if len(run.outcome.problems) == before:
            run.refusal(visits[0].row, exc, _VISIT_NAMES, "visit_opened_at")
        return
    for visit in visits:
        run.link(visit.record, visit.row)
        for row, entry in visit.entries:
            run.link(entry, row)


def _one_visit(run: _Run, group: list[tuple[int, dict[str, str]]]) -> None:
    before = len(run.outcome.problems)
    visit = _visit_head(run, group)
    if visit is None:
        return
    for row, cells in group:
        entry = _entry(run, row, cells, visit.record)
        if entry is not None:
            visit.entries.append((row, entry))
    if len(run.outcome.problems) > before:
        return
    _flag_heavier(run, visit)
    if run.writing:
        if run.pending and run.pending[0].record.unit_id != visit.record.unit_id:
            _flush(run)
        run.pending.append(visit)
    elif not _check_visit(run, visit):
        return
    run.counts["bench visits"] += 1
    for _, entry in visit.entries:
        run.counts[str(_kind_of(entry)._meta.verbose_name_plural)] += 1


def _run_visits(run: _Run, table: parsing.Table) -> None:
    group: list[tuple[int, dict[str, str]]] = []
    current: tuple[str, str, str] = ("", "", "")
    for row, cells in table.rows():
        run.outcome.rows += 1
        key = ("visit", cells.get("unit", "").upper(), cells.get("visit_opened_at", ""))
        if group and key != current:
            _one_visit(run, group)
            group = []
        if not group:
            if key in run.seen:
                run.problem(
                    row,
                    "visit_opened_at",
                    f"This visit began at row {run.seen[key]}; the rows of one visit must "
                    "sit together.",
                )
                continue
            run.seen[key] = row
            current = key
        group.append((row, cells))
    if group:
        _one_visit(run, group)
    if run.writing:
        _flush(run)


# --- The file ---------------------------------------------------------------------------------


def _check_header(outcome: Outcome, kind: Kind, table: parsing.Table) -> None:
    columns = kind.columns()
    known = {c.name for c in columns}
    for name in table.header:
        if name and name not in known:
            outcome.problems.append(
                Problem(1, name, f"Unknown column; the {kind.key} columns are in the template.")
            )
    present = set(table.header)
    for column in columns:
        if column.required and column.name not in present:
            outcome.problems.append(Problem(1, column.name, "This column is missing."))


def previous_import(checksum: str) -> ImportBatch | None:
    return ImportBatch.objects.select_related("imported_by").filter(checksum=checksum).first()


def _already(batch: ImportBatch) -> Problem:
    who = batch.imported_by.get_full_name() or batch.imported_by.get_username()
    when = timezone.localtime(batch.imported_at)
    return Problem(
        1,
        "",
        f"This file was already imported on {when:%Y-%m-%d %H:%M} by {who} (as "
        f"{batch.file_name}); the same file is never imported twice.",
    )


def _run_file(
    *, kind: str, data: bytes, file_name: str, by: User, write: bool, accept_flagged: bool = False
) -> Outcome:
    if kind not in KINDS:
        raise ValueError(f"Unknown import kind {kind!r}; use one of {', '.join(KINDS)}.")
    spec = KINDS[kind]
    outcome = Outcome(kind=kind, file_name=file_name, checksum=parsing.checksum(data))
    previous = previous_import(outcome.checksum)
    if previous is not None:
        outcome.problems.append(_already(previous))
        return outcome
    try:
        table = parsing.read_table(data)
    except parsing.FileError as exc:
        outcome.problems.append(Problem(1, "", str(exc)))
        return outcome
    outcome.header = table.header
    _check_header(outcome, spec, table)
    if outcome.problems:
        return outcome
    for number, cells in table.rows():
        if len(outcome.sample) == SAMPLE_ROWS:
            break
        outcome.sample.append((number, [cells[name] for name in table.header]))
    run = _Run(outcome=outcome, by=by, write=write)
    if kind == "visits":
        _run_visits(run, table)
    else:
        _run_simple(run, table, spec)
    outcome.counts = dict(run.counts)
    # A row with a problem is fixed first; its flag would only repeat it.
    bad_rows = {problem.row for problem in outcome.problems}
    outcome.flagged = [flag for flag in outcome.flagged if flag.row not in bad_rows]
    if write and outcome.ok and outcome.flagged and not accept_flagged:
        flagged = len(outcome.flagged)
        outcome.problems.append(
            Problem(
                1,
                "",
                f"{flagged} row{'' if flagged == 1 else 's'} flagged to check "
                "(listed below); nothing was imported. Correct them, or say you checked them "
                "and import the file as it is.",
            )
        )
    if write and outcome.ok:
        _record_batch(outcome, run)
    return outcome


def _record_batch(outcome: Outcome, run: _Run) -> None:
    try:
        with transaction.atomic():
            batch = ImportBatch.objects.create(
                kind=outcome.kind,
                file_name=outcome.file_name[:255],
                checksum=outcome.checksum,
                rows=outcome.rows,
                imported_by=run.by,
                imported_at=timezone.now(),
            )
    except IntegrityError:
        previous = previous_import(outcome.checksum)
        outcome.problems.append(
            _already(previous) if previous else Problem(1, "", "This file is being imported.")
        )
        return
    _insert_links(batch, run.links)
    outcome.batch = batch


def _insert_links(batch: ImportBatch, links: list[tuple[int, int, int]]) -> None:
    """One ``ImportedRow`` per record written: a large file has 100,000s of these rows of four
    whole numbers, so they go in as plain parameter rows (``insert_plain``, in slices) rather
    than as model instances; none needs its primary key back, and every value is a key or a
    row number the import itself produced."""
    fields = ("batch", "row", "target_type", "target_id")
    for start in range(0, len(links), LINK_BATCH):
        insert_plain(
            ImportedRow,
            fields,
            [
                (batch.pk, row, type_id, pk)
                for type_id, pk, row in links[start : start + LINK_BATCH]
            ],
        )


def import_preview(*, kind: str, data: bytes, file_name: str, by: User) -> Outcome:
    """Check every row of the file and say what it would create; writes nothing."""
    return _run_file(kind=kind, data=data, file_name=file_name, by=by, write=False)


@transaction.atomic
def import_commit(
    *, kind: str, data: bytes, file_name: str, by: User, accept_flagged: bool = False
) -> Outcome:
    """Write the file through the services, all or nothing: raises ``ImportRefusedError`` (and
    writes nothing) if any row is bad, the file was imported before, or rows are flagged
    (``Outcome.flagged``) and ``accept_flagged`` is not given."""
    with refreshing_once(at=timezone.now()), drawing_keys_ahead():
        outcome = _run_file(
            kind=kind,
            data=data,
            file_name=file_name,
            by=by,
            write=True,
            accept_flagged=accept_flagged,
        )
        if not outcome.ok:
            raise ImportRefusedError(outcome)
    return outcome
