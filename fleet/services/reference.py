"""Writes to the reference data every due item depends on: units, variants, sites.

A site's depth, temperature and position, a variant's intervals, limits and positions, and a
unit's own settings all feed the due engine, so each write here refreshes the stored due
items of every unit whose items it can change, in the same transaction.
"""

from __future__ import annotations

from django.db import transaction
from django.db.models import Q
from django.utils import timezone

from fleet.due.store import refresh_unit, refresh_units
from fleet.models import Site, Transponder, Variant


@transaction.atomic
def unit_save(*, unit: Transponder) -> Transponder:
    """Create or change a unit, then derive its state and due items."""
    unit.full_clean()
    if unit.pk is not None:
        unit.version += 1
    unit.save()
    refresh_unit(unit, at=timezone.now())
    return unit


@transaction.atomic
def site_save(*, site: Site) -> Site:
    """Create or change a site; units that work there (now or last) are refreshed."""
    site.full_clean()
    site.save()
    affected = Transponder.objects.filter(
        Q(state__duty_site=site) | Q(deployments__site=site, deployments__recovered_at=None)
    ).distinct()
    refresh_units(affected, at=timezone.now())
    return site


@transaction.atomic
def variant_changed(*, variant: Variant) -> int:
    """After a variant or its positions, power steps or limits changed: refresh its units."""
    return refresh_units(Transponder.objects.filter(variant=variant), at=timezone.now())
