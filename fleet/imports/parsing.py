"""Reading an uploaded spreadsheet (CSV) and its cells, with no Django: pure functions.

A file is UTF-8, with or without a byte-order mark; its delimiter is a comma or a semicolon
(whichever the header line uses); numbers take a decimal point or a decimal comma. Every
cell is read by one of the functions below, which return the value or raise ``CellError``
with a plain message; the caller names the row and the column.

Dates are ISO 8601: ``2024-05-17``. A date and time carries its offset from UTC
(``2024-05-17T09:30+02:00`` or ``...Z``): a time without an offset is refused, because the
same wall-clock time means different moments in different places. A bare date, where a
moment is wanted, is taken at ``DATE_ONLY_TIME`` local time (the caller passes the zone).
"""

from __future__ import annotations

import csv
import datetime as dt
import hashlib
import io
import math
import re
from collections.abc import Iterator, Sequence
from dataclasses import dataclass
from zoneinfo import ZoneInfo

# A visit or a deployment given by its date alone is taken at nine in the morning, local time.
DATE_ONLY_TIME = dt.time(9, 0)

_DECIMAL_COMMA = re.compile(r"^[+-]?\d+,\d+$")
_PLAIN_NUMBER = re.compile(r"^[+-]?(\d+(\.\d*)?|\.\d+)([eE][+-]?\d+)?$")
_INTEGER = re.compile(r"^[+-]?\d+$")
_TRUE = frozenset({"yes", "y", "true", "1", "x"})
_FALSE = frozenset({"no", "n", "false", "0", ""})


class CellError(ValueError):
    """A cell that cannot be read; the message says why in plain words."""


class FileError(ValueError):
    """A file that cannot be read at all (not text, no header)."""


@dataclass(frozen=True, slots=True)
class Table:
    """The header (column names, trimmed and lower-cased) and the text of the file."""

    header: tuple[str, ...]
    delimiter: str
    text: str

    def rows(self) -> Iterator[tuple[int, dict[str, str]]]:
        """(row number, cells by column) for each data row; row 1 is the header, so the
        first data row is row 2, as a spreadsheet numbers it. Blank lines are skipped."""
        reader = csv.reader(io.StringIO(self.text), delimiter=self.delimiter)
        next(reader, None)
        for number, cells in enumerate(reader, start=2):
            if not any(cell.strip() for cell in cells):
                continue
            yield (
                number,
                {
                    name: cells[i].strip() if i < len(cells) else ""
                    for i, name in enumerate(self.header)
                },
            )


def checksum(data: bytes) -> str:
    """The file's SHA-256, hex: the key a re-import is recognised by."""
    return hashlib.sha256(data).hexdigest()


def decode(data: bytes) -> str:
    """The text of a UTF-8 file, with or without a byte-order mark."""
    try:
        return data.decode("utf-8-sig")
    except UnicodeDecodeError as exc:
        raise FileError(
            f"The file is not UTF-8 text (byte {exc.start + 1} cannot be read). Save it from "
            "the spreadsheet as 'CSV UTF-8'."
        ) from exc


def read_table(data: bytes) -> Table:
    """The header and rows of a CSV file: the delimiter is whichever of ``;`` and ``,`` the
    header line uses more (a header holds no decimal numbers, so it cannot mislead)."""
    text = decode(data)
    first = text.split("\n", 1)[0]
    if not first.strip():
        raise FileError("The file is empty or its first line (the column names) is blank.")
    delimiter = ";" if first.count(";") > first.count(",") else ","
    header = next(csv.reader([first], delimiter=delimiter))
    names = tuple(name.strip().lower() for name in header)
    return Table(header=names, delimiter=delimiter, text=text)


def parse_number(text: str) -> float:
    """A finite number, with a decimal point or a decimal comma (``12.5`` or ``12,5``)."""
    value = text.strip().replace("\u00a0", "").replace(" ", "")
    if _DECIMAL_COMMA.match(value):
        value = value.replace(",", ".")
    if not _PLAIN_NUMBER.match(value):
        if value.lower().lstrip("+-") in ("nan", "inf", "infinity"):
            raise CellError(f"{text!r} is not a finite number.")
        raise CellError(
            f"{text!r} is not a number (write it like 12.5 or 12,5, without thousands separators)."
        )
    number = float(value)
    if not math.isfinite(number):
        raise CellError(f"{text!r} is too large to be a finite number.")
    return number


def parse_integer(text: str) -> int:
    value = text.strip()
    if not _INTEGER.match(value):
        raise CellError(f"{text!r} is not a whole number.")
    return int(value)


def parse_bool(text: str) -> bool:
    """yes/no, true/false, 1/0 or x (blank is no)."""
    value = text.strip().lower()
    if value in _TRUE:
        return True
    if value in _FALSE:
        return False
    raise CellError(f"{text!r} is not yes or no.")


def parse_date(text: str) -> dt.date:
    """An ISO 8601 date, ``YYYY-MM-DD``."""
    value = text.strip()
    try:
        if len(value) != 10:
            raise ValueError(value)
        return dt.date.fromisoformat(value)
    except ValueError as exc:
        raise CellError(f"{text!r} is not a date written YYYY-MM-DD.") from exc


def parse_time(text: str) -> dt.time:
    """A time of day, ``HH:MM`` or ``HH:MM:SS`` (local time)."""
    try:
        return dt.time.fromisoformat(text.strip())
    except ValueError as exc:
        raise CellError(f"{text!r} is not a time written HH:MM.") from exc


def parse_moment(text: str, zone: ZoneInfo) -> dt.datetime:
    """An aware moment: an ISO 8601 date and time with its offset, or a bare date (taken at
    ``DATE_ONLY_TIME`` in ``zone``). A date and time without an offset is refused."""
    value = text.strip()
    if len(value) == 10:
        return dt.datetime.combine(parse_date(value), DATE_ONLY_TIME, tzinfo=zone)
    try:
        moment = dt.datetime.fromisoformat(value)
    except ValueError as exc:
        raise CellError(
            f"{text!r} is not a date (YYYY-MM-DD) or a date and time with its offset "
            "(YYYY-MM-DDTHH:MM+01:00)."
        ) from exc
    if moment.tzinfo is None or moment.utcoffset() is None:
        raise CellError(
            f"{text!r} has no offset from UTC; add one (e.g. {value}+00:00) or give the date alone."
        )
    try:
        return moment.astimezone(dt.UTC)
    except OverflowError as exc:
        raise CellError(f"{text!r} is out of the range of dates.") from exc


def choice(text: str, choices: Sequence[tuple[str, str]]) -> str:
    """The stored value of a choice, given as its value or its label (any case)."""
    wanted = text.strip().lower()
    for value, label in choices:
        if wanted in (value.lower(), label.lower()):
            return value
    allowed = ", ".join(value for value, _ in choices)
    raise CellError(f"{text!r} is not one of {allowed}.")
