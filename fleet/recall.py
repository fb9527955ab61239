"""Recall: which units carry a part from a suspect seal lot or a suspect battery pack.

A battery pack is fitted until a removal entry points at its install (``PackRemoval``; the
fitted pack is the install no removal points at, as ``fitted_packs()`` reads it). A seal is
fitted until a later seal change at the same position of the same unit: later by the visit's
opening time, then by entry order within one visit. Both ends are read in SQL, one query per
recall whatever the fleet's size.

Without a date, the recall lists the parts fitted now. With a date, it lists every part fitted
at any time on or after that day: still fitted, or taken out on or after it.

Battery installs record a pack's serial and no separate lot, so a pack recall matches the pack
serial exactly (ignoring case), or, as cell makers recall by date of manufacture, every pack
made within a period (of one chemistry, if given); seal changes record the packet's lot.
"""

from __future__ import annotations

import datetime as dt
from dataclasses import dataclass

from django.db import models
from django.db.models import OuterRef, Q, Subquery
from django.utils import timezone

from fleet.models import BatteryInstall, Chemistry, SealChange

RECALL_VALUE_MAX_CHARS = 40  # SealChange.lot and BatteryInstall.pack_serial


class RecallPart(models.TextChoices):
    SEAL_LOT = "seal_lot", "Seal lot (O-ring packet)"
    PACK_SERIAL = "pack_serial", "Battery pack serial"
    PACKS_MADE = "packs_made", "Battery packs made in a period"


@dataclass(frozen=True, slots=True)
class RecallRow:
    serial: str
    position: str
    part: str  # the lot or pack serial as it was recorded
    fitted_on: dt.date
    fitted_record_id: int
    still_fitted: bool
    ended_on: dt.date | None  # the day a later seal change or a removal took it out
    ended_record_id: int | None


@dataclass(frozen=True, slots=True)
class Recall:
    part: RecallPart
    value: str
    since: dt.date | None
    rows: tuple[RecallRow, ...]

    @property
    def fitted_now(self) -> int:
        return sum(1 for row in self.rows if row.still_fitted)

    @property
    def units(self) -> int:
        return len({row.serial for row in self.rows})


def _seal_rows(lot: str) -> list[RecallRow]:
    later = (
        SealChange.objects.filter(
            record__unit_id=OuterRef("record__unit_id"), position_id=OuterRef("position_id")
        )
        .filter(
            Q(record__opened_at__gt=OuterRef("record__opened_at"))
            | Q(record__opened_at=OuterRef("record__opened_at"), pk__gt=OuterRef("pk"))
        )
        .order_by("record__opened_at", "pk")
    )
    changes = (
        SealChange.objects.filter(lot__iexact=lot)
        .annotate(
            ended_at=Subquery(later.values("record__opened_at")[:1]),
            ended_record_id=Subquery(later.values("record_id")[:1]),
        )
        .values_list(
            "record__unit__serial",
            "position__name",
            "lot",
            "record__opened_at",
            "record_id",
            "ended_at",
            "ended_record_id",
        )
    )
    return [
        RecallRow(
            serial=serial,
            position=position,
            part=part,
            fitted_on=timezone.localdate(opened_at),
            fitted_record_id=record_id,
            still_fitted=ended_at is None,
            ended_on=timezone.localdate(ended_at) if ended_at is not None else None,
            ended_record_id=ended_record_id,
        )
        for serial, position, part, opened_at, record_id, ended_at, ended_record_id in changes
    ]


def _pack_rows(which: Q) -> list[RecallRow]:
    installs = BatteryInstall.objects.filter(which).values_list(
        "unit__serial",
        "pack_serial",
        "installed_on",
        "record_id",
        "removal__removed_on",
        "removal__record_id",
    )
    return [
        RecallRow(
            serial=serial,
            position="battery bay",
            part=part,
            fitted_on=installed_on,
            fitted_record_id=record_id,
            still_fitted=removed_on is None,
            ended_on=removed_on,
            ended_record_id=removal_record_id,
        )
        for serial, part, installed_on, record_id, removed_on, removal_record_id in installs
    ]


@dataclass(frozen=True, slots=True)
class MadeWithin:
    """Packs made from ``first`` to ``last`` (both days included), of ``chemistry`` if given."""

    first: dt.date
    last: dt.date
    chemistry: str = ""

    def __post_init__(self) -> None:
        if self.last < self.first:
            raise ValueError("last must be on or after first")

    def words(self) -> str:
        kind = Chemistry(self.chemistry).label if self.chemistry else "any chemistry"
        return f"{kind}, made {self.first} to {self.last}"

    def q(self) -> Q:
        made = Q(made_on__gte=self.first, made_on__lte=self.last)
        return made & Q(chemistry=self.chemistry) if self.chemistry else made


def recall(
    *,
    part: RecallPart,
    value: str = "",
    since: dt.date | None = None,
    made: MadeWithin | None = None,
) -> Recall:
    """Every unit with a part from ``value`` (a seal lot, a pack serial; or, for packs made
    in a period, ``made``) fitted now, or, with ``since``, fitted at any time on or after that
    day; by unit serial, then fitting date. One query."""
    if part == RecallPart.PACKS_MADE:
        if made is None:
            raise ValueError("a recall of packs made in a period needs the period")
        value = made.words()
        rows = _pack_rows(made.q())
    else:
        value = value.strip()
        if not value or len(value) > RECALL_VALUE_MAX_CHARS:
            raise ValueError(f"value must be 1 to {RECALL_VALUE_MAX_CHARS} characters")
        if part == RecallPart.SEAL_LOT:
            rows = _seal_rows(value)
        else:
            rows = _pack_rows(Q(pack_serial__iexact=value))
    kept = [
        row
        for row in rows
        if row.still_fitted
        or (since is not None and row.ended_on is not None and row.ended_on >= since)
    ]
    kept.sort(key=lambda row: (row.serial, row.fitted_on, row.position, row.fitted_record_id))
    return Recall(part=part, value=value, since=since, rows=tuple(kept))


RECALL_CSV_HEADER = (
    "unit",
    "position",
    "part",
    "fitted_on",
    "fitted_by_visit",
    "still_fitted",
    "taken_out_on",
    "taken_out_by_visit",
)


def recall_csv_rows(result: Recall) -> list[tuple[object, ...]]:
    """The header, then one row per fitting: dates in ISO 8601, ``true``/``false`` for the
    fitted column, empty cells where there is no value."""
    return [
        RECALL_CSV_HEADER,
        *(
            (
                row.serial,
                row.position,
                row.part,
                row.fitted_on.isoformat(),
                row.fitted_record_id,
                "true" if row.still_fitted else "false",
                row.ended_on.isoformat() if row.ended_on else "",
                row.ended_record_id if row.ended_record_id is not None else "",
            )
            for row in result.rows
        ),
    ]
