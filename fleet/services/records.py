"""Writes that touch a service record and its entries. Each one is a single transaction.

Every write here locks the unit row first (``select_for_update``), then the record, then
reads again what it will change and writes only the fields that changed (``update_fields``):
two writers to one unit take turns and neither loses the other's work. Edits a stale page
could overwrite (the bench-visit form, closing, an amendment) carry the record's version and
are refused, naming who changed the record and when, if it moved on.
"""

import datetime as dt
import functools
from collections.abc import Iterable, Sequence
from dataclasses import dataclass
from typing import Any

from django.contrib.auth.models import User
from django.contrib.contenttypes.models import ContentType
from django.core.exceptions import PermissionDenied, ValidationError
from django.db import transaction
from django.db.models import Field, ForeignKey, Model, Q, QuerySet
from django.utils import timezone

from fleet import roles
from fleet.due.store import refresh_unit
from fleet.forms import parse_amendment_value
from fleet.integrity import amending
from fleet.models import (
    Amendment,
    BatteryInstall,
    Deployment,
    HousingOpening,
    PackRemoval,
    ReleaseCertificate,
    ReleaseTest,
    ServiceRecord,
    Transponder,
    UnitHold,
)
from fleet.models.records import (
    Entry,
    EntryValues,
    amendable_field,
    check_entry_values,
    entry_kinds,
)
from fleet.services.bulk import insert_new, insert_rows, reads_as_given

# The record's own field an amendment may correct; each entry kind lists its own
# (``Entry.amendable_fields``).
RECORD_AMENDABLE_FIELDS: tuple[str, ...] = ("summary",)


def amendable_fields(target: Model) -> tuple[str, ...]:
    """The fields of ``target`` (the record or one of its entries) an amendment may correct."""
    if isinstance(target, ServiceRecord):
        return RECORD_AMENDABLE_FIELDS
    if isinstance(target, Entry):
        return target.amendable_fields
    return ()


def _lock_unit(unit_id: int) -> Transponder:
    """Lock the unit row: every write to a unit's records takes it first, so writers to one
    unit run one after the other and each reads what the previous one wrote."""
    return Transponder.objects.select_for_update().select_related("variant").get(pk=unit_id)


def _lock_record(pk: int) -> tuple[Transponder, ServiceRecord]:
    """Lock the record's unit, then the record, and return both as they are now."""
    unit_id = ServiceRecord.objects.values_list("unit_id", flat=True).get(pk=pk)
    unit = _lock_unit(unit_id)
    current = ServiceRecord.objects.select_for_update().get(pk=pk)
    current.unit = unit
    return unit, current


def _person(user: object) -> str:
    if user is None:
        return "Someone"
    full = getattr(user, "get_full_name", lambda: "")()
    return str(full or user)


def last_change(record: ServiceRecord) -> tuple[object, dt.datetime]:
    """Who moved the record last, and when: its close, if that came after the last edit or
    amendment; else the last edit or amendment; else its creation."""
    if record.closed_at is not None and (
        record.updated_by_id is None or record.closed_at >= record.updated_at
    ):
        return record.closed_by, record.closed_at
    if record.updated_by_id is not None:
        return record.updated_by, record.updated_at
    return record.created_by, record.created_at


def check_version(current: ServiceRecord, expected_version: int | None) -> None:
    """Refuse an edit built from an older version of the record, naming who changed it."""
    if expected_version is None or current.version == expected_version:
        return
    who_by, at = last_change(current)
    who = _person(who_by)
    when = timezone.localtime(at)
    raise ValidationError(
        "%(who)s changed this record at %(when)s, after you loaded it. Nothing of yours was "
        "saved: reload the page to see their change, then enter yours again.",
        params={"who": who, "when": f"{when:%Y-%m-%d %H:%M}"},
        code="stale",
    )


def _changed_fields(
    instance: Model, stored: Model, names: Iterable[str] | None = None
) -> list[str]:
    """The concrete fields (by attname) whose value on ``instance`` differs from ``stored``."""
    fields = [f for f in instance._meta.concrete_fields if not f.primary_key]
    if names is not None:
        wanted = set(names)
        fields = [f for f in fields if f.name in wanted or f.attname in wanted]
    return [f.attname for f in fields if getattr(instance, f.attname) != getattr(stored, f.attname)]


def _has_entries(record: ServiceRecord) -> bool:
    return any(getattr(record, kind.related_name()).exists() for kind in entry_kinds())


