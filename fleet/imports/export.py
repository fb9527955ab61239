"""The fleet's records written in the import's own columns, so that a file written here imports
back to the same records (``docs/import.md``). Closed bench visits and recovered deployments
only: history, which is what an import carries."""

from __future__ import annotations

import csv
import datetime as dt
import io
from collections.abc import Iterator, Sequence
from typing import Any

from django.contrib.auth.models import User
from django.db import models

from fleet.models import (
    AnodePosition,
    BatteryInstall,
    Deployment,
    Place,
    SealPosition,
    ServiceRecord,
    Site,
    Transponder,
    Variant,
)
from fleet.models.records import Entry, entry_kinds

from . import columns as cols

Row = list[str]


def cell(value: object) -> str:
    """A value as the import reads it back."""
    if value is None:
        return ""
    if isinstance(value, bool):
        return "yes" if value else "no"
    if isinstance(value, dt.datetime):
        return cols.moment_text(value)
    if isinstance(value, dt.date | dt.time):
        return value.isoformat()
    if isinstance(value, float):
        return repr(value)
    return _key(value) if isinstance(value, models.Model) else str(value)


def _key(record: models.Model) -> str:
    if isinstance(record, Transponder):
        return record.serial
    if isinstance(record, User):
        return record.get_username()
    if isinstance(record, BatteryInstall):
        return record.pack_serial
    if isinstance(record, Variant | Place | Site | AnodePosition | SealPosition):
        return record.name
    return str(record)


def _row(instance: models.Model, columns: Sequence[cols.Column]) -> Row:
    return [cell(getattr(instance, c.field)) for c in columns]


def unit_rows() -> Iterator[Row]:
    columns = cols.unit_columns()
    yield [c.name for c in columns]
    for unit in Transponder.objects.select_related("variant", "place").order_by("serial"):
        yield _row(unit, columns)


def site_rows() -> Iterator[Row]:
    columns = cols.site_columns()
    yield [c.name for c in columns]
    for site in Site.objects.order_by("name"):
        yield _row(site, columns)


def deployment_rows() -> Iterator[Row]:
    columns = cols.deployment_columns()
    yield [c.name for c in columns]
    recovered = Deployment.objects.filter(recovered_at__isnull=False)
    for deployment in recovered.select_related("unit", "site").order_by(
        "unit__serial", "over_side_at"
    ):
        yield _row(deployment, columns)


def _entries(record: ServiceRecord) -> Iterator[Entry]:
    for kind in entry_kinds():
        related = ["record", *kind.list_select_related]
        if any(c.field == "install" for c in cols.entry_columns(kind)):
            related.append("install")
        yield from getattr(record, kind.related_name()).select_related(*related).order_by("pk")


def visit_rows() -> Iterator[Row]:
    """One row per entry of each closed visit, a unit's visits in date order."""
    columns = cols.visit_columns()
    yield [c.name for c in columns]
    head = {name: field for name, field in cols.VISIT_FIELDS}
    records = ServiceRecord.objects.filter(closed_at__isnull=False).select_related(
        "unit", "technician", "place"
    )
    for record in records.order_by("unit__serial", "opened_at", "pk"):
        visit = {name: cell(getattr(record, field)) for name, field in head.items()}
        for entry in _entries(record):
            own = {c.name: c.field for c in cols.entry_columns(type(entry))}
            values: dict[str, Any] = {cols.ENTRY_COLUMN: cols.entry_name(type(entry))}
            values.update({name: cell(getattr(entry, f)) for name, f in own.items()})
            yield [visit[c.name] if c.name in visit else values.get(c.name, "") for c in columns]


EXPORTS = {
    "units": unit_rows,
    "sites": site_rows,
    "deployments": deployment_rows,
    "visits": visit_rows,
}


def export_csv(kind: str, *, delimiter: str = ",") -> str:
    """The kind's records as CSV text in the import's columns."""
    buffer = io.StringIO()
    writer = csv.writer(buffer, delimiter=delimiter, lineterminator="\n")
    writer.writerows(EXPORTS[kind]())
    return buffer.getvalue()


def template_csv(kind: str) -> str:
    """The header line of the kind's import file: a template to fill in."""
    return export_csv_header(kind)


def export_csv_header(kind: str) -> str:
    buffer = io.StringIO()
    csv.writer(buffer, lineterminator="\n").writerow(next(EXPORTS[kind]()))
    return buffer.getvalue()
