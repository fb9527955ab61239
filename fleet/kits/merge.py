"""Reading a kit's return file against the shore: what a merge would add, what it would change
and where the two histories conflict. Nothing here writes (``fleet.services.kit_merge``
carries a plan out).

How a kit row is recognised (``uid`` and ``origin``, migration 0022):

- a row made on this kit has ``origin`` = the kit's code and a ``uid``: it is *new* unless a
  shore row has the same uid (then it is *already merged*: a second merge of the same file, or
  an earlier return file of the same kit, brought it);
- any other row is a copy of a shore row, made at export: the same uid, or the same primary
  key for rows older than the uids. Its differences with the shore row are changes made on
  board (a record closed, a deployment recovered), or ashore since the export, or both;
- a shore row of a kit unit that the kit does not hold, made after the export, is the shore's
  own work meanwhile.

Primary keys of new rows are never trusted: every foreign key of a row to add is a ``Ref``,
either to a shore row (its shore primary key, by uid, by primary key for copied reference rows,
or by natural key for users, units, places and sites) or to another new row of the kit (by its
uid, resolved once that row is written ashore).

What both sides did to one unit is compared as spans: a deployment is in the water from over
the side to recovery (open-ended while not recovered), a bench visit is on the bench from
opening to close. A bench visit of one side opened while the other side had the unit in the
water, two deployments that overlap, or two bench visits open at once cannot both be true:
that is a conflict. Histories that do not overlap are both added, and the plan says so.
"""

from __future__ import annotations

import datetime as dt
import uuid
from collections import defaultdict
from collections.abc import Iterable, Iterator
from dataclasses import dataclass, field
from typing import Any, cast

from django.apps import apps
from django.contrib.auth.models import User
from django.contrib.contenttypes.models import ContentType
from django.db import models
from django.utils import timezone

from fleet.models import (
    Amendment,
    Deployment,
    HoldChange,
    Kit,
    KitConflict,
    KitMerge,
    Place,
    ReleaseCertificate,
    ServiceRecord,
    Site,
    Transponder,
)
from fleet.models.kits import kit_here
from fleet.models.records import Entry, entry_kinds

Choice = KitConflict.Choice
ConflictKind = KitConflict.Kind

# Fields of a record the bench-visit form edits (as fleet.services.records edits them).
RECORD_EDITED = ("opened_at", "technician_id", "place_id", "summary")


class MergeRefusedError(Exception):
    """The kit file cannot be merged into this database; the message says why."""


def identified_models() -> list[type[models.Model]]:
    """The models whose rows carry a uid and an origin, parents before children."""
    return [
        ServiceRecord,
        *entry_kinds(),
        Deployment,
        Amendment,
        ReleaseCertificate,
        HoldChange,
    ]


# What each kind of row is called in a preview, and in the merge's counts.
def kind_label(model: type[models.Model]) -> str:
    if model is ServiceRecord:
        return "bench visits"
    if issubclass(model, Entry):
        return "entries"
    if model is Deployment:
        return "deployments"
    if model is Amendment:
        return "amendments"
    if model is ReleaseCertificate:
        return "release certificates"
    if model is HoldChange:
        return "hold changes"
    return str(model._meta.verbose_name_plural)


@dataclass(frozen=True, slots=True)
class Ref:
    """Where a foreign key of a vessel row points ashore: a shore row (``pk``) or another
    vessel row not yet written (``uid``)."""

    label: str
    pk: int | None = None
    uid: str | None = None

    def as_json(self) -> dict[str, Any]:
        return {"label": self.label, "pk": self.pk, "uid": self.uid}

    @classmethod
    def from_json(cls, data: dict[str, Any]) -> Ref:
        return cls(label=str(data["label"]), pk=data.get("pk"), uid=data.get("uid"))


def _plain(instance: models.Model, f: models.Field[Any, Any]) -> Any:
    value = getattr(instance, f.attname)
    return None if value is None else f.value_to_string(instance)


@dataclass(slots=True)
class VesselRow:
    """One row made on board, whole: its plain values as text and its keys as ``Ref``s. It is
    what a merge writes ashore, and what a conflict keeps of the vessel's side."""

    label: str
    uid: str
    kit_pk: int
    unit_serial: str
    text: str
    fields: dict[str, Any]
    refs: dict[str, Ref]
    # A copy of a shore row as the vessel has it now (a conflict's vessel side), not a new row.
    copy: bool = False

    @property
    def model(self) -> type[models.Model]:
        return apps.get_model(self.label)

    def as_json(self) -> dict[str, Any]:
        return {
            "model": self.label,
            "uid": self.uid,
            "kit_pk": self.kit_pk,
            "unit": self.unit_serial,
            "text": self.text,
            "fields": self.fields,
            "refs": {name: ref.as_json() for name, ref in self.refs.items()},
            "copy": self.copy,
        }

    @classmethod
    def from_json(cls, data: dict[str, Any]) -> VesselRow:
        return cls(
            label=str(data["model"]),
            uid=str(data["uid"]),
            kit_pk=int(data["kit_pk"]),
            unit_serial=str(data.get("unit", "")),
            text=str(data.get("text", "")),
            fields=dict(data["fields"]),
            refs={name: Ref.from_json(ref) for name, ref in data["refs"].items()},
            copy=bool(data.get("copy", False)),
        )

    def value(self, attname: str) -> Any:
        """A plain field's value as the model holds it."""
        f = next(f for f in self.model._meta.concrete_fields if f.attname == attname)
        raw = self.fields.get(attname)
        return None if raw is None else f.to_python(raw)


