"""Fleet management writes a supervisor makes from the workshop pages: a variant with its
positions and power steps, units brought into service, a unit moved, a hold set or cleared.

Each is one transaction that locks the row it changes (the variant, or the unit) before
reading it again, validates every row before the first write, saves only changed fields and
refreshes the stored due rows of every unit whose inputs changed (``fleet.due.store``).
"""

from __future__ import annotations

import datetime as dt
from collections.abc import Sequence
from dataclasses import dataclass, field

from django.contrib.auth.models import User
from django.core.exceptions import ValidationError
from django.db import transaction
from django.db.models import Model
from django.utils import timezone

from fleet.due.store import refresh_unit
from fleet.models import (
    AnodePosition,
    Deployment,
    HoldChange,
    Place,
    ReplyChargeStep,
    SealPosition,
    ServiceRecord,
    Transponder,
    UnitHold,
    Variant,
)

from .reference import variant_changed

MAX_UNITS_AT_ONCE = 200


def _save_changed(instance: Model) -> None:
    """Insert a new row, or write only the fields that differ from the stored row."""
    if instance.pk is None:
        instance.save()
        return
    stored = type(instance)._default_manager.get(pk=instance.pk)
    changed = [
        f.attname
        for f in instance._meta.concrete_fields
        if not f.primary_key and getattr(instance, f.attname) != getattr(stored, f.attname)
    ]
    if changed:
        instance.save(update_fields=changed)


@dataclass
class VariantParts:
    """The rows of a variant as its form leaves them: to save (new or changed) and to delete."""

    anode_positions: list[AnodePosition] = field(default_factory=list)
    seal_positions: list[SealPosition] = field(default_factory=list)
    reply_steps: list[ReplyChargeStep] = field(default_factory=list)
    deleted: list[AnodePosition | SealPosition | ReplyChargeStep] = field(default_factory=list)


def deletion_refusal(part: AnodePosition | SealPosition | ReplyChargeStep) -> str:
    """Why this row cannot be deleted ("" when it can): history and units point at it."""
    if isinstance(part, AnodePosition) and part.readings.exists():
        return (
            f"Anode position {part.name} has readings in the units' history, so it cannot be "
            "deleted; rename it or leave it."
        )
    if isinstance(part, SealPosition) and part.changes.exists():
        return (
            f"Seal position {part.name} has seal changes in the units' history, so it cannot "
            "be deleted; rename it or leave it."
        )
    if isinstance(part, ReplyChargeStep) and _steps_in_use(part.variant, [part.step]):
        return (
            f"Power step {part.step} is set on a unit or was used by a deployment of this "
            "variant, so it cannot be deleted."
        )
    return ""


def _steps_in_use(variant: Variant, steps: Sequence[int]) -> list[int]:
    units = Transponder.objects.filter(variant=variant)
    used = set(units.filter(transmit_power_step__in=steps).values_list("transmit_power_step"))
    used |= set(
        Deployment.objects.filter(unit__variant=variant, transmit_power_step__in=steps).values_list(
            "transmit_power_step"
        )
    )
    return sorted(step for (step,) in used)


def _check_steps_still_listed(variant: Variant) -> None:
    """Every step a unit is set to or a deployment used stays listed (when any is listed):
    the battery tally reads the charge per reply at that step."""
    listed = set(variant.reply_steps.values_list("step", flat=True))
    if not listed:
        return
    in_use = _steps_in_use(variant, list(range(1, 10)))
    missing = [step for step in in_use if step not in listed]
    if missing:
        raise ValidationError(
            f"Power step{'s' if len(missing) > 1 else ''} {', '.join(map(str, missing))} "
            f"{'are' if len(missing) > 1 else 'is'} in use by units or deployments of "
            f"{variant.name}; keep {'them' if len(missing) > 1 else 'it'} listed."
        )


def _forget_on_failure(instances: Sequence[Model]) -> None:
    """After a rolled-back transaction, rows it inserted do not exist: let the caller's copies
    be new again, so a form shown again does not point at them."""
    for instance in instances:
        instance.pk = None
        instance._state.adding = True


def variant_save(*, variant: Variant, parts: VariantParts) -> Variant:
    """Create or change a variant with its positions and power steps, then refresh its units.

    A change locks the variant row first. Rows in use by history are refused before anything
    is written; every row is validated (``full_clean``) and saved with its changed fields only.
    The stored due rows of every unit of the variant are then rebuilt (``variant_changed``).
    All of it is one transaction: on any refusal nothing is saved.
    """
    rows = [variant, *parts.anode_positions, *parts.seal_positions, *parts.reply_steps]
    new = [row for row in rows if row.pk is None]
    try:
        return _variant_save(variant=variant, parts=parts)
    except BaseException:
        _forget_on_failure(new)
        raise


@transaction.atomic
def _variant_save(*, variant: Variant, parts: VariantParts) -> Variant:
    if variant.pk is not None:
        Variant.objects.select_for_update().get(pk=variant.pk)
    refusals = [r for r in map(deletion_refusal, parts.deleted) if r]
    if refusals:
        raise ValidationError(refusals)
    variant.full_clean()
    _save_changed(variant)
    for part in parts.deleted:
        part.delete()
    rows: list[AnodePosition | SealPosition | ReplyChargeStep] = [
        *parts.anode_positions,
        *parts.seal_positions,
        *parts.reply_steps,
    ]
    for row in rows:
        row.variant = variant
        row.full_clean()
        _save_changed(row)
    _check_steps_still_listed(variant)
    variant_changed(variant=variant)
    return variant


