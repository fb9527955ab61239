"""Writes to the reference data every due item depends on: units, variants, sites.

A site's depth, temperature and position, a variant's intervals, limits and positions, and a
unit's own settings all feed the due engine, so each write here refreshes the stored due
items of every unit whose items it can change, in the same transaction.
"""

from __future__ import annotations

from django.core.exceptions import ValidationError
from django.db import transaction
from django.db.models import Model, Q
from django.utils import timezone

from fleet.due.store import refresh_unit, refresh_units
from fleet.models import Site, Transponder, Variant


def _changed_fields(instance: Model, stored: Model) -> list[str]:
    return [
        f.attname
        for f in instance._meta.concrete_fields
        if not f.primary_key and getattr(instance, f.attname) != getattr(stored, f.attname)
    ]


@transaction.atomic
def unit_save(*, unit: Transponder, expected_version: int | None = None) -> Transponder:
    """Create or change a unit, then derive its state and due items.

    A change locks the unit row, reads it again and writes only the fields that differ;
    ``expected_version`` (the version the editor loaded) refuses a stale edit. The variant
    cannot change once the unit has a bench visit or a deployment.
    """
    if unit.pk is None:
        unit.full_clean()
        unit.save()
        refresh_unit(unit, at=timezone.now())
        return unit
    stored = Transponder.objects.select_for_update().get(pk=unit.pk)
    if expected_version is not None and stored.version != expected_version:
        raise ValidationError(
            f"{stored.serial} was changed at "
            f"{timezone.localtime(stored.updated_at):%Y-%m-%d %H:%M} after you loaded it; "
            "reload it and make your change again."
        )
    refusal = unit.variant_change_refusal()
    if refusal:
        raise ValidationError({"variant": refusal})
    unit.full_clean()
    changed = [name for name in _changed_fields(unit, stored) if name not in ("version",)]
    unit.version = stored.version + 1
    unit.save(update_fields=[*changed, "version", "updated_at"])
    refresh_unit(unit, at=timezone.now())
    return unit


@transaction.atomic
def site_save(*, site: Site) -> Site:
    """Create or change a site; units that work there (now or last) are refreshed. A change
    locks the site row and writes only the fields that differ."""
    site.full_clean()
    if site.pk is None:
        site.save()
    else:
        stored = Site.objects.select_for_update().get(pk=site.pk)
        changed = _changed_fields(site, stored)
        if changed:
            site.save(update_fields=changed)
    affected = Transponder.objects.filter(
        Q(state__duty_site=site) | Q(deployments__site=site, deployments__recovered_at=None)
    ).distinct()
    refresh_units(affected, at=timezone.now())
    return site


@transaction.atomic
def variant_changed(*, variant: Variant) -> int:
    """After a variant or its positions, power steps or limits changed: refresh its units."""
    return refresh_units(Transponder.objects.filter(variant=variant), at=timezone.now())