def open_record_of(unit: Transponder) -> ServiceRecord | None:
    """The unit's bench visit in progress, if any (at most one: ``one_open_record_per_unit``)."""
    return ServiceRecord.objects.filter(unit=unit, closed_at__isnull=True).first()


def check_can_open_record(unit: Transponder) -> None:
    """A bench visit cannot start for a unit in the water, lost or retired, nor while another
    visit to the same unit is open. A quarantined unit can: the bench is where it is fixed."""
    if unit.hold in (UnitHold.LOST, UnitHold.RETIRED):
        raise ValidationError(
            f"{unit.serial} is {unit.get_hold_display().lower()}; "
            "a bench visit cannot be opened for it."
        )
    if Deployment.objects.filter(unit=unit, recovered_at__isnull=True).exists():
        raise ValidationError(
            f"{unit.serial} is in the water; recover it before opening a bench visit."
        )
    current = open_record_of(unit)
    if current is not None:
        raise ValidationError(
            f"{unit.serial} already has an open bench visit (opened "
            f"{timezone.localtime(current.opened_at):%Y-%m-%d %H:%M}); "
            "finish or discard it before opening another."
        )


def fitted_packs(unit_id: int) -> QuerySet[BatteryInstall]:
    """The unit's packs that no removal entry has taken out (at most one after every save)."""
    return BatteryInstall.objects.filter(unit_id=unit_id, removal__isnull=True)


def _remove_pack(
    record: ServiceRecord,
    install: BatteryInstall,
    removed_on: dt.date,
    ocv_v: float | None,
    field: str,
) -> PackRemoval:
    """Write the removal of ``install`` as an entry of ``record``: the record that fitted the
    pack (often closed) is never touched."""
    removal = PackRemoval(
        record=record, install=install, removed_on=removed_on, ocv_removal_v=ocv_v
    )
    try:
        removal.full_clean()
    except ValidationError as exc:
        raise ValidationError(
            {field: [m for msgs in exc.message_dict.values() for m in msgs]}
        ) from exc
    removal.save()
    return removal


def _fit_battery(record: ServiceRecord, install: BatteryInstall) -> None:
    """A new pack replaces the fitted one: the old pack is removed, by an entry of this
    record, on the new one's install day."""
    fitted = fitted_packs(record.unit_id).exclude(record=record).first()
    if fitted is None:
        return
    if install.installed_on < fitted.installed_on:
        raise ValidationError(
            {
                "installed_on": (
                    f"The fitted pack {fitted.pack_serial} went in on {fitted.installed_on}; "
                    "a replacement cannot be installed before that."
                )
            }
        )
    _remove_pack(record, fitted, install.installed_on, None, "installed_on")


def _remove_fitted_pack(record: ServiceRecord, removed_on: dt.date, ocv_v: float | None) -> None:
    fitted = fitted_packs(record.unit_id).first()
    if fitted is None:
        raise ValidationError({"remove_pack_on": "No pack is fitted to this unit."})
    _remove_pack(record, fitted, removed_on, ocv_v, "remove_pack_on")


# What the bench-visit form edits on the record itself.
RECORD_EDITABLE_FIELDS: tuple[str, ...] = ("opened_at", "technician", "place", "summary")


def _entry_order(entry: Entry | EntryValues) -> int:
    # Removals first: a new pack then replaces only a pack no removal has taken out yet.
    return 0 if isinstance(entry, PackRemoval) else 1


def _save_entry(record: ServiceRecord, entry: Entry) -> None:
    model = type(entry)
    if entry.pk is None:
        entry.record = record
        if isinstance(entry, BatteryInstall):
            entry.unit = record.unit
            entry.full_clean()
            _fit_battery(record, entry)
        entry.full_clean()
        entry.save()
        return
    stored = model._default_manager.select_for_update().filter(pk=entry.pk).first()
    if stored is None or stored.record_id != record.pk:
        raise ValidationError("An entry can only be edited within its own record.")
    entry.record = record
    if isinstance(entry, BatteryInstall):
        entry.unit = record.unit
    entry.full_clean()
    changed = _changed_fields(entry, stored)
    if changed:
        entry.save(update_fields=changed)


def _stamp(record: ServiceRecord, **moments: dt.datetime) -> None:
    """Write the given audit times of an open record (``created_at`` and ``updated_at`` take
    the clock on every save, so a past moment is written after it)."""
    ServiceRecord.objects.filter(pk=record.pk, closed_at__isnull=True).update(**moments)
    for name, value in moments.items():
        setattr(record, name, value)


