"""Points for the unit page's charts: anode remaining against date and battery charge left.

The wear fit is a straight line in immersed days; drawn against calendar dates it bends
wherever the unit sat dry in the workshop, which is the honest picture.
"""

from __future__ import annotations

import bisect
import datetime as dt
from dataclasses import dataclass

from django.db.models import Q
from django.utils import timezone

from fleet.calc.exposure import immersed_days_at_each_seconds
from fleet.models import Deployment, Transponder
from fleet.models.functions import AsStored, EpochSeconds

from .engine import AnodeOutlook, UnitEvaluation, anode_outlook_of
from .state import unit_readings


@dataclass(frozen=True, slots=True)
class AnodeHistory:
    name: str
    readings: tuple[tuple[dt.date, float], ...]  # (date, % of new)
    fitted: tuple[tuple[dt.date, float], ...]
    projection: tuple[tuple[dt.date, float], ...]
    threshold_percent: float
    shown: str = ""  # what is drawn when the readings are thinned ("" when all are)


# The chart draws a bounded number of readings, whatever the history: the newest
# ``RECENT_READINGS`` in full; before them, each calendar year's first, last, lowest and
# highest reading and every reading that replaced the anode.
RECENT_READINGS = 100


def thin_readings(points: list[tuple[int, float, bool]]) -> list[int]:
    """Indices (oldest first) of the readings ``(year, percent, replaced)`` the chart draws."""
    cut = max(0, len(points) - RECENT_READINGS)
    keep = set(range(cut, len(points)))
    by_year: dict[int, list[int]] = {}
    for i in range(cut):
        by_year.setdefault(points[i][0], []).append(i)
        if points[i][2]:
            keep.add(i)
    for indices in by_year.values():
        values = [points[i][1] for i in indices]
        # The first lowest and the first highest, as ``min`` and ``max`` give them.
        lowest, highest = values.index(min(values)), values.index(max(values))
        keep.update((indices[0], indices[-1], indices[lowest], indices[highest]))
    return sorted(keep)


# One reading as plain values: the visit's opening in seconds since the Unix epoch, the
# percent of new (None for a reading with no value), whether it replaced the anode.
_Reading = tuple[float, float | None, bool]


def _new_years(first_s: float, last_s: float) -> tuple[list[float], int]:
    """Each local new year's midnight after ``first_s`` up to ``last_s`` (epoch seconds),
    and the year ``first_s`` falls in."""
    tz = timezone.get_current_timezone()
    first_year = dt.datetime.fromtimestamp(first_s, tz).year
    last_year = dt.datetime.fromtimestamp(last_s, tz).year
    bounds = [
        dt.datetime(y, 1, 1, tzinfo=tz).timestamp() for y in range(first_year + 1, last_year + 1)
    ]
    return bounds, first_year


def position_readings(unit: Transponder, position_id: int, new_g: float) -> list[_Reading]:
    """Every reading at the position, oldest first, as plain numbers: the visit's opening
    comes from the database as epoch seconds, so a long history costs no date conversion
    in Python. One query."""
    rows = (
        unit_readings(unit, [position_id])
        .order_by("record__opened_at", "pk")
        .annotate(at_s=EpochSeconds("record__opened_at"))
        .annotate(replaced_as_stored=AsStored("replaced"))
        .values_list("at_s", "mass_g", "remaining_percent", "replaced_as_stored")
    )
    # The percent as ``AnodeReading.effective_remaining_percent`` gives it.
    return [
        (at_s, remaining_percent if mass_g is None else 100.0 * mass_g / new_g, bool(replaced))
        for at_s, mass_g, remaining_percent, replaced in rows
    ]


def anode_history(ev: UnitEvaluation, position_id: int) -> AnodeHistory | None:
    """The chart of ``position_id`` from a whole evaluation (the unit report's)."""
    outlook = anode_outlook_of(ev, position_id)
    return None if outlook is None else anode_history_of(outlook)


