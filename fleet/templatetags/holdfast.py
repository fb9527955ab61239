"""Template filters for numbers, units and recorded values (``fleet.formatting``), so pages
read the same as the PDFs: ``{% load holdfast %}`` then ``{{ value|qty:"dbar" }}``."""

import datetime as dt
from typing import Any

from django import template
from django.db.models import Model

from fleet import formatting

register = template.Library()


@register.filter
def qty(value: float | None, unit: str = "") -> str:
    """``{{ 1902.0|qty:"dbar" }}`` -> "1,902 dbar"."""
    return formatting.quantity(value, unit)


@register.filter
def pct(fraction: float | None) -> str:
    """``{{ 0.79|pct }}`` -> "79 %"."""
    return formatting.percent(fraction)


@register.filter
def moment(value: dt.datetime | None) -> str:
    """A date and time with the workshop's time zone."""
    return formatting.moment(value)


@register.filter
def field_value(instance: Model, field_name: str) -> str:
    """A recorded value in words (choice label, Yes/No, number with its unit)."""
    return formatting.field_value(instance, field_name)


@register.filter
def field_label(instance: Any, field_name: str) -> str:
    return formatting.field_label(instance, field_name)
