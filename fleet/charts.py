"""Small server-side SVG line charts, legible in black and white: series differ by dash
pattern and marker shape, not only by colour. Served as images (no inline SVG, no scripts).

The unit page's two charts are assembled here from the ``fleet.due.history`` dataclasses
(``anode_chart_svg``, ``battery_chart_svg``); the views only call one of them."""

from __future__ import annotations

import datetime as dt
from collections.abc import Callable, Sequence
from dataclasses import dataclass, field
from typing import TYPE_CHECKING
from xml.sax.saxutils import escape

if TYPE_CHECKING:
    from fleet.due.history import AnodeHistory, BatteryHistory
    from fleet.selectors import TimelineRow, TimelineSpan

WIDTH, HEIGHT = 640, 260
LEFT, RIGHT, TOP, BOTTOM = 56, 16, 28, 40


@dataclass(frozen=True, slots=True)
class Series:
    label: str
    points: tuple[tuple[dt.date, float], ...]
    dash: str = ""  # SVG stroke-dasharray; "" for a solid line
    marker: str = ""  # "circle", "square" or ""
    line: bool = True


@dataclass(slots=True)
class Chart:
    title: str
    y_label: str
    series: list[Series] = field(default_factory=list)
    y_min: float = 0.0
    y_max: float | None = None
    today: dt.date | None = None
    note: str = ""  # under the title: what is drawn, when not everything is


def _ticks(lo: float, hi: float, n: int = 5) -> list[float]:
    step = (hi - lo) / n if hi > lo else 1.0
    return [lo + i * step for i in range(n + 1)]


def _axes(
    chart: Chart,
    d0: dt.date,
    d1: dt.date,
    y_range: tuple[float, float],
    x: Callable[[dt.date], float],
    y: Callable[[float], float],
) -> list[str]:
    """The plot frame, the value and date ticks, the value label and the "today" line."""
    y_min, y_max = y_range
    span_days = (d1 - d0).days
    plot_w, plot_h = WIDTH - LEFT - RIGHT, HEIGHT - TOP - BOTTOM
    out = [
        f'<rect x="{LEFT}" y="{TOP}" width="{plot_w}" height="{plot_h}" fill="none" stroke="#000"/>'
    ]
    for value in _ticks(y_min, y_max):
        yy = y(value)
        out.append(f'<line x1="{LEFT - 4}" y1="{yy:.1f}" x2="{LEFT}" y2="{yy:.1f}" stroke="#000"/>')
        out.append(f'<text x="{LEFT - 6}" y="{yy + 4:.1f}" text-anchor="end">{value:.0f}</text>')
    for i in range(5):
        day = d0 + dt.timedelta(days=round(span_days * i / 4))
        xx = x(day)
        anchor = "start" if i == 0 else "end" if i == 4 else "middle"
        out.append(
            f'<text x="{xx:.1f}" y="{HEIGHT - BOTTOM + 14}" text-anchor="{anchor}">'
            f"{day.isoformat()}</text>"
        )
    out.append(
        f'<text x="14" y="{TOP + plot_h / 2}" transform="rotate(-90 14 {TOP + plot_h / 2})" '
        f'text-anchor="middle">{escape(chart.y_label)}</text>'
    )
    if chart.today and d0 <= chart.today <= d1:
        tx = x(chart.today)
        out.append(
            f'<line x1="{tx:.1f}" y1="{TOP}" x2="{tx:.1f}" y2="{TOP + plot_h}" stroke="#000" '
            'stroke-width="0.5"/>'
            f'<text x="{tx + 3:.1f}" y="{TOP + 10}">today</text>'
        )
    return out


def _plot_series(
    s: Series, x: Callable[[dt.date], float], y: Callable[[float], float]
) -> list[str]:
    """One series' line (unless it is markers only) and its markers."""
    out = []
    coords = [(x(d), y(v)) for d, v in s.points]
    dash = f' stroke-dasharray="{s.dash}"' if s.dash else ""
    if s.line and len(coords) > 1:
        path = " ".join(f"{cx:.1f},{cy:.1f}" for cx, cy in coords)
        out.append(
            f'<polyline points="{path}" fill="none" stroke="#000" stroke-width="1.6"{dash}/>'
        )
    for cx, cy in coords:
        if s.marker == "circle":
            out.append(f'<circle cx="{cx:.1f}" cy="{cy:.1f}" r="3.5" fill="#fff" stroke="#000"/>')
        elif s.marker == "square":
            out.append(
                f'<rect x="{cx - 3:.1f}" y="{cy - 3:.1f}" width="6" height="6" fill="#000"/>'
            )
    return out