def shore_json(instance: models.Model) -> dict[str, Any]:
    """A shore row, whole, for a conflict's shore side."""
    values = {
        f.attname: _plain(instance, f) for f in instance._meta.concrete_fields if not f.primary_key
    }
    return {
        "model": instance._meta.label_lower,
        "pk": instance.pk,
        "text": describe(instance),
        "fields": values,
    }


def describe(instance: models.Model) -> str:
    """A row in one line for a preview."""
    if isinstance(instance, ServiceRecord):
        state = (
            f"closed {timezone.localtime(instance.closed_at):%Y-%m-%d %H:%M}"
            if instance.closed_at
            else "open"
        )
        return (
            f"bench visit opened {timezone.localtime(instance.opened_at):%Y-%m-%d %H:%M}, {state}"
        )
    if isinstance(instance, Deployment):
        back = (
            f"recovered {timezone.localtime(instance.recovered_at):%Y-%m-%d %H:%M}"
            if instance.recovered_at
            else "still in the water"
        )
        return (
            f"deployment over the side {timezone.localtime(instance.over_side_at):%Y-%m-%d %H:%M}"
            f", {back}"
        )
    if isinstance(instance, Entry):
        return f"{instance.kind_label}: {instance}"
    if isinstance(instance, Amendment):
        return (
            f"amendment of {instance.field_name}: {instance.original_value or '(empty)'} to "
            f"{instance.corrected_value or '(empty)'} ({instance.reason})"
        )
    if isinstance(instance, ReleaseCertificate):
        return f"release certificate {instance.number} ({instance.get_status_display().lower()})"
    if isinstance(instance, HoldChange):
        return f"hold: {instance}"
    return str(instance)


@dataclass(slots=True)
class Change:
    """A change made on board to a row that existed at export, to carry out ashore through the
    services. ``what``: close, save (entries and fields of an open visit), recover, hold,
    certificate, move."""

    what: str
    unit_serial: str
    text: str
    payload: dict[str, Any] = field(default_factory=dict)


@dataclass(slots=True)
class Conflict:
    kind: str
    unit_serial: str
    key: str
    explanation: str
    shore: list[dict[str, Any]]
    vessel: list[VesselRow]
    choices: list[str]

    @property
    def label(self) -> str:
        return str(ConflictKind(self.kind).label)

    def choice_labels(self) -> list[tuple[str, str]]:
        names = dict(Choice.choices)
        return [(c, str(names[c])) for c in self.choices]


@dataclass(slots=True)
class MergePlan:
    kit: Kit
    file_sha256: str
    exported_at: dt.datetime
    units: list[str]
    additions: list[VesselRow] = field(default_factory=list)
    changes: list[Change] = field(default_factory=list)
    conflicts: list[Conflict] = field(default_factory=list)
    notes: list[str] = field(default_factory=list)
    # New vessel rows whose parent an earlier merge of this kit kept in a conflict.
    orphans: list[VesselRow] = field(default_factory=list)
    already_merged: int = 0
    already_applied: bool = False

    def counts(self) -> dict[str, int]:
        """Rows to add per kind, in the order of ``identified_models``."""
        found: dict[str, int] = {}
        for model in identified_models():
            label = kind_label(model)
            n = sum(1 for row in self.additions if row.label == model._meta.label_lower)
            if n:
                found[label] = found.get(label, 0) + n
        return found

    def change_counts(self) -> dict[str, int]:
        found: dict[str, int] = {}
        for change in self.changes:
            found[change.what] = found.get(change.what, 0) + 1
        return found

    @property
    def is_empty(self) -> bool:
        return not (self.additions or self.changes or self.conflicts)

    def lines(self) -> Iterator[str]:
        """The preview in plain lines (the command prints them)."""
        yield (
            f"Kit {self.kit.code} ({self.kit.job}), exported "
            f"{timezone.localtime(self.exported_at):%Y-%m-%d %H:%M}, units: "
            f"{', '.join(self.units) or 'none'}"
        )
        if self.already_applied:
            yield "This file was merged already; merging it again changes nothing."
        counts = self.counts()
        yield "To add: " + (
            ", ".join(f"{label}: {n}" for label, n in counts.items()) or "nothing new"
        )
        for row in self.additions:
            yield f"  + {row.unit_serial}: {row.text}"
        changes = self.change_counts()
        yield "Changes made on board to rows that existed at export: " + (
            ", ".join(f"{what}: {n}" for what, n in changes.items()) or "none"
        )
        for change in self.changes:
            yield f"  ~ {change.unit_serial}: {change.text}"
        if self.already_merged:
            yield f"Already merged (found ashore by their uid): {self.already_merged} rows"
        for note in self.notes:
            yield f"Note: {note}"
        yield f"Conflicts: {len(self.conflicts) or 'none'}"
        for number, conflict in enumerate(self.conflicts, start=1):
            yield f"  {number}. {conflict.unit_serial}, {conflict.label.lower()}: "
            yield f"     {conflict.explanation}"
            for choice, label in conflict.choice_labels():
                yield f"     choice {choice}: {label}"


@dataclass(frozen=True, slots=True)
class Span:
    """A unit's time in the water (deployment) or on the bench (visit), on one side."""

    what: str  # "deployment" or "visit"
    start: dt.datetime
    end: dt.datetime | None
    text: str
    row: models.Model | VesselRow

    def contains(self, moment: dt.datetime) -> bool:
        return self.start <= moment and (self.end is None or moment < self.end)

    def overlaps(self, other: Span) -> bool:
        return (other.end is None or self.start < other.end) and (
            self.end is None or other.start < self.end
        )


