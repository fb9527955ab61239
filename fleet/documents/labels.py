"""Asset labels: a sheet of QR labels (serial, variant, unit page address) on A4 or US Letter.

The grid is our own (not any label maker's stock): three columns, eight rows, cut lines drawn
faintly so plain paper can be cut and laminated.
"""

from __future__ import annotations

import datetime as dt
from collections.abc import Callable
from dataclasses import dataclass

from reportlab.lib.pagesizes import A4, LETTER
from reportlab.lib.units import mm
from reportlab.lib.utils import simpleSplit
from reportlab.pdfbase.pdfmetrics import stringWidth
from reportlab.pdfgen.canvas import Canvas

from fleet.models import Transponder

from .base import FONT, FONT_BOLD, MARGIN, RULE, draw_pages, qr_drawing

TITLE = "Asset labels"
PAPERS: dict[str, tuple[float, float]] = {"a4": A4, "letter": LETTER}
COLUMNS = 3
ROWS = 8


@dataclass(frozen=True, slots=True)
class Label:
    serial: str
    variant: str
    url: str


@dataclass(frozen=True, slots=True)
class LabelSheet:
    reference: str
    paper: str
    printed_on: dt.date
    labels: tuple[Label, ...]

    @property
    def per_page(self) -> int:
        return COLUMNS * ROWS

    @property
    def pages(self) -> int:
        return max(1, -(-len(self.labels) // self.per_page))


def prepare_labels(
    units: list[Transponder],
    *,
    paper: str,
    variant_id: int | None,
    on: dt.date,
    url_for: Callable[[Transponder], str],
) -> LabelSheet:
    """``units`` with their variant loaded; ``url_for(unit)`` gives the absolute unit address."""
    if paper not in PAPERS:
        raise ValueError(f"unknown paper {paper!r}")
    scope = f"V{variant_id}" if variant_id is not None else "ALL"
    return LabelSheet(
        reference=f"HF-LB-{paper.upper()}-{scope}-{on.isoformat()}",
        paper=paper,
        printed_on=on,
        labels=tuple(Label(u.serial, u.variant.name, url_for(u)) for u in units),
    )


def _cut(text: str, font: str, size: float, width: float) -> str:
    """Cut with an ellipsis so the text fits ``width`` at ``size``."""
    if stringWidth(text, font, size) <= width:
        return text
    while len(text) > 1 and stringWidth(text + "…", font, size) > width:
        text = text[:-1]
    return text + "…"


def _wrap_chars(text: str, font: str, size: float, width: float) -> list[str]:
    """Break anywhere (serials have no spaces): a serial is never cut on its own label."""
    lines, line = [], ""
    for char in text:
        if line and stringWidth(line + char, font, size) > width:
            lines.append(line)
            line = ""
        line += char
    return [*lines, line]


def render_labels(sheet: LabelSheet) -> bytes:
    page_w, page_h = PAPERS[sheet.paper]
    top = page_h - MARGIN - 4 * mm
    bottom = MARGIN + 4 * mm
    cell_w = (page_w - 2 * MARGIN) / COLUMNS
    cell_h = (top - bottom) / ROWS
    pad = 2.5 * mm
    qr = cell_h - 2 * pad

    def draw(c: Canvas, page: int) -> None:
        chunk = sheet.labels[page * sheet.per_page : (page + 1) * sheet.per_page]
        if not chunk:
            c.setFont(FONT, 10)
            c.drawString(MARGIN, top - 10 * mm, "No units match this selection.")
            return
        for i, label in enumerate(chunk):
            col, row = i % COLUMNS, i // COLUMNS
            x = MARGIN + col * cell_w
            y = top - (row + 1) * cell_h
            c.setStrokeColor(RULE)
            c.setLineWidth(0.3)
            c.setDash(2, 2)
            c.rect(x, y, cell_w, cell_h)
            c.setDash()
            qr_drawing(label.url, qr).drawOn(c, x + pad, y + pad)
            text_x = x + 2 * pad + qr
            text_w = cell_w - qr - 3 * pad
            c.setFillColorRGB(0, 0, 0)
            size = 11.0
            while size > 7 and stringWidth(label.serial, FONT_BOLD, size) > text_w:
                size -= 0.5
            baseline = y + cell_h - pad - size
            for line in _wrap_chars(label.serial, FONT_BOLD, size, text_w):
                c.setFont(FONT_BOLD, size)
                c.drawString(text_x, baseline, line)
                baseline -= size * 1.15
            baseline -= 2
            lines = simpleSplit(label.variant, FONT, 7, text_w) or [""]
            room = max(1, int((baseline - (y + pad + 8)) // 8.5) + 1)
            if len(lines) > room:  # the rest is cut with an ellipsis
                lines = [*lines[: room - 1], _cut(" ".join(lines[room - 1 :]), FONT, 7, text_w)]
            c.setFont(FONT, 7)
            for line in lines:
                c.drawString(text_x, baseline, line)
                baseline -= 8.5
            c.setFont(FONT, 6)
            c.drawString(text_x, y + pad + 1, "Holdfast unit")

    return draw_pages(
        draw,
        sheet.pages,
        title=TITLE,
        reference=sheet.reference,
        when=dt.datetime.combine(sheet.printed_on, dt.time(), tzinfo=dt.UTC),
        pagesize=PAPERS[sheet.paper],
    )