def _legend_item(s: Series, legend_x: int) -> list[str]:
    """One series' sample line, marker and label in the legend row under the plot."""
    ly = HEIGHT - 8
    dash = f' stroke-dasharray="{s.dash}"' if s.dash else ""
    visibility = dash if s.line else ' stroke-opacity="0"'
    out = [
        f'<line x1="{legend_x}" y1="{ly - 4}" x2="{legend_x + 22}" y2="{ly - 4}" '
        f'stroke="#000" stroke-width="1.6"{visibility}/>'
    ]
    if s.marker == "circle":
        out.append(
            f'<circle cx="{legend_x + 11}" cy="{ly - 4}" r="3.5" fill="#fff" stroke="#000"/>'
        )
    elif s.marker == "square":
        out.append(f'<rect x="{legend_x + 8}" y="{ly - 7}" width="6" height="6" fill="#000"/>')
    out.append(f'<text x="{legend_x + 26}" y="{ly}">{escape(s.label)}</text>')
    return out


def render(chart: Chart) -> str:
    points = [p for s in chart.series for p in s.points]
    out = [
        f'<svg xmlns="http://www.w3.org/2000/svg" width="{WIDTH}" height="{HEIGHT}" '
        f'viewBox="0 0 {WIDTH} {HEIGHT}" font-family="DejaVu Sans, sans-serif" font-size="11">',
        f"<title>{escape(chart.title)}</title>",
        '<rect width="100%" height="100%" fill="#fff"/>',
        f'<text x="{LEFT}" y="{12 if chart.note else 16}" font-size="13" font-weight="bold">'
        f"{escape(chart.title)}</text>",
    ]
    if chart.note:
        out.append(f'<text x="{LEFT}" y="24" font-size="9">{escape(chart.note)}</text>')
    if not points:
        out.append(f'<text x="{LEFT}" y="{HEIGHT / 2}">No data to draw yet.</text></svg>')
        return "".join(out)
    d0 = min(p[0] for p in points)
    d1 = max(p[0] for p in points)
    if chart.today:
        d0, d1 = min(d0, chart.today), max(d1, chart.today)
    if d1 == d0:
        d1 = d0 + dt.timedelta(days=1)
    y_max = chart.y_max if chart.y_max is not None else max(p[1] for p in points) * 1.1 or 1.0
    y_min = chart.y_min
    span_days = (d1 - d0).days
    plot_w, plot_h = WIDTH - LEFT - RIGHT, HEIGHT - TOP - BOTTOM

    def x(day: dt.date) -> float:
        return LEFT + plot_w * (day - d0).days / span_days

    def y(value: float) -> float:
        clamped = min(max(value, y_min), y_max)
        return TOP + plot_h * (1 - (clamped - y_min) / (y_max - y_min))

    out += _axes(chart, d0, d1, (y_min, y_max), x, y)
    legend_x = LEFT
    for s in chart.series:
        out += _plot_series(s, x, y)
        out += _legend_item(s, legend_x)
        legend_x += 30 + 7 * len(s.label)
    out.append("</svg>")
    return "".join(out)


def anode_chart_svg(history: AnodeHistory, *, serial: str, today: dt.date) -> str:
    return render(anode_chart(history, serial=serial, today=today))


def anode_chart(history: AnodeHistory, *, serial: str, today: dt.date) -> Chart:
    """One anode position: readings as % of new mass, the fitted wear line, the projection to
    the replacement threshold, and the threshold itself across the drawn span. Drawn as SVG
    here (``render``) and in the service report (``fleet.documents.report``)."""
    chart = Chart(
        title=f"{serial}: anode {history.name}",
        y_label="% of new mass",
        y_min=0.0,
        y_max=100.0,
        today=today,
        note=history.shown,
        series=[
            Series("readings", history.readings, marker="circle", line=False),
            Series("fitted wear", history.fitted),
            Series("projection", history.projection, dash="6 4"),
        ],
    )
    if history.readings or history.projection:
        first = min(d for d, _ in (*history.readings, *history.projection))
        last = max(d for d, _ in (*history.readings, *history.projection, (today, 0)))
        chart.series.append(
            Series(
                f"replace at {history.threshold_percent:.0f} %",
                ((first, history.threshold_percent), (last, history.threshold_percent)),
                dash="2 3",
            )
        )
    return chart


