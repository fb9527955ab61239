"""CSV export of a django-tables2 table, safe to open in a spreadsheet."""

import csv
import re

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


def csv_response(table: Table, filename: str) -> HttpResponse:
    response = HttpResponse(content_type="text/csv; charset=utf-8")
    response["Content-Disposition"] = f'attachment; filename="{filename}"'
    response.write("\ufeff")  # so spreadsheet programs read the file as UTF-8
    writer = csv.writer(response)
    for row in table.as_values():
        writer.writerow([spreadsheet_safe(cell) for cell in row])
    return response
