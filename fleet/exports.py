"""CSV export of a django-tables2 table, safe to open in a spreadsheet.

One type per column: a timestamp column holds ISO 8601 timestamps in UTC
(``2026-11-17T12:45:00Z``), a date column ISO 8601 dates (``2026-11-17``), and an empty cell is
empty, never a placeholder word or dash the screen shows.
"""

import csv
import datetime as dt
import re
from collections.abc import Iterable, Sequence

from django.http import HttpResponse
from django_tables2 import Table

_NUMBER = re.compile(r"^[+-]?(\d+(\.\d*)?|\.\d+)([eE][+-]?\d+)?$")
_FORMULA_START = ("=", "+", "-", "@", "\t", "\r")


# What the screen shows for an empty cell; the file leaves the cell empty.
_PLACEHOLDERS = frozenset({"—", "-"})


def iso_timestamp(value: dt.datetime) -> str:
    """An aware timestamp in UTC, to the second: ``2026-11-17T12:45:00Z``."""
    return value.astimezone(dt.UTC).replace(microsecond=0).isoformat().replace("+00:00", "Z")


def export_cell(value: object) -> object:
    """A table's value for the file: timestamps and dates in ISO 8601, placeholders empty."""
    if isinstance(value, dt.datetime):
        return iso_timestamp(value)
    if isinstance(value, dt.date):
        return value.isoformat()
    if isinstance(value, str) and value in _PLACEHOLDERS:
        return ""
    return value


def spreadsheet_safe(value: object) -> str:
    """Prefix a quote to text a spreadsheet would run as a formula; plain numbers pass."""
    text = "" if value is None else str(value)
    if text.startswith(_FORMULA_START) and not _NUMBER.match(text):
        return "'" + text
    return text


def csv_rows_response(rows: Iterable[Sequence[object]], filename: str) -> HttpResponse:
    """A CSV download of ``rows`` (the first one the header), every cell spreadsheet-safe."""
    response = HttpResponse(content_type="text/csv; charset=utf-8")
    response["Content-Disposition"] = f'attachment; filename="{filename}"'
    response.write("\ufeff")  # so spreadsheet programs read the file as UTF-8
    writer = csv.writer(response)
    for row in rows:
        writer.writerow([spreadsheet_safe(cell) for cell in row])
    return response


def csv_response(table: Table, filename: str) -> HttpResponse:
    rows = table.as_values()
    header: list[object] = list(next(rows, []))
    return csv_rows_response(
        [header, *([export_cell(cell) for cell in row] for row in rows)], filename
    )