def battery_chart_svg(history: BatteryHistory | None, *, serial: str, today: dt.date) -> str:
    return render(battery_chart(history, serial=serial, today=today))


def battery_chart(history: BatteryHistory | None, *, serial: str, today: dt.date) -> Chart:
    """The fitted pack: charge used so far, the projection at the duty, and the reserve; an
    empty chart when no pack is fitted."""
    chart = Chart(title=f"{serial}: battery charge", y_label="Ah left", today=today)
    if history is not None:
        chart.y_max = max(history.usable_ah * 1.05, 0.1)
        chart.series = [
            Series("used so far", history.used, marker="square"),
            Series("projection at duty", history.projection, dash="6 4"),
        ]
        ends = [d for d, _ in (*history.used, *history.projection)]
        chart.series.append(
            Series(
                "reserve",
                ((min(ends), history.reserve_ah), (max(ends), history.reserve_ah)),
                dash="2 3",
            )
        )
    return chart


# --- The fleet timeline: one row per unit, over a window of days -----------------------------

TIMELINE_WIDTH = 1080
TIMELINE_LABEL = 92  # the serial column
TIMELINE_HEAD = 34  # quarter labels above the rows
TIMELINE_ROW = 24
TIMELINE_FOOT = 30  # the key under the rows
_DEPLOYED_FILL, _DEPLOYED_EDGE = "#b9d6e2", "#0b5c7a"
_BENCH_FILL = "#15212b"
_OVERDUE_FILL = "#a1261c"


@dataclass(frozen=True, slots=True)
class _Scale:
    start: dt.date
    end: dt.date

    def x(self, day: dt.date) -> float:
        day = min(max(day, self.start), self.end)
        plot_w = TIMELINE_WIDTH - TIMELINE_LABEL - 8
        return TIMELINE_LABEL + plot_w * (day - self.start).days / max(
            1, (self.end - self.start).days
        )


