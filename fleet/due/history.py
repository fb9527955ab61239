"""Points for the unit page's charts: anode remaining against date and battery charge left.

The wear fit is a straight line in immersed days; drawn against calendar dates it bends
wherever the unit sat dry in the workshop, which is the honest picture.
"""

from __future__ import annotations

import datetime as dt
from dataclasses import dataclass

from django.utils import timezone

from fleet.calc.exposure import immersed_days
from fleet.models import AnodeReading, Deployment

from .engine import UnitEvaluation


@dataclass(frozen=True, slots=True)
class AnodeHistory:
    name: str
    readings: tuple[tuple[dt.date, float], ...]  # (date, % of new)
    fitted: tuple[tuple[dt.date, float], ...]
    projection: tuple[tuple[dt.date, float], ...]
    threshold_percent: float


def anode_history(ev: UnitEvaluation, position_id: int) -> AnodeHistory | None:
    projection = next((p for p in ev.anodes if p.position_id == position_id), None)
    if projection is None:
        return None
    unit = ev.unit
    intervals = list(
        Deployment.objects.filter(unit=unit).values_list("over_side_at", "recovered_at")
    )
    readings = (
        AnodeReading.objects.filter(record__unit=unit, position_id=position_id)
        .select_related("record", "position")
        .order_by("record__opened_at", "pk")
    )
    points = []
    fitted = []
    fit_from_x = None
    rows = list(readings)
    # The current anode's life starts at the last replacement.
    last_replaced = max((i for i, r in enumerate(rows) if r.replaced), default=None)
    if last_replaced is not None:
        fit_from_x = immersed_days(intervals, rows[last_replaced].record.opened_at)
        if projection.fit is not None and projection.fit.rate_kg_per_day:
            start_mass = projection.fit.mass_at_kg(0.0)
            if start_mass is not None:
                fitted.append(
                    (
                        timezone.localdate(rows[last_replaced].record.opened_at),
                        100.0 * start_mass / projection.new_kg,
                    )
                )
    for index, reading in enumerate(rows):
        pct = reading.effective_remaining_percent
        if pct is None:
            continue
        day = timezone.localdate(reading.record.opened_at)
        points.append((day, pct))
        current_anode = last_replaced is None or index > last_replaced
        if current_anode and projection.fit is not None and projection.fit.rate_kg_per_day:
            x = immersed_days(intervals, reading.record.opened_at) - (fit_from_x or 0.0)
            mass = projection.fit.mass_at_kg(max(0.0, x))
            if mass is not None:
                fitted.append((day, 100.0 * mass / projection.new_kg))
    future: list[tuple[dt.date, float]] = []
    item = ev.item(f"anode:{position_id}")
    if projection.mass_now_kg is not None and ev.duty.as_of is not None:
        as_of = timezone.localdate(ev.duty.as_of)
        future.append((as_of, 100.0 * projection.mass_now_kg / projection.new_kg))
        if item is not None and item.due_on is not None and item.due_on > as_of:
            future.append((item.due_on, projection.replace_at_percent))
    return AnodeHistory(
        projection.name, tuple(points), tuple(fitted), tuple(future), projection.replace_at_percent
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
