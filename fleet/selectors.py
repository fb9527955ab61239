"""Read-only queries that forms and pages share, each written once."""

import datetime as dt
from dataclasses import dataclass

from django.utils import timezone

from fleet.models import AnodeReading


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