def anode_history_of(outlook: AnodeOutlook) -> AnodeHistory:
    """The chart of one anode position: its readings (thinned, ``thin_readings``), the wear
    fit through the current anode's and the projection to the replace-at mass. Two queries
    whatever the history: the readings, and the unit's deployments when a wear line is
    drawn."""
    projection, unit = outlook.projection, outlook.unit
    position_id, new_g = outlook.position.pk, outlook.position.new_net_mass_g
    readings = position_readings(unit, position_id, new_g)
    every = [i for i, r in enumerate(readings) if r[1] is not None]  # indices of valued ones
    years: list[int] = []
    if every:
        bounds, first_year = _new_years(readings[every[0]][0], readings[every[-1]][0])
        years = [first_year + bisect.bisect_right(bounds, readings[i][0]) for i in every]
    drawn = [
        every[k]
        for k in thin_readings(
            [(y, readings[i][1] or 0.0, readings[i][2]) for y, i in zip(years, every, strict=True)]
        )
    ]
    # The current anode's life starts at the last replacement.
    replaced_at = max((i for i, r in enumerate(readings) if r[2]), default=-1)
    tz = timezone.get_current_timezone()

    def local_day(i: int) -> dt.date:
        return dt.datetime.fromtimestamp(readings[i][0], tz).date()

    points = [(local_day(i), pct) for i in drawn if (pct := readings[i][1]) is not None]
    fitted = []
    fit = projection.fit
    if fit is not None and fit.rate_kg_per_day:
        # The fit's x is immersed days since the last replacement, at it and at each drawn
        # reading of the current anode: from the deployments' instants read as plain
        # numbers (one pass of prefix sums), only those running at or recovered after the
        # replacement (an earlier one adds the same days to both ends).
        since = [
            *([replaced_at] if replaced_at >= 0 else []),
            *(i for i in drawn if i > replaced_at),
        ]
        intervals = (
            Deployment.objects.filter(unit=unit)
            .order_by()  # the prefix sums sort them
            .annotate(start=EpochSeconds("over_side_at"), end=EpochSeconds("recovered_at"))
        )
        if replaced_at >= 0:
            replaced_s = readings[replaced_at][0]
            intervals = intervals.filter(Q(end__isnull=True) | Q(end__gt=replaced_s))
        days = immersed_days_at_each_seconds(
            intervals.values_list("start", "end"), [readings[i][0] for i in since]
        )
        fit_from_x = days[0] if replaced_at >= 0 else 0.0
        start_mass = fit.mass_at_kg(0.0)
        if replaced_at >= 0 and start_mass is not None:
            fitted.append((local_day(replaced_at), 100.0 * start_mass / projection.new_kg))
        for i, x in zip(since, days, strict=True):
            if i != replaced_at:
                mass = fit.mass_at_kg(max(0.0, x - fit_from_x))
                if mass is not None:
                    fitted.append((local_day(i), 100.0 * mass / projection.new_kg))
    future: list[tuple[dt.date, float]] = []
    if projection.mass_now_kg is not None and outlook.as_of is not None:
        as_of = timezone.localdate(outlook.as_of)
        future.append((as_of, 100.0 * projection.mass_now_kg / projection.new_kg))
        if outlook.due_on is not None and outlook.due_on > as_of:
            future.append((outlook.due_on, projection.replace_at_percent))
    shown = ""
    if len(drawn) < len(every):
        shown = (
            f"{len(drawn):,} of {len(every):,} readings drawn: the newest {RECENT_READINGS}; "
            "before them each year's first, last, lowest, highest and replacements"
        )
    return AnodeHistory(
        projection.name,
        tuple(points),
        tuple(fitted),
        tuple(future),
        projection.replace_at_percent,
        shown,
    )


@dataclass(frozen=True, slots=True)
class BatteryHistory:
    used: tuple[tuple[dt.date, float], ...]  # (date, Ah left)
    projection: tuple[tuple[dt.date, float], ...]
    reserve_ah: float
    usable_ah: float


def battery_history(ev: UnitEvaluation) -> BatteryHistory | None:
    b = ev.battery
    state = getattr(ev.unit, "state", None)
    if b is None or state is None or state.pack is None:
        return None
    installed = state.pack.installed_on
    used = ((installed, b.usable_ah + 0.0), (b.on, max(0.0, b.remaining_ah)))
    item = ev.item("battery")
    projection: tuple[tuple[dt.date, float], ...] = ()
    if item is not None and item.due_on is not None and item.due_on > b.on:
        projection = ((b.on, b.remaining_ah), (item.due_on, b.reserve_ah))
    return BatteryHistory(used, projection, b.reserve_ah, b.usable_ah)
