"""The unit page's charts (``fleet.charts.Chart``, built from the ``fleet.due.history``
dataclasses) drawn with reportlab graphics for the PDFs: the same series, dash patterns and
markers as the SVG, so a black-and-white print reads the same."""

from __future__ import annotations

import datetime as dt
from collections.abc import Callable
from typing import Literal

from reportlab.graphics.shapes import Circle, Drawing, Line, PolyLine, Rect, String
from reportlab.lib import colors
from reportlab.lib.colors import Color
from reportlab.lib.units import mm

from fleet.charts import Chart, Series

from .base import FONT, FONT_BOLD

LEFT, RIGHT, TOP, BOTTOM = 14 * mm, 3 * mm, 8 * mm, 13 * mm
Anchor = Literal["start", "middle", "end"]
ANCHORS: tuple[Anchor, Anchor, Anchor] = ("start", "middle", "end")


def _dash(series: Series) -> list[float]:
    return [float(part) for part in series.dash.split()]


def _stroke(shape: Line | PolyLine, series: Series) -> Line | PolyLine:
    shape.strokeWidth = 1.2
    if series.dash:
        shape.strokeDashArray = _dash(series)
    return shape


def _box(x: float, y: float, w: float, h: float, *, fill: Color | None, width: float) -> Rect:
    rect = Rect(x, y, w, h)
    rect.fillColor = fill
    rect.strokeWidth = width
    return rect


def _dot(x: float, y: float) -> Circle:
    return Circle(x, y, 2.5, fillColor=colors.white, strokeWidth=0.8)


def _span(chart: Chart) -> tuple[dt.date, dt.date, float, float]:
    points = [p for s in chart.series for p in s.points]
    d0 = min(p[0] for p in points)
    d1 = max(p[0] for p in points)
    if chart.today:
        d0, d1 = min(d0, chart.today), max(d1, chart.today)
    if d1 == d0:
        d1 = d0 + dt.timedelta(days=1)
    y_max = chart.y_max if chart.y_max is not None else max(p[1] for p in points) * 1.1 or 1.0
    return d0, d1, chart.y_min, y_max


def _series(
    drawing: Drawing, s: Series, x: Callable[[dt.date], float], y: Callable[[float], float]
) -> None:
    coords = [(x(d), y(v)) for d, v in s.points]
    if s.line and len(coords) > 1:
        flat = [c for xy in coords for c in xy]
        drawing.add(_stroke(PolyLine(flat), s))
    for cx, cy in coords:
        if s.marker == "circle":
            drawing.add(_dot(cx, cy))
        elif s.marker == "square":
            drawing.add(_box(cx - 2, cy - 2, 4, 4, fill=colors.black, width=0))


def _axes(
    drawing: Drawing,
    chart: Chart,
    span: tuple[dt.date, dt.date, float, float],
    x: Callable[[dt.date], float],
    y: Callable[[float], float],
) -> None:
    d0, d1, y_min, y_max = span
    for i in range(6):
        value = y_min + (y_max - y_min) * i / 5
        drawing.add(Line(LEFT - 2, y(value), LEFT, y(value), strokeWidth=0.5))
        drawing.add(
            String(
                LEFT - 3,
                y(value) - 2.5,
                f"{value:.0f}",
                fontName=FONT,
                fontSize=6.5,
                textAnchor="end",
            )
        )
    # Three dates (start, middle, end): five overlap at half a page's width.
    for i in range(3):
        day = d0 + dt.timedelta(days=round((d1 - d0).days * i / 2))
        anchor: Anchor = ANCHORS[i]
        drawing.add(
            String(
                x(day), BOTTOM - 8, day.isoformat(), fontName=FONT, fontSize=6.5, textAnchor=anchor
            )
        )
    drawing.add(
        String(
            LEFT,
            drawing.height - TOP + 1.5,
            chart.y_label,
            fontName=FONT,
            fontSize=6.5,
            textAnchor="start",
        )
    )
    if chart.today and d0 <= chart.today <= d1:
        tx = x(chart.today)
        drawing.add(Line(tx, BOTTOM, tx, drawing.height - TOP, strokeWidth=0.4))
        # Beside the line, inside the plot: to its left when the line is near the right edge.
        near_end = tx > drawing.width - RIGHT - 25
        drawing.add(
            String(
                tx - 2 if near_end else tx + 2,
                drawing.height - TOP - 7,
                "today",
                fontName=FONT,
                fontSize=6.5,
                textAnchor=ANCHORS[2] if near_end else ANCHORS[0],
            )
        )


def chart_drawing(chart: Chart, width: float, height: float) -> Drawing:
    """``chart`` as a reportlab ``Drawing`` of ``width`` x ``height`` points."""
    drawing = Drawing(width, height)
    # The title on the top line, the value label under it just above the plot.
    drawing.add(String(LEFT, height - 8, chart.title, fontName=FONT_BOLD, fontSize=8))
    plot_w, plot_h = width - LEFT - RIGHT, height - TOP - BOTTOM
    drawing.add(_box(LEFT, BOTTOM, plot_w, plot_h, fill=None, width=0.6))
    if not any(s.points for s in chart.series):
        drawing.add(
            String(
                LEFT + 3 * mm,
                BOTTOM + plot_h / 2,
                "No data to draw yet.",
                fontName=FONT,
                fontSize=8,
            )
        )
        return drawing
    span = _span(chart)
    d0, d1, y_min, y_max = span

    def x(day: dt.date) -> float:
        return LEFT + plot_w * (day - d0).days / (d1 - d0).days

    def y(value: float) -> float:
        clamped = min(max(value, y_min), y_max)
        return BOTTOM + plot_h * (clamped - y_min) / ((y_max - y_min) or 1.0)

    _axes(drawing, chart, span, x, y)
    # The key under the dates, on a second row when one is not wide enough.
    legend_x, legend_y = LEFT, 15.0
    for s in chart.series:
        _series(drawing, s, x, y)
        needed = 22 + 3.6 * len(s.label)
        if legend_x > LEFT and legend_x + needed > width:
            legend_x, legend_y = LEFT, legend_y - 10
        _legend_item(drawing, s, legend_x, legend_y)
        legend_x += needed
    return drawing


def _legend_item(drawing: Drawing, s: Series, legend_x: float, ly: float) -> None:
    """One series' sample line, marker and label in the row under the plot."""
    if s.line:
        drawing.add(_stroke(Line(legend_x, ly + 2, legend_x + 14, ly + 2), s))
    if s.marker == "circle":
        drawing.add(_dot(legend_x + 7, ly + 2))
    elif s.marker == "square":
        drawing.add(_box(legend_x + 5, ly, 4, 4, fill=colors.black, width=0))
    drawing.add(String(legend_x + 17, ly, s.label, fontName=FONT, fontSize=6.5))
