"""Points for the unit page's charts: anode remaining against date and battery charge left.

The wear fit is a straight line in immersed days; drawn against calendar dates it bends
wherever the unit sat dry in the workshop, which is the honest picture.
"""

from __future__ import annotations

import datetime as dt
from dataclasses import dataclass

from django.utils import timezone

from fleet.calc.exposure import immersed_days_at_each
from fleet.models import Deployment

from .engine import UnitEvaluation
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


def thin_readings(points: list[tuple[dt.date, float, bool]]) -> list[int]:
    """Indices (oldest first) of the readings ``(day, percent, replaced)`` the chart draws."""
    cut = max(0, len(points) - RECENT_READINGS)
    keep = set(range(cut, len(points)))
    by_year: dict[int, list[int]] = {}
    for i in range(cut):
        by_year.setdefault(points[i][0].year, []).append(i)
        if points[i][2]:
            keep.add(i)
    for indices in by_year.values():
        keep.update((indices[0], indices[-1]))
        keep.add(min(indices, key=lambda i: points[i][1]))
        keep.add(max(indices, key=lambda i: points[i][1]))
    return sorted(keep)


Row = tuple[float | None, float | None, bool, dt.datetime]


def _percents(rows: list[Row], new_g: float) -> tuple[list[tuple[dt.date, float, bool]], list[int]]:
    """Each reading with a value as (local day, % of new, replaced), and its index in
    ``rows``."""
    tz = timezone.get_current_timezone()
    every: list[tuple[dt.date, float, bool]] = []
    at: list[int] = []
    for index, (mass_g, remaining_percent, replaced, opened_at) in enumerate(rows):
        # As ``AnodeReading.effective_remaining_percent``.
        pct = remaining_percent if mass_g is None else 100.0 * mass_g / new_g
        if pct is not None:
            every.append((opened_at.astimezone(tz).date(), pct, replaced))
            at.append(index)
    return every, at


def anode_history(ev: UnitEvaluation, position_id: int) -> AnodeHistory | None:
    projection = next((p for p in ev.anodes if p.position_id == position_id), None)
    if projection is None:
        return None
    unit = ev.unit
    intervals = list(
        Deployment.objects.filter(unit=unit).values_list("over_side_at", "recovered_at")
    )
    # Plain values, oldest first.
    rows = list(
        unit_readings(unit, [position_id])
        .order_by("record__opened_at", "pk")
        .values_list("mass_g", "remaining_percent", "replaced", "record__opened_at")
    )
    new_g = next(
        p.new_net_mass_g for p in unit.variant.anode_positions.all() if p.pk == position_id
    )
    every, at = _percents(rows, new_g)
    kept = thin_readings(every)
    # The current anode's life starts at the last replacement.
    last_replaced = max((i for i, row in enumerate(rows) if row[2]), default=None)
    # Immersed days (one pass) at the drawn readings and the last replacement only.
    wanted = {at[k] for k in kept}
    if last_replaced is not None:
        wanted.add(last_replaced)
    needed = sorted(wanted)
    moments = [rows[i][3] for i in needed]
    xs = dict(zip(needed, immersed_days_at_each(intervals, moments), strict=True))
    points = []
    fitted = []
    fit_from_x = 0.0
    wearing = projection.fit is not None and bool(projection.fit.rate_kg_per_day)
    if last_replaced is not None:
        fit_from_x = xs[last_replaced]
        start_mass = projection.fit.mass_at_kg(0.0) if projection.fit and wearing else None
        if start_mass is not None:
            day = timezone.localdate(rows[last_replaced][3])
            fitted.append((day, 100.0 * start_mass / projection.new_kg))
    for k in kept:
        day, pct, _replaced = every[k]
        index = at[k]
        points.append((day, pct))
        current_anode = last_replaced is None or index > last_replaced
        if current_anode and wearing and projection.fit is not None:
            mass = projection.fit.mass_at_kg(max(0.0, xs[index] - fit_from_x))
            if mass is not None:
                fitted.append((day, 100.0 * mass / projection.new_kg))
    future: list[tuple[dt.date, float]] = []
    item = ev.item(f"anode:{position_id}")
    if projection.mass_now_kg is not None and ev.duty.as_of is not None:
        as_of = timezone.localdate(ev.duty.as_of)
        future.append((as_of, 100.0 * projection.mass_now_kg / projection.new_kg))
        if item is not None and item.due_on is not None and item.due_on > as_of:
            future.append((item.due_on, projection.replace_at_percent))
    shown = ""
    if len(kept) < len(every):
        shown = (
            f"{len(kept):,} of {len(every):,} readings drawn: the newest {RECENT_READINGS}; "
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
