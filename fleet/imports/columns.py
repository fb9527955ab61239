"""The columns of each import kind, read off the models' own fields.

A column is named after the model field it fills (``mass_g``, ``over_side_at``): the names
carry their units, as the fields do. A key to another record is named after the field and
holds that record's own name: ``unit`` a serial, ``variant``, ``place`` and ``site`` a name,
``position`` an anode or seal position's name, ``technician`` a user name. A pack removal's
``install`` is the ``pack_serial`` of the pack taken out. ``docs/import.md`` lists them all.
"""

from __future__ import annotations

import datetime as dt
from collections.abc import Callable
from dataclasses import dataclass
from typing import Any, cast
from zoneinfo import ZoneInfo

from django.db import models

from fleet.models import Deployment, ServiceRecord, Site, Transponder
from fleet.models.records import Entry, PackRemoval, entry_kinds

from . import parsing

# Entry fields an import never fills: the record link and the unit (set by the service from
# the visit) and photos (files, not cells).
_ENTRY_SKIPPED = frozenset({"record", "unit", "photo"})
# A key column named otherwise than its field.
_COLUMN_NAMES: dict[tuple[type[models.Model], str], str] = {(PackRemoval, "install"): "pack_serial"}


@dataclass(frozen=True, slots=True)
class Column:
    """One column: its name in the file, the model field it fills, whether a value is
    required, and what it holds (for the template and the documentation)."""

    name: str
    field: str
    required: bool
    holds: str


def _holds(field: models.Field[Any, Any]) -> str:
    if field.choices:
        return "one of " + ", ".join(str(value) for value, _ in field.flatchoices)
    if isinstance(field, models.ForeignKey):
        return "name of the " + str(field.related_model._meta.verbose_name)
    kinds: list[tuple[type[models.Field[Any, Any]], str]] = [
        (models.BooleanField, "yes or no"),
        (models.DateTimeField, "date, or date and time with offset"),
        (models.DateField, "date YYYY-MM-DD"),
        (models.TimeField, "local time HH:MM"),
        (models.FloatField, "number"),
        (models.IntegerField, "whole number"),
    ]
    for cls, text in kinds:
        if isinstance(field, cls):
            return text
    return "text"


def _required(field: models.Field[Any, Any]) -> bool:
    if isinstance(field, models.BooleanField):
        return False
    return not (field.blank or field.null or field.has_default())


def field_column(model: type[models.Model], name: str, column: str = "") -> Column:
    field = cast("models.Field[Any, Any]", model._meta.get_field(name))
    column = column or _COLUMN_NAMES.get((model, name), name)
    return Column(column, name, _required(field), _holds(field))


def convert(field: models.Field[Any, Any], text: str, zone: ZoneInfo) -> object:
    """The cell as the field's value (a key stays text: the caller looks it up). Blank is
    None, or the empty string for text, or False for a yes/no. Raises ``parsing.CellError``."""
    return cell_reader(field, zone)(text)


def cell_reader(field: models.Field[Any, Any], zone: ZoneInfo) -> Callable[[str], object]:
    """``convert`` for one field, its rules looked up once: a file's rows call it per cell."""
    blank = _blank_reader(field)
    read: Callable[[str], object]
    if field.choices:
        allowed = [(str(v), str(label)) for v, label in field.flatchoices]

        def read_choice(text: str) -> object:
            return parsing.choice(text, allowed)

        read = read_choice
    else:
        read = _text_reader(field, zone)

    def reader(text: str) -> object:
        return read(text) if text else blank()

    return reader


def _blank_reader(field: models.Field[Any, Any]) -> Callable[[], object]:
    """What a blank cell gives the field (or the error it raises)."""
    if isinstance(field, models.BooleanField):
        return lambda: False
    if field.null or isinstance(field, models.ForeignKey):
        return lambda: None
    if field.has_default():
        return field.get_default
    if field.choices or not isinstance(field, models.CharField | models.TextField):

        def needed() -> object:
            raise parsing.CellError("This column needs a value.")

        return needed
    return lambda: ""


