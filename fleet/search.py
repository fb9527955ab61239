"""The one search box: what a few typed characters may name, grouped by what matched.

Each group is one query whatever the fleet's size, capped at ``limit`` rows; one more row is
read to know whether there are more. Matching is case-insensitive on SQLite and PostgreSQL
(Django's ``icontains``, which escapes ``%`` and ``_``).
"""

from __future__ import annotations

from dataclasses import dataclass
from typing import Any

from django.contrib.auth import get_user_model
from django.db.models import CharField, Q, QuerySet, Value
from django.db.models.functions import Concat

from fleet.models import BatteryInstall, SealChange, ServiceRecord, Site, Transponder

SEARCH_MAX_CHARS = 60
SEARCH_LIMIT = 20


class SearchQueryError(ValueError):
    """The text cannot be searched for; the message says why, for the page."""


@dataclass(frozen=True, slots=True)
class SearchGroup:
    """The rows one kind of match found (at most the limit), and whether there were more."""

    kind: str  # "unit", "pack", "seal", "site" or "person": how the page shows a row
    title: str
    rows: tuple[Any, ...]
    more: bool


@dataclass(frozen=True, slots=True)
class SearchResults:
    query: str
    limit: int
    groups: tuple[SearchGroup, ...]

    @property
    def found(self) -> int:
        return sum(len(g.rows) for g in self.groups)


def clean_query(raw: str) -> str:
    """The text to search for, trimmed; a ``SearchQueryError`` when empty or too long."""
    text = " ".join(raw.split())
    if not text:
        raise SearchQueryError("Type a serial, address, pack serial, seal lot, site or name.")
    if any(ord(ch) < 32 or ord(ch) == 127 for ch in text):
        raise SearchQueryError("Search for letters, digits, spaces and punctuation only.")
    if len(text) > SEARCH_MAX_CHARS:
        raise SearchQueryError(
            f"Search for at most {SEARCH_MAX_CHARS} characters; that was {len(text)}."
        )
    return text


def _group(kind: str, title: str, queryset: QuerySet[Any], limit: int) -> SearchGroup:
    rows = list(queryset[: limit + 1])
    return SearchGroup(kind=kind, title=title, rows=tuple(rows[:limit]), more=len(rows) > limit)


def _technicians(text: str) -> QuerySet[Any]:
    """People who have worked a bench visit (those the bench-visit list filters by)."""
    full_name = Concat("first_name", Value(" "), "last_name", output_field=CharField())
    return (
        get_user_model()
        .objects.filter(pk__in=ServiceRecord.objects.values("technician_id"))
        .annotate(full_name=full_name)
        .filter(
            Q(username__icontains=text)
            | Q(first_name__icontains=text)
            | Q(last_name__icontains=text)
            | Q(full_name__icontains=text)
        )
        .order_by("username")
    )


def search_everything(raw: str, *, limit: int = SEARCH_LIMIT) -> SearchResults:
    """Units by serial and by acoustic address, battery installs by pack serial, seal changes
    by lot, sites by name, and technicians (who have worked a bench visit) by user name or
    full name.

    Six queries, each capped: the count does not grow with the fleet. Raises
    ``SearchQueryError`` for text it will not search for.
    """
    text = clean_query(raw)
    units = Transponder.objects.select_related("variant").order_by("serial")
    groups = (
        _group("unit", "Units by serial", units.filter(serial__icontains=text), limit),
        _group(
            "unit",
            "Units by acoustic address",
            units.filter(acoustic_address__icontains=text),
            limit,
        ),
        _group(
            "pack",
            "Battery packs by serial",
            BatteryInstall.objects.filter(pack_serial__icontains=text)
            .select_related("unit", "record", "removal")
            .order_by("-installed_on", "-pk"),
            limit,
        ),
        _group(
            "seal",
            "Seals by lot",
            SealChange.objects.filter(lot__icontains=text)
            .select_related("record__unit", "position")
            .order_by("-record__opened_at", "-pk"),
            limit,
        ),
        _group("site", "Sites", Site.objects.filter(name__icontains=text).order_by("name"), limit),
        _group("person", "Technicians", _technicians(text), limit),
    )
    return SearchResults(query=text, limit=limit, groups=groups)
