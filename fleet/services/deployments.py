"""Writes for deployments: a unit goes over the side, a unit comes back."""

from django.contrib.auth.models import AbstractBaseUser
from django.core.exceptions import ValidationError
from django.db import transaction
from django.utils import timezone

from fleet.due.store import refresh_unit
from fleet.models import Deployment, Place, Transponder, UnitStatus

_DEPLOYABLE = {UnitStatus.READY, UnitStatus.IN_STORE, UnitStatus.IN_WORKSHOP}


@transaction.atomic
def deployment_start(*, deployment: Deployment, by: AbstractBaseUser) -> Deployment:
    unit = Transponder.objects.select_for_update().get(pk=deployment.unit_id)
    if unit.status not in _DEPLOYABLE:
        raise ValidationError(
            {"unit": f"{unit.serial} is {unit.get_status_display().lower()} and cannot deploy."}
        )
    deployment.created_by = by  # type: ignore[assignment]
    deployment.full_clean()
    deployment.save()
    if deployment.recovered_at is None:
        unit.status = UnitStatus.DEPLOYED
        unit.version += 1
        unit.save(update_fields=["status", "version", "updated_at"])
    refresh_unit(unit, at=timezone.now())
    return deployment


@transaction.atomic
def deployment_recover(
    *,
    deployment: Deployment,
    recovered_at: object,
    replies_counted: int | None,
    place: Place | None,
    by: AbstractBaseUser,
) -> Deployment:
    current = Deployment.objects.select_for_update().get(pk=deployment.pk)
    if current.recovered_at is not None:
        raise ValidationError("This deployment is already recovered.")
    current.recovered_at = recovered_at  # type: ignore[assignment]
    current.replies_counted = replies_counted
    current.full_clean()
    current.save(update_fields=["recovered_at", "replies_counted"])
    unit = Transponder.objects.select_for_update().get(pk=current.unit_id)
    # A recovered unit goes to the bench before anything else: it may hold pressure or water.
    unit.status = UnitStatus.IN_WORKSHOP
    if place is not None:
        unit.place = place
    unit.version += 1
    unit.save(update_fields=["status", "place", "version", "updated_at"])
    refresh_unit(unit, at=timezone.now())
    return current