def _open_record(record: ServiceRecord, unit: Transponder, by: User) -> None:
    """Write a new record of the locked ``unit``. Its two constraints are checked here without
    a query: no other visit of the unit is open (``check_can_open_record`` reads that), and it
    closes after it opened. ``full_clean`` would evaluate each in the database, in a
    savepoint: six statements of a save's fifty (the database still enforces both)."""
    check_can_open_record(unit)
    record.created_by = by
    record.version = 1
    record.full_clean(validate_constraints=False)
    if record.closed_at is not None and record.closed_at < record.opened_at:
        raise ValidationError({"closed_at": "A record cannot close before it opened."})
    record.save()


@transaction.atomic
def service_record_save(
    *,
    record: ServiceRecord,
    entries: Sequence[Entry] = (),
    delete: Iterable[Entry] = (),
    by: User,
    expected_version: int | None = None,
    pack_removal: tuple[dt.date, float | None] | None = None,
    at: dt.datetime | None = None,
) -> ServiceRecord:
    """Create or update an open record with its entries, all or nothing.

    The unit row is locked first, then the record is read again inside the lock and only the
    fields that changed are written. ``expected_version`` is the version the editor loaded; a
    stale edit is refused (naming who changed the record and when) rather than silently
    overwriting a colleague's work. ``pack_removal`` (date, open-circuit volts) takes out the
    pack fitted at an earlier visit, as a removal entry of this record. ``at`` is when the
    write happened, for history entered afterwards (the demo's past visits); default now.
    """
    if record.pk is not None:
        unit, current = _lock_record(record.pk)
        if current.is_closed:
            raise ValidationError("This record is closed; corrections are made as amendments.")
        check_version(current, expected_version)
        changed = _changed_fields(record, current, RECORD_EDITABLE_FIELDS)
        for name in changed:
            setattr(current, name, getattr(record, name))
        current.version += 1
        current.updated_by = by
        current.full_clean()
        current.save(update_fields=[*changed, "version", "updated_by", "updated_at"])
        if at is not None:
            _stamp(current, updated_at=at)
        record.version, record.updated_at = current.version, current.updated_at
        record.updated_by = by
        new_visit = False
    else:
        unit = _lock_unit(record.unit_id)
        _open_record(record, unit, by)
        if at is not None:
            _stamp(record, created_at=at, updated_at=at)
        current = record
        new_visit = True
    current.unit = unit
    record.unit = unit

    if pack_removal is not None:
        _remove_fitted_pack(current, *pack_removal)
    for entry in delete:
        if entry.pk is None:
            continue
        stored = type(entry)._default_manager.filter(pk=entry.pk, record=current).first()
        if stored is not None:
            stored.delete()
    for entry in sorted(entries, key=_entry_order):
        _save_entry(current, entry)
    if fitted_packs(unit.pk).count() > 1:
        serials = ", ".join(fitted_packs(unit.pk).values_list("pack_serial", flat=True))
        raise ValidationError(
            f"{unit.serial} would have more than one fitted pack ({serials}); record the "
            "removal of the old one."
        )
    # Only this visit and its entries changed (a removal entry of its own included).
    refresh_unit(unit, at=timezone.now(), visit=current, new_visit=new_visit)
    return record


@transaction.atomic
def service_record_close(
    *,
    record: ServiceRecord,
    by: User,
    at: dt.datetime,
    expected_version: int | None = None,
) -> None:
    """Close an open record. ``expected_version`` is the version the supervisor reviewed: a
    change since then refuses the close, naming who made it."""
    _, current = _lock_record(record.pk)
    if current.is_closed:
        raise ValidationError("This record is already closed.")
    check_version(current, expected_version)
    if at < current.opened_at:
        raise ValidationError("A record cannot close before it opened.")
    still_open = current.housing_openings.filter(closed_at__isnull=True).order_by("opened_at")
    if still_open.exists():
        when = ", ".join(f"{timezone.localtime(o.opened_at):%Y-%m-%d %H:%M}" for o in still_open)
        raise ValidationError(
            f"The housing opened at {when} has no close time. Enter when it was closed "
            "before closing the record."
        )
    if not _has_entries(current):
        raise ValidationError(
            "This record has no entries, so there is nothing to close; discard the visit instead."
        )
    # Closing is its own event (closed_by, closed_at): the last change to the contents
    # (updated_by, updated_at) stays who last edited the entries.
    current.closed_at = at
    current.closed_by = by
    current.version += 1
    current.save(update_fields=["closed_at", "closed_by", "version"])
    for name in ("closed_at", "closed_by", "version"):
        setattr(record, name, getattr(current, name))


