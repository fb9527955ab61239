"""How numbers, units, dates and recorded values read, on every page and in every PDF.

One convention, written once:

- thousands grouped with a comma, the decimal point a full stop: ``1,900.5 dbar``;
- a space between a number and its unit, the percent sign included: ``79 %``;
- each quantity to the decimals its instruments resolve (``PLACES``), trailing zeros dropped,
  so a recorded ``1902`` reads ``1,902 dbar`` and ``0.35`` reads ``0.35 A``;
- a missing value is an em dash;
- yes/no fields read Yes or No; choices read their label; date-times carry their time zone.

Pages call these through the ``holdfast`` template filters (``fleet/templatetags``); PDFs call
them directly. No model import here: a field is read through Django's field classes only.
"""

from __future__ import annotations

import datetime as dt
import math
from typing import Any

from django.db import models
from django.utils import timezone

MISSING = "—"

# Decimals shown per unit: what a workshop instrument resolves (common practice, no published
# source). A unit not listed gets three significant decimals at most.
PLACES: dict[str, int] = {
    "dbar": 1,
    "m": 0,
    "min": 1,
    "s": 2,
    "°C": 3,
    "°": 2,
    "g": 1,
    "kg": 1,
    "kgf": 1,
    "Ah": 2,
    "mAh": 1,
    "V": 2,
    "A": 3,
    "Ω": 3,
    "%": 1,
}

# The unit a field's name ends with (SI units in every name, DEVELOPERS.md).
SUFFIX_UNITS: tuple[tuple[str, str], ...] = (
    ("_dbar", "dbar"),
    ("_minutes", "min"),
    ("seconds_to_release", "s"),
    ("_ohm", "Ω"),
    ("_percent", "%"),
    ("_ah", "Ah"),
    ("_kg", "kg"),
    ("_g", "g"),
    ("_v", "V"),
    ("_a", "A"),
    ("_c", "°C"),
    ("_m", "m"),
)


def number(value: float | int | None, places: int = 3) -> str:
    """``value`` grouped by thousands, at most ``places`` decimals, trailing zeros dropped.

    Example: 1902.0 -> "1,902"; 0.350 -> "0.35"; -6.7049 (2 places) -> "-6.7".
    """
    if value is None:
        return MISSING
    if isinstance(value, float) and not math.isfinite(value):
        return MISSING
    text = f"{value:,.{max(places, 0)}f}"
    if "." in text:
        text = text.rstrip("0").rstrip(".")
    return "0" if text in ("-0", "") else text


def quantity(value: float | int | None, unit: str = "", places: int | None = None) -> str:
    """A number with its unit, to the unit's decimals: ``quantity(1902, "dbar")`` ->
    "1,902 dbar"; ``quantity(79.2, "%")`` -> "79.2 %"."""
    if value is None:
        return MISSING
    shown = number(value, PLACES.get(unit, 3) if places is None else places)
    if shown == MISSING:
        return MISSING
    return f"{shown} {unit}" if unit else shown


def signed(value: float | None, unit: str = "", places: int | None = None) -> str:
    """A difference, always with its sign: ``signed(-0.3, "°C")`` -> "-0.3 °C"."""
    text = quantity(value, unit, places)
    if value is None or text == MISSING or text.startswith("-"):
        return text
    return f"+{text}"


def percent(fraction: float | None, places: int = 0) -> str:
    """A fraction as a percentage: ``percent(0.79)`` -> "79 %"."""
    return MISSING if fraction is None else quantity(fraction * 100.0, "%", places)


def yes_no(value: bool | None) -> str:
    return MISSING if value is None else ("Yes" if value else "No")


def day(value: dt.date | None) -> str:
    return value.isoformat() if value else MISSING


def moment(value: dt.datetime | None, *, utc: bool = False) -> str:
    """A date and time to the minute, with its time zone: the workshop's on pages, UTC in
    documents (``utc=True``), so the same instant prints the same on every server."""
    if value is None:
        return MISSING
    if utc:
        return value.astimezone(dt.UTC).strftime("%Y-%m-%d %H:%M UTC")
    local = timezone.localtime(value)
    return f"{local:%Y-%m-%d %H:%M} {local.tzname()}"


def unit_of(field_name: str) -> str:
    """The unit a field's name carries (``test_pressure_dbar`` -> "dbar"), or ""."""
    for suffix, unit in SUFFIX_UNITS:
        if field_name.endswith(suffix):
            return unit
    return ""


def field_label(model: type[models.Model] | models.Model, field_name: str) -> str:
    """What people read for a field: its verbose name, first letter capitalised."""
    field = model._meta.get_field(field_name)
    label = str(getattr(field, "verbose_name", field_name))
    return label[:1].upper() + label[1:]


def field_value(instance: models.Model, field_name: str, *, utc: bool = False) -> str:
    """The stored value of ``field_name`` in words: a choice's label, Yes/No, a dated time
    with its zone, a number with its unit; a related row by its own name."""
    field: Any = instance._meta.get_field(field_name)
    value = getattr(instance, field_name)
    if value is None or value == "":
        return MISSING
    if getattr(field, "choices", None):
        return str(dict(field.flatchoices).get(value, value))
    if isinstance(field, models.BooleanField):
        return yes_no(value)
    if isinstance(field, models.DateTimeField):
        return moment(value, utc=utc)
    if isinstance(field, models.DateField):
        return day(value)
    if isinstance(field, models.TimeField):
        return f"{value:%H:%M}"
    if isinstance(field, models.FloatField | models.IntegerField | models.DecimalField):
        per_row = getattr(instance, "unit_for", None)
        unit = per_row(field_name) if callable(per_row) else unit_of(field_name)
        return quantity(float(value), unit)
    return str(value)


def clauses(*parts: str) -> str:
    """Clauses joined with "; ": empty ones left out (no stray semicolon) and each said once,
    so a basis built from pieces never repeats itself."""
    seen: list[str] = []
    for part in parts:
        text = part.strip().strip(";").strip()
        if text and text not in seen:
            seen.append(text)
    return "; ".join(seen)