def _uid(value: object) -> str | None:
    return None if value is None else str(value)


class KitReader:
    """The kit database (``alias``) read against the shore (``default``)."""

    def __init__(self, alias: str, kit: Kit, code: str) -> None:
        self.alias = alias
        self.kit = kit
        self.code = code
        self.exported_at: dt.datetime = kit.created_at
        # Every identified row of the kit, by model and kit primary key.
        self.rows: dict[type[models.Model], dict[int, Any]] = {}
        # uid -> shore pk, for the kit's uids found ashore.
        self.shore_pk: dict[type[models.Model], dict[str, int]] = {}
        for model in identified_models():
            kit_rows: dict[int, Any] = {
                r.pk: r for r in model._base_manager.using(alias).order_by("pk")
            }
            self.rows[model] = kit_rows
            uids = [str(r.uid) for r in kit_rows.values() if r.uid is not None]
            found: dict[str, int] = {}
            for first in range(0, len(uids), 500):
                found.update(
                    (str(u), pk)
                    for u, pk in model._base_manager.filter(
                        uid__in=uids[first : first + 500]
                    ).values_list("uid", "pk")
                )
            self.shore_pk[model] = found
        self.units = self._units()
        self.users = self._by_natural(User, "username")
        self.places = self._by_natural(Place, "name")
        self.sites = self._by_natural(Site, "name")
        self.content_types = {
            ct.pk: ContentType.objects.get_by_natural_key(ct.app_label, ct.model).pk
            for ct in ContentType.objects.using(alias).all()
            if ContentType.objects.filter(app_label=ct.app_label, model=ct.model).exists()
        }

    # --- reference rows -------------------------------------------------------------------

    def _units(self) -> dict[int, Transponder]:
        """Kit unit pk -> the shore unit of the same serial."""
        kit_units = dict(Transponder.objects.using(self.alias).values_list("pk", "serial"))
        shore = {u.serial: u for u in Transponder.objects.filter(serial__in=kit_units.values())}
        missing = sorted(set(kit_units.values()) - set(shore))
        if missing:
            raise MergeRefusedError(
                f"The kit holds units this database does not have ({', '.join(missing[:5])}); "
                "it was not exported from here."
            )
        return {pk: shore[serial] for pk, serial in kit_units.items()}

    def _by_natural(self, model: type[models.Model], key: str) -> dict[int, int]:
        kit_rows = dict(model._base_manager.using(self.alias).values_list("pk", key))
        shore = dict(
            model._base_manager.filter(**{f"{key}__in": kit_rows.values()}).values_list(key, "pk")
        )
        return {pk: shore[name] for pk, name in kit_rows.items() if name in shore}

    def kit_unit_of(self, instance: models.Model) -> int:
        """The kit primary key of the unit a kit row belongs to."""
        if isinstance(instance, ServiceRecord | Deployment | HoldChange):
            return int(instance.unit_id)
        if isinstance(instance, Entry | Amendment):
            return int(self.rows[ServiceRecord][instance.record_id].unit_id)
        if isinstance(instance, ReleaseCertificate):
            test = self.rows[type(instance.release_test)][instance.release_test_id]
            return int(self.rows[ServiceRecord][test.record_id].unit_id)
        raise TypeError(type(instance).__name__)

    def serial_of(self, instance: models.Model) -> str:
        return self.units[self.kit_unit_of(instance)].serial

    # --- identity --------------------------------------------------------------------------

    def is_board_made(self, instance: Any) -> bool:
        return bool(instance.origin == self.code and instance.uid is not None)

    def shore_pk_of(self, model: type[models.Model], instance: Any) -> int | None:
        """The shore primary key of a kit row that is a copy of (or was merged into) a shore
        row; None for a vessel row not yet ashore."""
        if instance.uid is not None:
            return self.shore_pk[model].get(str(instance.uid))
        return int(instance.pk)  # older than the uids: copied with its primary key

    def is_new(self, model: type[models.Model], instance: Any) -> bool:
        return self.is_board_made(instance) and self.shore_pk_of(model, instance) is None

    def ref(self, model: type[models.Model], kit_pk: int) -> Ref:
        label = model._meta.label_lower
        if model in self.rows:
            instance = self.rows[model].get(kit_pk)
            if instance is None:
                raise MergeRefusedError(f"The kit's {label} {kit_pk} is missing; file damaged.")
            shore = self.shore_pk_of(model, instance)
            if shore is None and self.is_board_made(instance):
                return Ref(label, uid=str(instance.uid))
            if shore is None:
                raise _UnmatchedError(label, kit_pk)
            return Ref(label, pk=shore)
        if model is Transponder:
            return Ref(label, pk=self.units[kit_pk].pk)
        lookup = {User: self.users, Place: self.places, Site: self.sites}.get(model)
        if model is ContentType:
            lookup = self.content_types
        if lookup is not None:
            if kit_pk not in lookup:
                raise self._missing_reference(model, kit_pk)
            return Ref(label, pk=lookup[kit_pk])
        # Reference rows copied with their keys (variants' anode and seal positions).
        if not model._base_manager.filter(pk=kit_pk).exists():
            raise _UnmatchedError(label, kit_pk)
        return Ref(label, pk=kit_pk)

    def _missing_reference(self, model: type[models.Model], kit_pk: int) -> MergeRefusedError:
        """A user, place or site the vessel's rows name that the shore does not have (made on
        board): the whole merge waits until it exists ashore under the same name."""
        key = {User: "username", Place: "name", Site: "name"}.get(model)
        if key is None:
            return _UnmatchedError(model._meta.label_lower, kit_pk)
        name = model._base_manager.using(self.alias).values_list(key, flat=True).get(pk=kit_pk)
        return MergeRefusedError(
            f"The vessel's rows name the {model._meta.verbose_name} {name!r}, which this "
            "database does not have (it was added on board). Add it ashore under the same "
            "name, then merge again; nothing was merged."
        )

    def vessel_row(self, instance: Any) -> VesselRow:
        model = type(instance)
        plain: dict[str, Any] = {}
        refs: dict[str, Ref] = {}
        for f in model._meta.concrete_fields:
            if f.primary_key:
                continue
            value = getattr(instance, f.attname)
            if f.is_relation and value is not None:
                target = cast("type[models.Model]", f.related_model)
                refs[f.attname] = self.ref(target, int(value))
            else:
                plain[f.attname] = _plain(instance, f)
        if isinstance(instance, Amendment):
            ct = ContentType.objects.using(self.alias).get(pk=instance.target_type_id)
            target_model = ct.model_class()
            assert target_model is not None
            refs["target_id"] = self.ref(target_model, int(instance.target_id))
            plain.pop("target_id", None)
        return VesselRow(
            label=model._meta.label_lower,
            uid=str(instance.uid),
            kit_pk=int(instance.pk),
            unit_serial=self.serial_of(instance),
            text=describe(instance),
            fields=plain,
            refs=refs,
        )

    # --- rows of one unit ------------------------------------------------------------------

    def kit_rows_of(self, model: type[models.Model], kit_unit: int) -> list[Any]:
        return [r for r in self.rows[model].values() if self.kit_unit_of(r) == kit_unit]


