"""CSV export of a django-tables2 table, safe to open in a spreadsheet."""

import csv
import re
from collections.abc import Iterable, Sequence

from django.http import HttpResponse
from django_tables2 import Table

_NUMBER = re.compile(r"^[+-]?(\d+(\.\d*)?|\.\d+)([eE][+-]?\d+)?$")
_FORMULA_START = ("=", "+", "-", "@", "\t", "\r")


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
    return csv_rows_response(table.as_values(), filename)