def units_bring_into_service(*, units: Sequence[Transponder]) -> list[Transponder]:
    """Register several new units at once: every unit is checked first and each bad serial is
    named; then all are saved, or none is."""
    try:
        return _units_bring_into_service(units=units)
    except BaseException:
        _forget_on_failure([unit for unit in units if unit.pk is not None])
        raise


@transaction.atomic
def _units_bring_into_service(*, units: Sequence[Transponder]) -> list[Transponder]:
    if not units:
        raise ValidationError("Give at least one serial.")
    if len(units) > MAX_UNITS_AT_ONCE:
        raise ValidationError(f"Bring at most {MAX_UNITS_AT_ONCE} units into service at once.")
    problems: list[str] = []
    seen: set[str] = set()
    for unit in units:
        if unit.pk is not None:
            raise ValueError("units_bring_into_service takes new units only")
        if unit.serial in seen:
            problems.append(f"{unit.serial}: listed twice.")
            continue
        seen.add(unit.serial)
        try:
            unit.full_clean()
        except ValidationError as exc:
            messages = "; ".join(m for msgs in exc.message_dict.values() for m in msgs)
            problems.append(f"{unit.serial or '(empty serial)'}: {messages}")
    if problems:
        raise ValidationError(problems)
    at = timezone.now()
    for unit in units:
        unit.save()
        refresh_unit(unit, at=at)
    return list(units)


def _lock(unit: Transponder) -> Transponder:
    return Transponder.objects.select_for_update().get(pk=unit.pk)


def _in_water(unit: Transponder) -> bool:
    return Deployment.objects.filter(unit=unit, recovered_at__isnull=True).exists()


def _on_bench(unit: Transponder) -> bool:
    return ServiceRecord.objects.filter(unit=unit, closed_at__isnull=True).exists()


@transaction.atomic
def unit_move(*, unit: Transponder, place: Place, expected_version: int | None = None) -> None:
    """Move a unit ashore to another place. A unit in the water is moved by its recovery."""
    stored = _lock(unit)
    if expected_version is not None and stored.version != expected_version:
        raise ValidationError(f"{stored.serial} was changed after you loaded it; reload it.")
    if _in_water(stored):
        raise ValidationError(
            f"{stored.serial} is in the water; recovering it says where it comes ashore."
        )
    if stored.place_id == place.pk:
        raise ValidationError(f"{stored.serial} is already at {place}.")
    stored.place = place
    stored.version += 1
    stored.save(update_fields=["place", "version", "updated_at"])
    refresh_unit(stored, at=timezone.now())
    unit.place, unit.version = place, stored.version


def hold_refusal(unit: Transponder, hold: UnitHold) -> str:
    """Why ``unit`` cannot take ``hold`` now ("" when it can). Read inside the unit's lock."""
    current = UnitHold(unit.hold)
    if hold == current:
        state = "without a hold" if hold == UnitHold.NONE else hold.label.lower()
        return f"{unit.serial} is already {state}."
    if hold == UnitHold.RETIRED and _in_water(unit):
        return (
            f"{unit.serial} is in the water: recover it before retiring it, or mark it lost "
            "if it cannot be recovered."
        )
    if hold in (UnitHold.RETIRED, UnitHold.LOST) and _on_bench(unit):
        return (
            f"{unit.serial} has an open bench visit, so it is in hand: close or discard the "
            f"visit before marking it {hold.label.lower()}."
        )
    return ""


@transaction.atomic
def unit_hold_set(
    *, unit: Transponder, hold: UnitHold, reason: str, by: User, at: dt.datetime
) -> HoldChange:
    """Set, change or clear (``UnitHold.NONE``: found, released) a unit's hold with a reason.

    The unit row is locked and read again; an impossible move is refused with the reason
    (``hold_refusal``). Who and when are kept on the unit and in its hold history.
    """
    stored = _lock(unit)
    reason = reason.strip()
    if not reason:
        raise ValidationError({"reason": "Say why."})
    refusal = hold_refusal(stored, hold)
    if refusal:
        raise ValidationError({"hold": refusal})
    change = HoldChange(
        unit=stored, from_hold=stored.hold, to_hold=hold, reason=reason, set_by=by, set_at=at
    )
    change.full_clean()
    stored.hold = hold
    stored.hold_reason = "" if hold == UnitHold.NONE else reason
    stored.hold_set_by_id = by.pk
    stored.hold_set_at = at
    stored.version += 1
    stored.full_clean()
    stored.save(
        update_fields=["hold", "hold_reason", "hold_set_by", "hold_set_at", "version", "updated_at"]
    )
    change.save()
    # The hold leads the unit's condition, and retired or lost units drop out of due lists.
    refresh_unit(stored, at=at)
    unit.hold, unit.hold_reason, unit.version = stored.hold, stored.hold_reason, stored.version
    return change