def _text_reader(field: models.Field[Any, Any], zone: ZoneInfo) -> Callable[[str], object]:
    """How a filled cell is read for a field without choices."""
    converters: list[tuple[type[models.Field[Any, Any]], Callable[[str], object]]] = [
        (models.ForeignKey, str),
        (models.BooleanField, parsing.parse_bool),
        (models.DateTimeField, lambda t: parsing.parse_moment(t, zone)),
        (models.DateField, parsing.parse_date),
        (models.TimeField, parsing.parse_time),
        (models.FloatField, parsing.parse_number),
        (models.IntegerField, parsing.parse_integer),
    ]
    for cls, read in converters:
        if isinstance(field, cls):
            return read
    return lambda text: text


UNIT_FIELDS = (
    "serial",
    "variant",
    "place",
    "acoustic_address",
    "turnaround_delay_ms",
    "transmit_power_step",
    "notes",
)
SITE_FIELDS = (
    "name",
    "latitude_deg",
    "longitude_deg",
    "water_depth_m",
    "bottom_temperature_c",
    "practical_salinity",
    "surface_temperature_c",
    "notes",
)
DEPLOYMENT_FIELDS = (
    "unit",
    "site",
    "over_side_at",
    "recovered_at",
    "planned_days",
    "planned_interrogations_per_day",
    "transmit_power_step",
    "replies_counted",
    "notes",
)
# The visit's own columns, named apart from the entries' (a housing opening has its own
# ``opened_at``): (column, ServiceRecord field).
VISIT_FIELDS = (
    ("unit", "unit"),
    ("visit_opened_at", "opened_at"),
    ("visit_closed_at", "closed_at"),
    ("technician", "technician"),
    ("place", "place"),
    ("visit_summary", "summary"),
)
ENTRY_COLUMN = "entry"


def unit_columns() -> list[Column]:
    return [field_column(Transponder, name) for name in UNIT_FIELDS]


def site_columns() -> list[Column]:
    return [field_column(Site, name) for name in SITE_FIELDS]


def deployment_columns() -> list[Column]:
    columns = [field_column(Deployment, name) for name in DEPLOYMENT_FIELDS]
    # History: a past deployment is back in, so it has both dates.
    return [
        Column(c.name, c.field, True, c.holds) if c.name == "recovered_at" else c for c in columns
    ]


def entry_columns(kind: type[Entry]) -> list[Column]:
    """The columns an entry of ``kind`` fills, in the model's field order."""
    return [
        field_column(kind, field.name)
        for field in kind._meta.concrete_fields
        if field.editable
        and not field.primary_key
        and field.name not in _ENTRY_SKIPPED
        and not isinstance(field, models.FileField)
    ]


def entry_name(kind: type[Entry]) -> str:
    """How the ``entry`` column names the kind: its label with underscores (``anode_reading``)."""
    return kind.kind_label.replace(" ", "_")


def entry_kind_named(text: str) -> type[Entry]:
    wanted = text.strip().lower().replace(" ", "_")
    for kind in entry_kinds():
        if wanted in (entry_name(kind), kind.bench_prefix):
            return kind
    allowed = ", ".join(entry_name(kind) for kind in entry_kinds())
    raise parsing.CellError(f"{text!r} is not an entry kind; use one of {allowed}.")


def visit_columns() -> list[Column]:
    """The visit's columns, ``entry``, then every entry kind's columns, each name once (a
    name two kinds share, such as ``tested_on``, means the same in both)."""
    columns = [
        Column(name, field, name in ("unit", "visit_opened_at", "place"), holds)
        for name, field in VISIT_FIELDS
        for holds in [field_column(ServiceRecord, field).holds]
    ]
    columns.append(Column(ENTRY_COLUMN, ENTRY_COLUMN, True, "the entry kind"))
    seen = {c.name for c in columns}
    for kind in entry_kinds():
        for column in entry_columns(kind):
            if column.name not in seen:
                seen.add(column.name)
                columns.append(Column(column.name, column.field, False, column.holds))
    return columns


def local_zone() -> ZoneInfo:
    from django.conf import settings

    return ZoneInfo(settings.TIME_ZONE)


def moment_text(value: dt.datetime) -> str:
    """A moment as the import reads it: ISO 8601, local time with its offset."""
    from django.utils import timezone

    return timezone.localtime(value).isoformat()