def _quarters(start: dt.date, end: dt.date) -> list[dt.date]:
    first = dt.date(start.year, 3 * ((start.month - 1) // 3) + 1, 1)
    days = []
    while first <= end:
        if first >= start:
            days.append(first)
        month = first.month + 3
        first = dt.date(first.year + (month - 1) // 12, (month - 1) % 12 + 1, 1)
    return days


def _timeline_grid(scale: _Scale, height: float, today: dt.date) -> list[str]:
    out = []
    for day in _quarters(scale.start, scale.end):
        xx = scale.x(day)
        out.append(
            f'<line x1="{xx:.1f}" y1="{TIMELINE_HEAD - 6}" x2="{xx:.1f}" y2="{height}" '
            'stroke="#cfd6dc" stroke-width="1"/>'
            f'<text x="{xx + 3:.1f}" y="{TIMELINE_HEAD - 10}">{day:%Y-%m}</text>'
        )
    tx = scale.x(today)
    out.append(
        f'<line x1="{tx:.1f}" y1="{TIMELINE_HEAD - 22}" x2="{tx:.1f}" y2="{height}" '
        'stroke="#000" stroke-width="1.5"/>'
        f'<text x="{tx + 3:.1f}" y="{TIMELINE_HEAD - 22}" font-weight="bold">today</text>'
    )
    return out


def _span_rect(span: TimelineSpan, scale: _Scale, top: float, today: dt.date, bench: bool) -> str:
    x0 = scale.x(span.start)
    x1 = max(scale.x(span.end or today), x0 + 2)
    until = span.end.isoformat() if span.end else ("lost" if span.lost else "now")
    tip = escape(f"{span.label}: {span.start.isoformat()} to {until}")
    if bench:
        shape = (
            f'<rect x="{x0:.1f}" y="{top + 8}" width="{x1 - x0:.1f}" height="8" '
            f'fill="{_BENCH_FILL}"/>'
        )
    elif span.lost:
        shape = (
            f'<rect x="{x0:.1f}" y="{top + 4}" width="{x1 - x0:.1f}" height="16" fill="#fff" '
            f'stroke="{_OVERDUE_FILL}" stroke-dasharray="3 2"/>'
        )
    else:
        shape = (
            f'<rect x="{x0:.1f}" y="{top + 4}" width="{x1 - x0:.1f}" height="16" '
            f'fill="{_DEPLOYED_FILL}" stroke="{_DEPLOYED_EDGE}"/>'
        )
    return f"<g><title>{tip}</title>{shape}</g>"


def _due_mark(day: dt.date, item: str, scale: _Scale, top: float, today: dt.date) -> str:
    xx = scale.x(day)
    fill = _OVERDUE_FILL if day <= today else "#fff"
    tip = escape(f"{item}: due {day.isoformat()}")
    return (
        f"<g><title>{tip}</title>"
        f'<path d="M{xx:.1f},{top + 3} l5,9 h-10 z" fill="{fill}" stroke="#000"/></g>'
    )


def _timeline_row(
    row: TimelineRow, index: int, scale: _Scale, today: dt.date, unit_url: Callable[[str], str]
) -> list[str]:
    top = TIMELINE_HEAD + index * TIMELINE_ROW
    href = escape(unit_url(row.serial), {'"': "&quot;"})
    out = [
        f'<a href="{href}"><text x="4" y="{top + 16}" fill="#0b5c7a" '
        f'text-decoration="underline">{escape(row.serial)}</text></a>'
    ]
    out += [_span_rect(s, scale, top, today, bench=False) for s in row.deployments]
    out += [_span_rect(s, scale, top, today, bench=True) for s in row.visits]
    out += [_due_mark(day, item, scale, top, today) for day, item in row.due]
    return out


def _timeline_key(top: float) -> list[str]:
    y = top + 18
    return [
        f'<rect x="4" y="{y - 12}" width="22" height="14" fill="{_DEPLOYED_FILL}" '
        f'stroke="{_DEPLOYED_EDGE}"/><text x="30" y="{y}">deployed</text>',
        f'<rect x="110" y="{y - 12}" width="22" height="14" fill="#fff" stroke="{_OVERDUE_FILL}" '
        f'stroke-dasharray="3 2"/><text x="136" y="{y}">lost (held)</text>',
        f'<rect x="230" y="{y - 9}" width="22" height="8" fill="{_BENCH_FILL}"/>'
        f'<text x="256" y="{y}">bench visit</text>',
        f'<path d="M365,{y - 12} l5,9 h-10 z" fill="#fff" stroke="#000"/>'
        f'<text x="376" y="{y}">due</text>',
        f'<path d="M425,{y - 12} l5,9 h-10 z" fill="{_OVERDUE_FILL}" stroke="#000"/>'
        f'<text x="436" y="{y}">due, today or past (overdue)</text>',
    ]


def timeline_svg(
    rows: Sequence[TimelineRow],
    *,
    start: dt.date,
    end: dt.date,
    today: dt.date,
    unit_url: Callable[[str], str],
) -> str:
    """The fleet timeline from ``fleet.selectors.timeline_rows``: per unit, its deployments
    (bars), bench visits (thin dark bars) and due dates (triangles, filled when today or
    past), quarters marked, today a line. Shapes differ as well as colours, for print."""
    scale = _Scale(start, end)
    height = TIMELINE_HEAD + TIMELINE_ROW * len(rows) + TIMELINE_FOOT
    out = [
        f'<svg xmlns="http://www.w3.org/2000/svg" width="{TIMELINE_WIDTH}" height="{height}" '
        f'viewBox="0 0 {TIMELINE_WIDTH} {height}" font-family="DejaVu Sans, sans-serif" '
        'font-size="12" role="img" aria-labelledby="timeline-title">',
        f'<title id="timeline-title">Fleet timeline, {start.isoformat()} to {end.isoformat()}'
        "</title>",
        f'<rect width="{TIMELINE_WIDTH}" height="{height}" fill="#fff"/>',
    ]
    out += [
        f'<rect x="0" y="{TIMELINE_HEAD + i * TIMELINE_ROW}" width="{TIMELINE_WIDTH}" '
        f'height="{TIMELINE_ROW}" fill="#f3f5f7"/>'
        for i in range(1, len(rows), 2)
    ]
    out += _timeline_grid(scale, TIMELINE_HEAD + TIMELINE_ROW * len(rows), today)
    for index, row in enumerate(rows):
        out += _timeline_row(row, index, scale, today, unit_url)
    out += _timeline_key(TIMELINE_HEAD + TIMELINE_ROW * len(rows))
    out.append("</svg>")
    return "".join(out)