@functools.cache
def _keys_of(model: type[Model]) -> tuple[ForeignKey[Any, Any], ...]:
    """The model's foreign keys (read off it once, not once an object)."""
    return tuple(f for f in model._meta.concrete_fields if isinstance(f, ForeignKey))


def _loaded_keys(instance: Model) -> list[str]:
    """The foreign keys of ``instance`` that hold a row read from the database (so the
    existence query ``full_clean`` would send for each can be spared: the insert's own foreign
    key constraint still refuses a row that went away)."""
    names = []
    for field in _keys_of(type(instance)):
        if field.is_cached(instance):
            related = getattr(instance, field.name)
            if related is not None and related.pk is not None and not related._state.adding:
                names.append(field.name)
    return names


def _take_saved_keys(instance: Model) -> None:
    """Point the keys of ``instance`` at related objects saved since they were attached (a pack
    removal's install, fitted by an earlier visit of the same import)."""
    for field in _keys_of(type(instance)):
        if field.is_cached(instance):
            related = getattr(instance, field.name)
            if related is not None and related.pk is not None:
                setattr(instance, field.attname, related.pk)


@dataclass(frozen=True, slots=True)
class PastVisit:
    """A bench visit of the past, to be written closed: the record (unsaved), its entries
    (unsaved, as models or, for a kind ``checked_as_values``, as plain values) and when it
    closed."""

    record: ServiceRecord
    entries: Sequence[Entry | EntryValues]
    closed_at: dt.datetime


def _close_refusal(
    record: ServiceRecord, entries: Sequence[Entry | EntryValues], at: dt.datetime
) -> str:
    """``service_record_close``'s checks, on a visit held in memory ("" when it may close)."""
    if at < record.opened_at:
        return "A record cannot close before it opened."
    openings = [
        e.instance() if isinstance(e, EntryValues) else e
        for e in entries
        if (e.kind if isinstance(e, EntryValues) else type(e)) is HousingOpening
    ]
    still_open = [o for o in openings if isinstance(o, HousingOpening) and o.closed_at is None]
    if still_open:
        when = ", ".join(f"{timezone.localtime(o.opened_at):%Y-%m-%d %H:%M}" for o in still_open)
        return (
            f"The housing opened at {when} has no close time. Enter when it was closed "
            "before closing the record."
        )
    if not entries:
        return (
            "This record has no entries, so there is nothing to close; discard the visit instead."
        )
    return ""


# Rows per INSERT statement of a bulk write (well under SQLite's 32,766 bound parameters).
IMPORT_BATCH = 500


def _past_record(unit: Transponder, visit: PastVisit, by: User) -> ServiceRecord:
    """The visit's record, checked as saving and closing it would check it, ready to insert
    closed (unsaved)."""
    record = visit.record
    refusal = _close_refusal(record, visit.entries, visit.closed_at)
    if refusal:
        raise ValidationError(refusal)
    record.unit = unit
    record.created_by = record.closed_by = record.updated_by = by
    record.closed_at = visit.closed_at
    record.version = 2  # opened, then closed
    # Its constraints hold by now: it closes after it opened (``_close_refusal``), and a
    # closed record is outside "one open record per unit"; checking them again in Python
    # would send two queries a visit (the database still enforces both).
    record.full_clean(exclude=_loaded_keys(record), validate_constraints=False)
    return record


def _past_entries(
    visit: PastVisit,
    plain: dict[type[Entry], list[Entry]],
    as_values: dict[type[Entry], list[EntryValues]],
) -> None:
    """Check the visit's entries (its record is written by now): a pack fitted or taken out
    is written at once, in visit order, as the bench page writes it (a new pack replaces the
    fitted one, which later visits must see); the others are checked and kept in ``plain``
    (models) or ``as_values`` (plain values, checked by ``check_entry_values``, the same
    checks and messages as ``full_clean``) to be inserted together."""
    record = visit.record
    variant_id = record.unit.variant_id
    for entry in sorted(visit.entries, key=_entry_order):
        if isinstance(entry, EntryValues):
            entry.values["record"] = record
            check_entry_values(entry.kind, entry.values, unit_variant_id=variant_id)
            as_values.setdefault(entry.kind, []).append(entry)
            continue
        entry.record = record
        _take_saved_keys(entry)
        if isinstance(entry, BatteryInstall | PackRemoval):
            _save_entry(record, entry)
            continue
        entry.full_clean(exclude=_loaded_keys(entry))
        plain.setdefault(type(entry), []).append(entry)