class _UnmatchedError(MergeRefusedError):
    def __init__(self, label: str, pk: int) -> None:
        super().__init__(
            f"The kit's {label} {pk} has no counterpart ashore (not made on this kit, and not "
            "found here by its uid or key); the kit was not exported from this database, or "
            "the row was deleted ashore since."
        )


def _entries_of(record: ServiceRecord, using: str) -> list[Entry]:
    found: list[Entry] = []
    for kind in entry_kinds():
        found.extend(kind._base_manager.using(using).filter(record_id=record.pk).order_by("pk"))
    return found


def _entry_key(entry: Any) -> tuple[str, str]:
    return (entry._meta.label_lower, str(entry.uid) if entry.uid is not None else f"pk{entry.pk}")


class _Planner:
    def __init__(self, reader: KitReader, plan: MergePlan) -> None:
        self.reader = reader
        self.plan = plan
        self.t = reader.exported_at
        # vessel uids kept in a conflict already recorded for this kit: never added again.
        self.held_before = _held_uids(reader.kit)
        self.held: set[str] = set()
        # The shore's own changes are those after the export, or after the last merge of this
        # kit (whose writes brought the shore level with the vessel as it was then).
        last = (
            KitMerge.objects.filter(kit=reader.kit, status=KitMerge.Status.APPLIED)
            .order_by("-merged_at")
            .values_list("merged_at", flat=True)
            .first()
        )
        self.t_shore = max(self.t, last) if last else self.t

    # The unit's spans on each side, built while planning it.
    def run(self) -> None:
        for kit_unit, unit in sorted(self.reader.units.items(), key=lambda kv: kv[1].serial):
            self.plan_unit(kit_unit, unit)
        self._certificates_and_amendments()
        self._dependents_of_held()

    # --- records and deployments of one unit ------------------------------------------------

    def plan_unit(self, kit_unit: int, unit: Transponder) -> None:
        r = self.reader
        shore_spans: list[Span] = []
        vessel_spans: list[Span] = []
        # Deployments that existed at export.
        # A row made on board and merged by an earlier return file is a shore row now: what
        # the vessel did to it since is a change, as for the rows that existed at export.
        for kd in r.kit_rows_of(Deployment, kit_unit):
            if r.is_new(Deployment, kd):
                vessel_spans.append(_span(kd, r.vessel_row(kd)))
                continue
            if r.is_board_made(kd):
                self.plan.already_merged += 1
            self._existing_deployment(kd, unit, shore_spans, vessel_spans)
        for kr in r.kit_rows_of(ServiceRecord, kit_unit):
            if r.is_new(ServiceRecord, kr):
                vessel_spans.append(_span(kr, r.vessel_row(kr)))
                continue
            if r.is_board_made(kr):
                self.plan.already_merged += 1
            self._existing_record(kr, unit, shore_spans, vessel_spans)
        kit_uids = {
            str(x.uid)
            for model in (ServiceRecord, Deployment)
            for x in r.kit_rows_of(model, kit_unit)
            if x.uid is not None
        }
        for model in (ServiceRecord, Deployment):
            # Made ashore since the export (every such row has a uid; a kit row's primary key
            # says nothing ashore).
            for row in model._base_manager.filter(unit=unit, created_at__gt=self.t):
                if str(row.uid) in kit_uids:
                    continue
                if row.origin:
                    continue  # merged from a kit (this one's earlier return, or another)
                shore_spans.append(_span(row, row))
        self._compare_spans(unit, shore_spans, vessel_spans)
        self._holds(kit_unit, unit)
        self._move(kit_unit, unit)

    def _existing_deployment(
        self, kd: Any, unit: Transponder, shore_spans: list[Span], vessel_spans: list[Span]
    ) -> None:
        r = self.reader
        pk = r.shore_pk_of(Deployment, kd)
        sd = Deployment._base_manager.filter(pk=pk).first() if pk else None
        if sd is None:
            self.plan.notes.append(
                f"{unit.serial}: the {describe(kd)} was deleted ashore since the export; the "
                "vessel's copy is not added back."
            )
            return
        if kd.recovered_at is None or kd.recovered_at == sd.recovered_at:
            return
        if sd.recovered_at is None:
            vessel_spans.append(_span(kd, kd))
            self.plan.changes.append(
                Change(
                    what="recoveries",
                    unit_serial=unit.serial,
                    text=f"{describe(sd)} recovered on board "
                    f"{timezone.localtime(kd.recovered_at):%Y-%m-%d %H:%M}"
                    + (
                        f", {kd.replies_counted} replies counted"
                        if kd.replies_counted is not None
                        else ""
                    ),
                    payload={
                        "deployment": sd.pk,
                        "recovered_at": kd.recovered_at.isoformat(),
                        "replies_counted": kd.replies_counted,
                        "place": self._kit_unit_place(kd.unit_id),
                    },
                )
            )
            return
        self.plan.conflicts.append(
            Conflict(
                kind=ConflictKind.RECOVERED_TWICE,
                unit_serial=unit.serial,
                key=f"recovered:{sd.pk}",
                explanation=(
                    f"{unit.serial}'s deployment over the side "
                    f"{timezone.localtime(sd.over_side_at):%Y-%m-%d %H:%M} was recovered on "
                    "both sides, at different times: ashore "
                    f"{timezone.localtime(sd.recovered_at):%Y-%m-%d %H:%M}, on board "
                    f"{timezone.localtime(kd.recovered_at):%Y-%m-%d %H:%M}. One of them is "
                    "wrong; check the deck log."
                ),
                shore=[shore_json(sd)],
                vessel=[_copy_row(r, kd)],
                choices=[Choice.KEEP_SHORE, Choice.TAKE_VESSEL],
            )
        )

    def _kit_unit_place(self, kit_unit: int) -> int | None:
        place_id = (
            Transponder.objects.using(self.reader.alias)
            .values_list("place_id", flat=True)
            .get(pk=kit_unit)
        )
        return None if place_id is None else self.reader.places.get(place_id)

    def _existing_record(
        self, kr: Any, unit: Transponder, shore_spans: list[Span], vessel_spans: list[Span]
    ) -> None:
        r = self.reader
        pk = r.shore_pk_of(ServiceRecord, kr)
        sr = ServiceRecord._base_manager.filter(pk=pk).first() if pk else None
        if sr is None:
            self.plan.notes.append(
                f"{unit.serial}: the {describe(kr)} was discarded ashore since the export; the "
                "vessel's copy is not added back."
            )
            return
        if (
            kr.closed_at is not None
            and kr.closed_at == sr.closed_at
            and r.users.get(kr.closed_by_id) == sr.closed_by_id
        ):
            return  # closed before the export: only amendments can differ (planned apart)
        kit_entries = _entries_of(kr, r.alias)
        shore_entries = _entries_of(sr, "default")
        kit_keys = {_entry_key(e) for e in kit_entries}
        shore_keys = {_entry_key(e) for e in shore_entries}
        board_new = [
            e for e in kit_entries if r.is_new(type(e), e) and str(e.uid) not in self.held_before
        ]
        shore_only = [e for e in shore_entries if _entry_key(e) not in kit_keys]
        kit_copied = [e for e in kit_entries if not r.is_board_made(e)]
        touched = kr.updated_at > self.t
        edited = [
            e for e in kit_copied if _entry_key(e) in shore_keys and _differs(e, shore_entries)
        ]
        fields = {
            name: getattr(kr, name)
            for name in RECORD_EDITED
            if _kit_value(r, kr, name) != getattr(sr, name)
        }
        closed_on_board = kr.closed_at is not None
        board_moved = bool(board_new) or closed_on_board or (touched and bool(edited or fields))
        shore_moved = sr.updated_at > self.t_shore or sr.closed_at is not None
        if not shore_moved and touched and shore_only:
            board_moved = True  # entries ashore, missing in the kit: removed on board
        if not touched:
            edited, fields = [], {}
        if not board_moved:
            return
        if not shore_moved:
            # Entries ashore and not in the kit, with the shore visit untouched: removed on board.
            deleted = shore_only
            self.plan.changes.append(
                Change(
                    what="bench visits worked on board",
                    unit_serial=unit.serial,
                    text=_work_text(sr, board_new, edited, deleted, fields, kr),
                    payload={
                        "record": sr.pk,
                        "new": [r.vessel_row(e).as_json() for e in board_new],
                        "edited": [_copy_row(r, e).as_json() for e in edited],
                        "deleted": [[e._meta.label_lower, e.pk] for e in deleted],
                        "fields": {name: _ref_or_value(r, kr, name) for name in fields},
                        "closed_at": kr.closed_at.isoformat() if kr.closed_at else None,
                        "closed_by": r.users.get(kr.closed_by_id) if kr.closed_by_id else None,
                        "by": r.users.get(kr.updated_by_id or kr.technician_id),
                    },
                )
            )
            for e in board_new:
                self.held.discard(str(e.uid))
            if kr.closed_at is not None:
                vessel_spans.append(_span(kr, kr))
            return
        both_closed = kr.closed_at is not None and sr.closed_at is not None
        kind = ConflictKind.CLOSED_TWICE if both_closed else ConflictKind.WORKED_TWICE
        what = (
            "was closed on both sides"
            if both_closed
            else "was worked on both sides (entries or changes on board and ashore)"
        )
        vessel = [_copy_row(r, kr), *[r.vessel_row(e) for e in board_new]]
        vessel += [_copy_row(r, e) for e in edited]
        self.plan.conflicts.append(
            Conflict(
                kind=kind,
                unit_serial=unit.serial,
                key=f"record:{sr.pk}",
                explanation=(
                    f"{unit.serial}'s {describe(sr)} was open when the kit was exported and "
                    f"{what}. Ashore it now has {len(shore_entries)} entries "
                    f"({len(shore_only)} added since the export); on board "
                    f"{len(kit_entries)} ({len(board_new)} added on board). Keep the shore's "
                    "visit as it is, or add the vessel's new entries as a bench visit of "
                    "their own beside it."
                ),
                shore=[shore_json(sr), *[shore_json(e) for e in shore_entries]],
                vessel=vessel,
                choices=[Choice.KEEP_SHORE, Choice.ADD_VESSEL],
            )
        )
        self.held.update(str(e.uid) for e in board_new)

    def _compare_spans(self, unit: Transponder, shore: list[Span], vessel: list[Span]) -> None:
        new_vessel = [s for s in vessel if isinstance(s.row, VesselRow)]
        if not shore or not new_vessel:
            return
        clashes: list[tuple[Span, Span, str]] = []
        for v in new_vessel:
            for s in shore:
                reason = _clash(s, v)
                if reason:
                    clashes.append((s, v, reason))
        if not clashes:
            self.plan.notes.append(
                f"{unit.serial} was worked on both sides since the export ({len(shore)} "
                f"ashore, {len(new_vessel)} on board); the histories do not overlap, so both "
                "are kept."
            )
            return
        by_vessel: dict[str, list[tuple[Span, str]]] = defaultdict(list)
        spans: dict[str, Span] = {}
        for s, v, reason in clashes:
            row = cast("VesselRow", v.row)
            if row.uid in self.held_before:
                continue
            by_vessel[row.uid].append((s, reason))
            spans[row.uid] = v
        for uid, found in by_vessel.items():
            v = spans[uid]
            row = cast("VesselRow", v.row)
            two_places = all(s.what == "deployment" for s, _ in found) and v.what == "deployment"
            kind = ConflictKind.TWO_PLACES if two_places else ConflictKind.INTERLEAVED
            reasons = "; ".join(reason for _, reason in found)
            self.plan.conflicts.append(
                Conflict(
                    kind=kind,
                    unit_serial=unit.serial,
                    key=f"vessel:{uid}",
                    explanation=(
                        f"{unit.serial}: the vessel's {v.text} cannot be true together with "
                        f"the shore's history since the export: {reasons}. Keep the shore's "
                        "history (the vessel's rows stay kept in this conflict), or add the "
                        "vessel's rows as well when both truly happened (a clock set wrong on "
                        "one side, say); what cannot be stored together, such as two "
                        "deployments at once, is still refused until one side is corrected."
                    ),
                    shore=[shore_json(cast("models.Model", s.row)) for s, _ in found],
                    vessel=[row],
                    choices=[Choice.KEEP_SHORE, Choice.ADD_VESSEL],
                )
            )
            self.held.add(uid)

    # --- holds and places -----------------------------------------------------------------

    def _holds(self, kit_unit: int, unit: Transponder) -> None:
        r = self.reader
        board = [
            h
            for h in r.kit_rows_of(HoldChange, kit_unit)
            if r.is_new(HoldChange, h) and str(h.uid) not in self.held_before
        ]
        if not board:
            return
        board.sort(key=lambda h: (h.set_at, h.pk))
        shore_since = list(
            HoldChange._base_manager.filter(unit=unit, set_at__gt=self.t)
            .exclude(origin=r.code)
            .order_by("set_at")
        )
        rows = [r.vessel_row(h) for h in board]
        if not shore_since and unit.hold == board[0].from_hold:
            self.plan.changes.append(
                Change(
                    what="hold changes",
                    unit_serial=unit.serial,
                    text="; ".join(f"hold {row.text}" for row in rows),
                    payload={"rows": [row.as_json() for row in rows]},
                )
            )
            return
        self.plan.conflicts.append(
            Conflict(
                kind=ConflictKind.HOLD_TWICE,
                unit_serial=unit.serial,
                key="hold:" + ",".join(row.uid for row in rows),
                explanation=(
                    f"{unit.serial}'s hold was changed on board "
                    f"({'; '.join(row.text for row in rows)}) and ashore since the export "
                    f"(now {unit.get_hold_display().lower()}"
                    + (f": {unit.hold_reason}" if unit.hold_reason else "")
                    + "). Keep the shore's hold, or take the vessel's last hold."
                ),
                shore=[shore_json(h) for h in shore_since] or [shore_json(unit)],
                vessel=rows,
                choices=[Choice.KEEP_SHORE, Choice.TAKE_VESSEL],
            )
        )

    def _move(self, kit_unit: int, unit: Transponder) -> None:
        place = self._kit_unit_place(kit_unit)
        if place is None or place == unit.place_id:
            return
        if any(c.what == "recoveries" and c.unit_serial == unit.serial for c in self.plan.changes):
            return  # the recovery brings the unit to its place
        if unit.updated_at > self.t_shore:
            self.plan.notes.append(
                f"{unit.serial} was moved on board and its record changed ashore since the "
                "export; it stays where the shore has it."
            )
            return
        self.plan.changes.append(
            Change(
                what="moves",
                unit_serial=unit.serial,
                text=f"moved on board to {Place.objects.get(pk=place)}",
                payload={"place": place},
            )
        )

    # --- the rest of the new rows ----------------------------------------------------------

    def _certificates_and_amendments(self) -> None:
        r = self.reader
        for model in identified_models():
            if model in (HoldChange,):
                continue
            for instance in r.rows[model].values():
                if not r.is_new(model, instance):
                    if r.is_board_made(instance) and model not in (ServiceRecord, Deployment):
                        self.plan.already_merged += 1
                    if model is ReleaseCertificate:
                        self._existing_certificate(instance)
                    continue
                uid = str(instance.uid)
                if uid in self.held_before:
                    continue
                if model is Amendment:
                    self._amendment(instance)
                    continue
                if isinstance(instance, Entry) and not r.is_new(
                    ServiceRecord, r.rows[ServiceRecord][instance.record_id]
                ):
                    continue  # an entry of a visit already ashore: planned with the visit
                self.plan.additions.append(r.vessel_row(instance))

    def _amendment(self, am: Any) -> None:
        r = self.reader
        row = r.vessel_row(am)
        target = row.refs["target_id"]
        if target.pk is None:
            self.plan.additions.append(row)  # amends a row made on board: kept as written
            return
        shore_same = Amendment._base_manager.filter(
            target_type_id=row.refs["target_type_id"].pk,
            target_id=target.pk,
            field_name=am.field_name,
            created_at__gt=self.t,
        ).exclude(origin=r.code)
        others = list(shore_same)
        if not others:
            self.plan.additions.append(row)
            return
        unit = self.reader.units[r.kit_unit_of(am)]
        self.plan.conflicts.append(
            Conflict(
                kind=ConflictKind.AMENDED_TWICE,
                unit_serial=unit.serial,
                key=f"vessel:{row.uid}",
                explanation=(
                    f"{unit.serial}: {am.field_name} was amended on board "
                    f"({am.original_value or '(empty)'} to {am.corrected_value or '(empty)'}, "
                    f"because: {am.reason}) and ashore since the export ("
                    + "; ".join(
                        f"{o.original_value or '(empty)'} to {o.corrected_value or '(empty)'}"
                        for o in others
                    )
                    + "). Keep the shore's value, or take the vessel's as a further amendment."
                ),
                shore=[shore_json(o) for o in others],
                vessel=[row],
                choices=[Choice.KEEP_SHORE, Choice.TAKE_VESSEL],
            )
        )
        self.held.add(row.uid)

    def _existing_certificate(self, kc: Any) -> None:
        r = self.reader
        pk = r.shore_pk_of(ReleaseCertificate, kc)
        sc = ReleaseCertificate._base_manager.filter(pk=pk).first() if pk else None
        if sc is None or kc.status == sc.status:
            return
        unit = r.units[r.kit_unit_of(kc)]
        shore_moved = sc.status_changed_at is not None and sc.status_changed_at > self.t_shore
        row = _copy_row(r, kc)
        if not shore_moved:
            self.plan.changes.append(
                Change(
                    what="certificate changes",
                    unit_serial=unit.serial,
                    text=f"certificate {sc.number} {kc.get_status_display().lower()} on board",
                    payload={"certificate": sc.pk, "row": row.as_json()},
                )
            )
            return
        self.plan.conflicts.append(
            Conflict(
                kind=ConflictKind.CERTIFICATE,
                unit_serial=unit.serial,
                key=f"certificate:{sc.pk}",
                explanation=(
                    f"Certificate {sc.number} is {sc.get_status_display().lower()} ashore and "
                    f"{kc.get_status_display().lower()} on board; both changed since the "
                    "export. Keep the shore's status, or take the vessel's."
                ),
                shore=[shore_json(sc)],
                vessel=[row],
                choices=[Choice.KEEP_SHORE, Choice.TAKE_VESSEL],
            )
        )

    def _dependents_of_held(self) -> None:
        """A row whose parent is held in a conflict (or waits in one) waits with it."""
        held = self.held | self.held_before
        changed = True
        while changed:
            changed = False
            keep: list[VesselRow] = []
            for row in self.plan.additions:
                if row.uid in held:
                    changed = True
                    continue
                if any(ref.uid is not None and ref.uid in held for ref in row.refs.values()):
                    held.add(row.uid)
                    changed = True
                    self._attach_to_conflict(row)
                    continue
                keep.append(row)
            self.plan.additions = keep

    def _attach_to_conflict(self, row: VesselRow) -> None:
        parents = {ref.uid for ref in row.refs.values() if ref.uid is not None}
        for conflict in self.plan.conflicts:
            if parents & {v.uid for v in conflict.vessel}:
                conflict.vessel.append(row)
                return
        self.plan.orphans.append(row)
        self.plan.notes.append(
            f"{row.unit_serial}: {row.text} depends on vessel rows an earlier merge kept in a "
            "conflict; it is kept with them."
        )


