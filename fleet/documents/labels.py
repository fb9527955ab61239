"""Asset labels: a sheet of QR labels (serial, variant, unit page address) on A4 or US Letter.

The grid is our own (not any label maker's stock): three columns, eight rows, cut lines drawn
faintly so plain paper can be cut and laminated. When the workshop has set an "if found,
contact" line (``LabelSetting``), each label prints it across its foot, on at most two lines
(cut with an ellipsis beyond), and the code shrinks to make room.
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
    contact: str = ""  # the "if found, contact" line, empty for none

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
    contact: str = "",
    scope: str | None = None,
) -> LabelSheet:
    """``units`` with their variant loaded; ``url_for(unit)`` gives the absolute unit address.
    ``scope`` names the selection in the reference (default: the variant's id, or ALL)."""
    if paper not in PAPERS:
        raise ValueError(f"unknown paper {paper!r}")
    if scope is None:
        scope = f"V{variant_id}" if variant_id is not None else "ALL"
    return LabelSheet(
        reference=f"HF-LB-{paper.upper()}-{scope}-{on.isoformat()}",
        paper=paper,
        printed_on=on,
        labels=tuple(Label(u.serial, u.variant.name, url_for(u)) for u in units),
        contact=contact.strip(),
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


CONTACT_SIZE = 6.0
CONTACT_LEADING = 7.0
CONTACT_LINES = 2


def contact_lines(contact: str, width: float) -> list[str]:
    """The contact line as it prints: "If found, contact: ..." on at most two lines of
    ``width``, the second cut with an ellipsis when it is longer."""
    if not contact:
        return []
    lines = simpleSplit(f"If found, contact: {contact}", FONT, CONTACT_SIZE, width)
    if len(lines) > CONTACT_LINES:
        rest = " ".join(lines[CONTACT_LINES - 1 :])
        lines = [*lines[: CONTACT_LINES - 1], _cut(rest, FONT, CONTACT_SIZE, width)]
    # A word longer than the line (no space to break at) is cut too.
    return [_cut(line, FONT, CONTACT_SIZE, width) for line in lines]


def render_labels(sheet: LabelSheet) -> bytes:
    page_w, page_h = PAPERS[sheet.paper]
    top = page_h - MARGIN - 4 * mm
    bottom = MARGIN + 4 * mm
    cell_w = (page_w - 2 * MARGIN) / COLUMNS
    cell_h = (top - bottom) / ROWS
    pad = 2.5 * mm
    contact = contact_lines(sheet.contact, cell_w - 2 * pad)
    band = CONTACT_LINES * CONTACT_LEADING + 2 if contact else 0.0
    qr = cell_h - 2 * pad - band

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
            qr_drawing(label.url, qr).drawOn(c, x + pad, y + pad + band)
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
            floor = y + pad + band
            room = max(1, int((baseline - (floor + 8)) // 8.5) + 1)
            if len(lines) > room:  # the rest is cut with an ellipsis
                lines = [*lines[: room - 1], _cut(" ".join(lines[room - 1 :]), FONT, 7, text_w)]
            c.setFont(FONT, 7)
            for line in lines:
                c.drawString(text_x, baseline, line)
                baseline -= 8.5
            c.setFont(FONT, 6)
            c.drawString(text_x, floor + 1, "Holdfast unit")
            c.setFont(FONT, CONTACT_SIZE)
            for n, line in enumerate(contact):
                c.drawString(x + pad, y + pad + 1 + (len(contact) - 1 - n) * CONTACT_LEADING, line)

    return draw_pages(
        draw,
        sheet.pages,
        title=TITLE,
        reference=sheet.reference,
        when=dt.datetime.combine(sheet.printed_on, dt.time(), tzinfo=dt.UTC),
        pagesize=PAPERS[sheet.paper],
    )