@functools.cache
def _columns_of(kind: type[Entry]) -> tuple[tuple[Field[Any, Any], bool, bool], ...]:
    """Each stored field of ``kind`` with whether an INSERT takes its value as given and
    whether it is a key (read off the model once)."""
    return tuple((f, reads_as_given(f), f.is_relation) for f in kind._meta.concrete_fields)


def _row(entry: EntryValues) -> dict[str, Any]:
    """The checked values of ``entry`` by attribute name, each key as its row's key. An
    empty file field is left to ``insert_rows``, which stores what saving stores."""
    row: dict[str, Any] = {}
    values = entry.values
    for f, as_given, key in _columns_of(entry.kind):
        if f.name not in values:
            continue
        value = values[f.name]
        if not as_given:
            if value not in f.empty_values:
                raise ValueError(f"{entry.kind.__name__}.{f.name} is written on save only.")
            continue
        row[f.attname] = value.pk if key and value is not None else value
    return row


@transaction.atomic
def service_records_import(*, unit_id: int, visits: Sequence[PastVisit], by: User) -> None:
    """Write a unit's past bench visits, each closed, in date order: the history an import
    brings. Each visit is checked as ``service_record_save`` and ``service_record_close``
    check it (the unit may take a visit, each record and entry's ``full_clean``, a new pack
    replacing the fitted one, one fitted pack, the close rules) and written closed by ``by``.

    Written in bulk: the unit is locked and checked once; its records go in a few INSERTs,
    closed (the integrity triggers guard UPDATE and DELETE only, and nothing here updates a
    row it wrote), then their entries, one INSERT per kind and batch (a pack fitted or taken
    out is written one at a time, in visit order). Keys read from the database are not
    looked up again; the database's own foreign keys and CHECKs still hold every row. The
    unit's derived state is refreshed once, at the end (``refresh_unit``)."""
    unit = _lock_unit(unit_id)
    check_can_open_record(unit)
    records = [_past_record(unit, visit, by) for visit in visits]
    # The records' primary keys come back from the INSERT (RETURNING, on SQLite >= 3.35 and
    # PostgreSQL), which the entries need.
    insert_new(records, batch_size=IMPORT_BATCH)
    plain: dict[type[Entry], list[Entry]] = {}
    as_values: dict[type[Entry], list[EntryValues]] = {}
    for visit in visits:
        _past_entries(visit, plain, as_values)
    for rows in plain.values():
        insert_new(rows, batch_size=IMPORT_BATCH)
    for kind, entries in as_values.items():
        keys = insert_rows(kind, [_row(e) for e in entries], batch_size=IMPORT_BATCH)
        for entry, key in zip(entries, keys, strict=True):
            entry.pk = key
    if fitted_packs(unit.pk).count() > 1:
        serials = ", ".join(fitted_packs(unit.pk).values_list("pack_serial", flat=True))
        raise ValidationError(
            f"{unit.serial} would have more than one fitted pack ({serials}); record the "
            "removal of the old one."
        )
    refresh_unit(unit, at=timezone.now())


def can_discard(record: ServiceRecord, user: User) -> bool:
    """Who may discard an open visit: its technician or a supervisor."""
    return record.technician_id == user.pk or roles.can_supervise(user)


@transaction.atomic
def service_record_discard(*, record: ServiceRecord, by: User) -> None:
    """Delete an open bench visit that has no entries (opened by mistake or never started)."""
    _, current = _lock_record(record.pk)
    if current.is_closed:
        raise ValidationError("A closed record cannot be discarded.")
    if not can_discard(current, by):
        raise ValidationError("Only the visit's technician or a supervisor can discard it.")
    if _has_entries(current):
        raise ValidationError(
            "This visit has entries and cannot be discarded; remove them first or close it."
        )
    # No entries means nothing fed the unit's derived state or due rows: nothing to refresh.
    current.delete()


def amendable_targets(record: ServiceRecord) -> list[Model]:
    """The record itself and every entry in it, in a stable order."""
    targets: list[Model] = [record]
    for kind in entry_kinds():
        targets.extend(getattr(record, kind.related_name()).order_by("pk"))
    return targets