def _ref_or_value(r: KitReader, kr: Any, name: str) -> Any:
    value = getattr(kr, name)
    if name == "technician_id":
        return r.users.get(value)
    if name == "place_id":
        return r.places.get(value)
    if isinstance(value, dt.datetime):
        return value.isoformat()
    return value


def _kit_value(r: KitReader, kr: Any, name: str) -> Any:
    value = getattr(kr, name)
    if name == "technician_id":
        return r.users.get(value)
    if name == "place_id":
        return r.places.get(value)
    return value


def _copy_row(r: KitReader, instance: Any) -> VesselRow:
    """A kit row that is a copy of a shore row, whole, as the vessel has it now."""
    model = type(instance)
    plain: dict[str, Any] = {}
    refs: dict[str, Ref] = {}
    for f in model._meta.concrete_fields:
        if f.primary_key:
            continue
        value = getattr(instance, f.attname)
        if f.is_relation and value is not None:
            try:
                refs[f.attname] = r.ref(cast("type[models.Model]", f.related_model), int(value))
            except MergeRefusedError:
                plain[f.attname] = str(value)
        else:
            plain[f.attname] = _plain(instance, f)
    return VesselRow(
        label=model._meta.label_lower,
        uid=_uid(instance.uid) or f"pk{instance.pk}",
        kit_pk=int(instance.pk),
        unit_serial=r.serial_of(instance),
        text=describe(instance),
        fields=plain,
        refs=refs,
        copy=True,
    )


