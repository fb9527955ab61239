"""Writes that touch a service record and its entries. Each one is a single transaction."""

import datetime as dt
from collections.abc import Iterable, Sequence

from django.contrib.auth.models import User
from django.contrib.contenttypes.models import ContentType
from django.core.exceptions import ValidationError
from django.db import transaction
from django.db.models import Model
from django.utils import timezone

from fleet import roles
from fleet.due.store import refresh_unit
from fleet.forms import parse_amendment_value
from fleet.models import Amendment, BatteryInstall, Deployment, ServiceRecord, Transponder, UnitHold
from fleet.models.records import Entry, amendable_field, entry_kinds

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


def _lock(record: ServiceRecord) -> ServiceRecord:
    return ServiceRecord.objects.select_for_update().get(pk=record.pk)


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


def _fit_battery(install: BatteryInstall) -> None:
    """A new pack replaces the fitted one: the old pack is removed on the new one's install day."""
    if install.pk is not None or install.removed_on is not None:
        return
    fitted = (
        BatteryInstall.objects.select_for_update()
        .filter(unit_id=install.unit_id, removed_on__isnull=True)
        .first()
    )
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
    fitted.removed_on = install.installed_on
    fitted.save(update_fields=["removed_on"])


def _remove_fitted_pack(record: ServiceRecord, removed_on: dt.date, ocv_v: float | None) -> None:
    fitted = (
        BatteryInstall.objects.select_for_update()
        .filter(unit_id=record.unit_id, removed_on__isnull=True)
        .first()
    )
    if fitted is None:
        raise ValidationError({"remove_pack_on": "No pack is fitted to this unit."})
    fitted.removed_on = removed_on
    fitted.ocv_removal_v = ocv_v
    try:
        fitted.full_clean()
    except ValidationError as exc:
        raise ValidationError(
            {"remove_pack_on": [m for msgs in exc.message_dict.values() for m in msgs]}
        ) from exc
    fitted.save(update_fields=["removed_on", "ocv_removal_v"])


@transaction.atomic
def service_record_save(
    *,
    record: ServiceRecord,
    entries: Sequence[Entry] = (),
    delete: Iterable[Entry] = (),
    by: User,
    expected_version: int | None = None,
    pack_removal: tuple[dt.date, float | None] | None = None,
) -> ServiceRecord:
    """Create or update an open record with its entries, all or nothing.

    ``expected_version`` is the version the editor loaded; a stale edit is refused rather than
    silently overwriting a colleague's work. ``pack_removal`` (date, open-circuit volts) takes
    out the pack fitted at an earlier visit.
    """
    if record.pk is not None:
        current = _lock(record)
        if current.is_closed:
            raise ValidationError("This record is closed; corrections are made as amendments.")
        if expected_version is not None and current.version != expected_version:
            raise ValidationError(
                "Someone else changed this record while you were editing it. "
                "Reload the page to see their changes, then enter yours again."
            )
        record.version = current.version + 1
        record.updated_by = by
    else:
        unit = Transponder.objects.select_for_update().get(pk=record.unit_id)
        check_can_open_record(unit)
        record.created_by = by
        record.version = 1
    record.full_clean()
    record.save()

    if pack_removal is not None:
        _remove_fitted_pack(record, *pack_removal)
    for entry in delete:
        if entry.pk is not None and entry.record_id == record.pk:
            entry.delete()
    for entry in entries:
        if entry.pk is not None and entry.record_id != record.pk:
            raise ValidationError("An entry can only be edited within its own record.")
        entry.record = record
        if isinstance(entry, BatteryInstall):
            entry.unit = record.unit
            _fit_battery(entry)
        entry.full_clean()
        entry.save()
    refresh_unit(record.unit, at=timezone.now())
    return record


@transaction.atomic
def service_record_close(*, record: ServiceRecord, by: User, at: dt.datetime) -> None:
    current = _lock(record)
    if current.is_closed:
        raise ValidationError("This record is already closed.")
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
    record.closed_at = at
    record.closed_by = by
    record.version = current.version + 1
    record.save(update_fields=["closed_at", "closed_by", "version", "updated_at"])


def can_discard(record: ServiceRecord, user: User) -> bool:
    """Who may discard an open visit: its technician or a supervisor."""
    return record.technician_id == user.pk or roles.can_supervise(user)


@transaction.atomic
def service_record_discard(*, record: ServiceRecord, by: User) -> None:
    """Delete an open bench visit that has no entries (opened by mistake or never started)."""
    Transponder.objects.select_for_update().filter(pk=record.unit_id).get()
    current = _lock(record)
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


@transaction.atomic
def amendment_create(
    *,
    record: ServiceRecord,
    target: Model,
    field_name: str,
    corrected_value: str,
    reason: str,
    by: User,
) -> Amendment:
    """Correct one field of a closed record, keeping the original value in the amendment."""
    current = _lock(record)
    if not current.is_closed:
        raise ValidationError("Open records are edited directly; amendments are for closed ones.")
    if not reason.strip():
        raise ValidationError({"reason": "Say why the value is being corrected."})
    if field_name not in amendable_fields(target):
        raise ValidationError({"field_name": f"{field_name} cannot be amended."})
    owner = target.pk if isinstance(target, ServiceRecord) else getattr(target, "record_id", None)
    if owner != record.pk:
        raise ValidationError({"target": "That entry belongs to another record."})

    field = amendable_field(target, field_name)
    original = field.value_to_string(target)
    value = parse_amendment_value(target, field_name, corrected_value)
    setattr(target, field_name, value)
    try:
        target.full_clean()
    except ValidationError as exc:
        messages = exc.message_dict.get(field_name) or exc.messages
        raise ValidationError({"corrected_value": messages}) from exc
    corrected = field.value_to_string(target)
    if corrected == original:
        raise ValidationError({"corrected_value": "That is the value already recorded."})
    target.save()
    current.version += 1
    current.save(update_fields=["version", "updated_at"])
    refresh_unit(current.unit, at=timezone.now())
    return Amendment.objects.create(
        record=record,
        target_type=ContentType.objects.get_for_model(target),
        target_id=target.pk,
        field_name=field_name,
        original_value=original,
        corrected_value=corrected,
        reason=reason.strip(),
        created_by=by,
    )