def _invalidate_certificates(
    record: ServiceRecord, target: Model, amendment: Amendment, by: User
) -> None:
    """An amendment to a release test, or to its record, leaves an issued certificate not
    valid: it certified values the record no longer says."""
    if isinstance(target, ReleaseTest):
        tests = Q(release_test=target)
    elif isinstance(target, ServiceRecord):
        tests = Q(release_test__record=record)
    else:
        return
    on = timezone.localdate(amendment.created_at)
    what = "record" if isinstance(target, ServiceRecord) else "release test"
    for certificate in ReleaseCertificate.objects.select_for_update().filter(
        tests, status=ReleaseCertificate.Status.ISSUED
    ):
        certificate.status = ReleaseCertificate.Status.NOT_VALID
        certificate.status_changed_at = amendment.created_at
        certificate.status_changed_by = by
        certificate.invalidated_by = amendment
        certificate.status_reason = (
            f"Not valid since {on}: the {what} "
            f"was amended ({amendment.field_name}: {amendment.original_value or '(empty)'} "
            f"to {amendment.corrected_value or '(empty)'}). Issue a new certificate or withdraw "
            "this one."
        )
        certificate.save(
            update_fields=[
                "status",
                "status_changed_at",
                "status_changed_by",
                "invalidated_by",
                "status_reason",
            ]
        )


def _amendable_model(target: Model) -> type[Model]:
    model = type(target)
    if model is not ServiceRecord and model not in entry_kinds():
        raise ValidationError({"target": "Only a record or one of its entries can be amended."})
    return model


@transaction.atomic
def amendment_create(
    *,
    record: ServiceRecord,
    target: Model,
    field_name: str,
    corrected_value: str,
    reason: str,
    by: User,
    expected_version: int | None = None,
) -> Amendment:
    """Correct one field of a closed record, keeping the original value in the amendment.

    Supervisors only. The unit and the record are locked, then the target is read again by
    its primary key inside the lock (the caller's copy may be stale) and only the corrected
    field is written. ``expected_version`` (the record version the form showed) refuses a
    correction built on a stale page. Amending a release test or its record makes its issued
    certificate not valid.
    """
    if not roles.can_supervise(by):
        raise PermissionDenied("Only a supervisor can amend a closed record.")
    model = _amendable_model(target)
    _, current = _lock_record(record.pk)
    if not current.is_closed:
        raise ValidationError("Open records are edited directly; amendments are for closed ones.")
    check_version(current, expected_version)
    if not reason.strip():
        raise ValidationError({"reason": "Say why the value is being corrected."})
    if model is ServiceRecord:
        if target.pk != current.pk:
            raise ValidationError({"target": "That record is not this one."})
        fresh: Model = current
    else:
        found = model._default_manager.select_for_update().filter(pk=target.pk).first()
        if found is None or getattr(found, "record_id", None) != current.pk:
            raise ValidationError({"target": "That entry belongs to another record."})
        fresh = found
    if field_name not in amendable_fields(fresh):
        raise ValidationError({"field_name": "That value cannot be corrected by an amendment."})

    field = amendable_field(fresh, field_name)
    original = field.value_to_string(fresh)
    value = parse_amendment_value(fresh, field_name, corrected_value)
    setattr(fresh, field_name, value)
    try:
        fresh.full_clean()
    except ValidationError as exc:
        messages = exc.message_dict.get(field_name) or exc.messages
        raise ValidationError({"corrected_value": messages}) from exc
    corrected = field.value_to_string(fresh)
    if corrected == original:
        raise ValidationError({"corrected_value": "That is the value already recorded."})
    current.version += 1
    current.updated_by = by
    with amending():
        if fresh is current:
            current.save(update_fields=[field_name, "version", "updated_by", "updated_at"])
        else:
            fresh.save(update_fields=[field_name])
            current.save(update_fields=["version", "updated_by", "updated_at"])
    refresh_unit(current.unit, at=timezone.now())
    amendment = Amendment.objects.create(
        record=current,
        target_type=ContentType.objects.get_for_model(fresh),
        target_id=fresh.pk,
        field_name=field_name,
        original_value=original,
        corrected_value=corrected,
        reason=reason.strip(),
        created_by=by,
    )
    _invalidate_certificates(current, fresh, amendment, by)
    return amendment