_SKIP_COMPARE = {"id", "uid", "origin", "record_id"}


def _differs(kit_entry: Any, shore_entries: Iterable[Any]) -> bool:
    key = _entry_key(kit_entry)
    shore = next(e for e in shore_entries if _entry_key(e) == key)
    for f in type(kit_entry)._meta.concrete_fields:
        if f.attname in _SKIP_COMPARE or f.is_relation:
            continue
        if getattr(kit_entry, f.attname) != getattr(shore, f.attname):
            return True
    return False


def _work_text(
    sr: ServiceRecord,
    new: list[Any],
    edited: list[Any],
    deleted: list[Any],
    fields: dict[str, Any],
    kr: Any,
) -> str:
    parts = []
    if new:
        parts.append(f"{len(new)} entries added ({'; '.join(describe(e) for e in new)})")
    if edited:
        parts.append(f"{len(edited)} entries corrected")
    if deleted:
        parts.append(f"{len(deleted)} entries removed")
    if fields:
        parts.append("changed " + ", ".join(name.removesuffix("_id") for name in fields))
    if kr.closed_at is not None:
        parts.append(f"closed {timezone.localtime(kr.closed_at):%Y-%m-%d %H:%M}")
    return f"{describe(sr)}: " + ("; ".join(parts) or "touched, nothing to carry over")


def _span(instance: Any, row: models.Model | VesselRow) -> Span:
    if isinstance(instance, Deployment):
        return Span(
            "deployment", instance.over_side_at, instance.recovered_at, describe(instance), row
        )
    return Span("visit", instance.opened_at, instance.closed_at, describe(instance), row)


def _clash(shore: Span, vessel: Span) -> str:
    """Why a shore span and a vessel span cannot both be true ("" when they can)."""
    local = timezone.localtime
    if shore.what == "deployment" and vessel.what == "deployment":
        if shore.overlaps(vessel):
            until = f"recovered {local(shore.end):%Y-%m-%d %H:%M}" if shore.end else "not recovered"
            return f"ashore it was deployed from {local(shore.start):%Y-%m-%d %H:%M} ({until})"
        return ""
    if shore.what == "visit" and vessel.what == "visit":
        if shore.end is None and vessel.end is None:
            return "a bench visit is open on both sides at once"
        if shore.overlaps(vessel):
            return f"the shore had it on the bench from {local(shore.start):%Y-%m-%d %H:%M}"
        return ""
    deployment, visit = (shore, vessel) if shore.what == "deployment" else (vessel, shore)
    if (
        deployment.contains(visit.start)
        or (visit.end is None and deployment.end is None)
        or (visit.end is None and deployment.start >= visit.start)
    ):
        side = "ashore" if visit is shore else "on board"
        return (
            f"{side} it was on the bench from {local(visit.start):%Y-%m-%d %H:%M} while the "
            f"other side had it in the water from {local(deployment.start):%Y-%m-%d %H:%M}"
        )
    return ""


def _held_uids(kit: Kit) -> set[str]:
    """Vessel rows kept in a conflict an earlier merge of this kit recorded: its rows, and
    the rows a change kept with them carries (a hold change's, kept because the unit's other
    vessel work could not be written). Those are not planned again by a later return file:
    they wait for the conflict's resolution, as the rows beside them do."""
    held: set[str] = set()
    for vessel in KitConflict.objects.filter(merge__kit=kit).values_list(
        "vessel_version", flat=True
    ):
        for row in vessel or []:
            held.add(str(row.get("uid")))
            payload = row.get("payload")
            if isinstance(payload, dict):
                held.update(str(inner.get("uid")) for inner in payload.get("rows") or [])
    return held


def new_uid() -> str:
    return str(uuid.uuid4())


def plan_merge(alias: str, *, code: str, file_sha256: str) -> MergePlan:
    """What merging the kit database at ``alias`` (kit ``code``) would do; reads only."""
    if kit_here() is not None:
        raise MergeRefusedError(
            "This database is itself a vessel kit; a return file is merged ashore."
        )
    if Kit.objects.using(alias).filter(here=True, code=code).count() != 1:
        raise MergeRefusedError(
            f"The file's database is not kit {code}'s own (no kit row marked as here)."
        )
    kit = Kit.objects.filter(code=code).first()
    if kit is None:
        raise MergeRefusedError(
            f"Kit {code} was not exported from this database (no such kit here); refused."
        )
    reader = KitReader(alias, kit, code)
    plan = MergePlan(
        kit=kit,
        file_sha256=file_sha256,
        exported_at=reader.exported_at,
        units=sorted(u.serial for u in reader.units.values()),
    )
    plan.already_applied = KitMerge.objects.filter(
        kit=kit, file_sha256=file_sha256, status=KitMerge.Status.APPLIED
    ).exists()
    _Planner(reader, plan).run()
    return plan
