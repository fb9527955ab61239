"""Shared look and plumbing for every Holdfast PDF.

- Fonts: DejaVu Sans, vendored beside this module (licence in ``fonts/``), so ✔ ✖ ☐ ≤ Ω °
  print on a machine without system fonts. The base-14 fonts lack most of them.
- ``para(text)``: the only way user text reaches a reportlab ``Paragraph``. Paragraph parses
  markup, so ``<A`` crashes it and ``S&P`` is corrupted; everything is escaped first.
- ``build_pdf``: page header (title, document reference) and footer ("page N of M"), drawn
  after the last page is laid out so the total is known. ``invariant=1`` and a creation date
  taken from the document's own date make the same input give the same bytes.
"""

from __future__ import annotations

import datetime as dt
import io
from collections.abc import Callable, Sequence
from pathlib import Path
from typing import Any
from xml.sax.saxutils import escape

from reportlab.graphics.barcode.qr import QrCodeWidget
from reportlab.graphics.shapes import Drawing
from reportlab.lib import colors
from reportlab.lib.enums import TA_LEFT
from reportlab.lib.pagesizes import A4
from reportlab.lib.styles import ParagraphStyle
from reportlab.lib.units import mm
from reportlab.pdfbase import pdfmetrics
from reportlab.pdfbase.ttfonts import TTFont
from reportlab.pdfgen import canvas as rl_canvas
from reportlab.platypus import Flowable, Paragraph, SimpleDocTemplate, Table, TableStyle

FONT_DIR = Path(__file__).resolve().parent / "fonts"
FONT = "HoldfastSans"
FONT_BOLD = "HoldfastSans-Bold"

MARGIN = 16 * mm

INK = colors.black
RULE = colors.Color(0.55, 0.55, 0.55)
SHADE = colors.Color(0.92, 0.92, 0.92)


def register_fonts() -> None:
    """Register the vendored DejaVu faces once per process (idempotent)."""
    if FONT in pdfmetrics.getRegisteredFontNames():
        return
    pdfmetrics.registerFont(TTFont(FONT, str(FONT_DIR / "DejaVuSans.ttf")))
    pdfmetrics.registerFont(TTFont(FONT_BOLD, str(FONT_DIR / "DejaVuSans-Bold.ttf")))
    pdfmetrics.registerFontFamily(
        FONT, normal=FONT, bold=FONT_BOLD, italic=FONT, boldItalic=FONT_BOLD
    )


register_fonts()


def _style(name: str, **kwargs: Any) -> ParagraphStyle:
    kwargs.setdefault("fontName", FONT)
    kwargs.setdefault("fontSize", 9)
    kwargs.setdefault("leading", kwargs["fontSize"] * 1.3)
    kwargs.setdefault("alignment", TA_LEFT)
    return ParagraphStyle(name, **kwargs)


STYLES: dict[str, ParagraphStyle] = {
    "body": _style("body"),
    "small": _style("small", fontSize=7.5),
    "cell": _style("cell", fontSize=8),
    "cell_bold": _style("cell_bold", fontSize=8, fontName=FONT_BOLD),
    "title": _style("title", fontSize=16, fontName=FONT_BOLD, spaceAfter=2 * mm),
    "h2": _style(
        "h2",
        fontSize=11,
        fontName=FONT_BOLD,
        spaceBefore=4 * mm,
        spaceAfter=1.5 * mm,
        keepWithNext=1,
    ),
    # For a heading over a long table that may split across pages: keepWithNext would move
    # the whole table to the next page; callers put a CondPageBreak before it instead.
    "h2_flow": _style(
        "h2_flow", fontSize=11, fontName=FONT_BOLD, spaceBefore=4 * mm, spaceAfter=1.5 * mm
    ),
    "tick": _style("tick", fontSize=13, leading=14),
    "verdict": _style("verdict", fontSize=13, fontName=FONT_BOLD),
    "caution": _style("caution", fontSize=8, leftIndent=3 * mm),
}


def para(text: object, style: str | ParagraphStyle = "body") -> Paragraph:
    """A paragraph of literal text: ``<``, ``>`` and ``&`` print as themselves; newlines break.

    This is the only door from data to ``Paragraph``; never pass user text to it directly.
    """
    safe = escape("" if text is None else str(text)).replace("\n", "<br/>")
    return Paragraph(safe, STYLES[style] if isinstance(style, str) else style)


def para_bold(text: object, style: str = "cell") -> Paragraph:
    """Literal text in the bold face (by style, not by markup)."""
    base = STYLES[style]
    return para(text, ParagraphStyle(f"{base.name}-bold", parent=base, fontName=FONT_BOLD))


def fmt_date(value: dt.date | None) -> str:
    return value.isoformat() if value else "—"


def fmt_datetime(value: dt.datetime | None) -> str:
    """UTC, to the minute: the same instant prints the same on every server."""
    if value is None:
        return "—"
    return value.astimezone(dt.UTC).strftime("%Y-%m-%d %H:%M UTC")


def fmt_number(value: float | None, unit: str = "", places: int | None = None) -> str:
    if value is None:
        return "—"
    text = f"{value:.{places}f}" if places is not None else f"{value:g}"
    return f"{text} {unit}".rstrip()


def display_name(user: Any) -> str:
    if user is None:
        return "—"
    full = (user.get_full_name() or "").strip()
    return full or user.get_username()


class QrCode(Flowable):
    """The built-in QR widget (it decodes correctly), scaled to a square of ``size`` points."""

    def __init__(self, value: str, size: float = 28 * mm) -> None:
        super().__init__()
        self.value = value
        self.size = size
        self.width = self.height = size

    def drawing(self) -> Drawing:
        return qr_drawing(self.value, self.size)

    def draw(self) -> None:
        self.drawing().drawOn(self.canv, 0, 0)


def qr_drawing(value: str, size: float) -> Drawing:
    # The widget drawn at ``size`` itself: asking it for its bounds to scale it would
    # encode the value a second time (the encoding tries every mask pattern).
    widget = QrCodeWidget(value, barLevel="M", barBorder=2, barWidth=size, barHeight=size)
    drawing = Drawing(size, size)
    drawing.add(widget)
    return drawing


def grid_table(
    rows: Sequence[Sequence[Any]],
    widths: Sequence[float],
    *,
    header: bool = True,
    extra: Sequence[tuple[Any, ...]] = (),
) -> Table:
    """A ruled table; cells that are plain strings are wrapped in ``para`` (escaped)."""
    body = [
        [
            para(c, "cell_bold" if header and i == 0 else "cell") if isinstance(c, str) else c
            for c in r
        ]
        for i, r in enumerate(rows)
    ]
    table = Table(body, colWidths=list(widths), repeatRows=1 if header else 0)
    style: list[tuple[Any, ...]] = [
        ("GRID", (0, 0), (-1, -1), 0.5, RULE),
        ("VALIGN", (0, 0), (-1, -1), "TOP"),
        ("LEFTPADDING", (0, 0), (-1, -1), 3),
        ("RIGHTPADDING", (0, 0), (-1, -1), 3),
        ("TOPPADDING", (0, 0), (-1, -1), 2),
        ("BOTTOMPADDING", (0, 0), (-1, -1), 3),
    ]
    if header:
        style.append(("BACKGROUND", (0, 0), (-1, 0), SHADE))
    table.setStyle(TableStyle([*style, *extra]))
    return table


def fitted_widths(
    rows: Sequence[Sequence[str]], total: float, *, font_size: float = 8, padding: float = 7
) -> list[float]:
    """Column widths for ``grid_table`` that add up to ``total`` and, where they fit, keep each
    column at least as wide as its longest word, so a serial or a date never breaks.

    Each column first gets its longest word; what is left is shared in proportion to how much
    more each column's longest cell would like, capped at its longest cell; anything still
    left goes to the last column (the note or reason). If even the longest words do not fit,
    the columns shrink in proportion to them.
    """
    register_fonts()
    columns = list(zip(*rows, strict=True))

    def measure(text: str) -> float:
        return pdfmetrics.stringWidth(text, FONT_BOLD, font_size) + padding

    least = [max(measure(w) for cell in col for w in (cell.split() or [""])) for col in columns]
    most = [
        max(max(measure(cell) for cell in col), lo) for col, lo in zip(columns, least, strict=True)
    ]
    if sum(least) >= total:
        return [total * w / sum(least) for w in least]
    spare = total - sum(least)
    wants = [hi - lo for lo, hi in zip(least, most, strict=True)]
    share = min(1.0, spare / sum(wants)) if sum(wants) else 0.0
    widths = [lo + want * share for lo, want in zip(least, wants, strict=True)]
    widths[-1] += total - sum(widths)
    return widths


def facts_table(pairs: Sequence[tuple[str, str]], widths: Sequence[float]) -> Table:
    """Label/value pairs, two pairs to a row when ``widths`` has four columns."""
    per_row = len(widths) // 2
    rows = []
    for start in range(0, len(pairs), per_row):
        row: list[Any] = []
        for label, value in pairs[start : start + per_row]:
            row += [para(label, "small"), para_bold(value, "cell")]
        row += [""] * (len(widths) - len(row))
        rows.append(row)
    table = Table(rows, colWidths=list(widths))
    table.setStyle(
        TableStyle(
            [
                ("VALIGN", (0, 0), (-1, -1), "TOP"),
                ("LINEBELOW", (0, 0), (-1, -1), 0.25, RULE),
                ("LEFTPADDING", (0, 0), (-1, -1), 2),
                ("TOPPADDING", (0, 0), (-1, -1), 2),
                ("BOTTOMPADDING", (0, 0), (-1, -1), 3),
            ]
        )
    )
    return table


def signature_table(roles: Sequence[str], width: float) -> Table:
    """One block per role: name, signature, date and time, with room to write by hand."""
    label_w = 26 * mm
    rows: list[list[Any]] = []
    style: list[tuple[Any, ...]] = [
        ("VALIGN", (0, 0), (-1, -1), "BOTTOM"),
        ("LEFTPADDING", (0, 0), (-1, -1), 3),
        ("BOX", (0, 0), (-1, -1), 0.75, INK),
    ]
    for role in roles:
        top = len(rows)
        rows.append([para_bold(role, "cell"), "", "", ""])
        rows.append([para("Name", "small"), "", para("Signature", "small"), ""])
        rows.append([para("Date", "small"), "", para("Time", "small"), ""])
        style += [
            ("SPAN", (0, top), (-1, top)),
            ("BACKGROUND", (0, top), (-1, top), SHADE),
            ("LINEABOVE", (0, top), (-1, top), 0.75, INK),
            ("LINEBELOW", (1, top + 1), (1, top + 2), 0.5, RULE),
            ("LINEBELOW", (3, top + 1), (3, top + 2), 0.5, RULE),
        ]
    half = (width - 2 * label_w) / 2
    table = Table(
        rows,
        colWidths=[label_w, half, label_w, half],
        rowHeights=[None if i % 3 == 0 else 9 * mm for i in range(len(rows))],
    )
    table.setStyle(TableStyle(style))
    return table


def cautions_table(cautions: Sequence[str], width: float) -> Table:
    rows = [[para_bold("⚠ Cautions", "cell")]] + [[para(f"▸ {c}", "caution")] for c in cautions]
    table = Table(rows, colWidths=[width])
    table.setStyle(
        TableStyle(
            [
                ("BOX", (0, 0), (-1, -1), 1.2, INK),
                ("BACKGROUND", (0, 0), (-1, 0), SHADE),
                ("LEFTPADDING", (0, 0), (-1, -1), 4),
                ("TOPPADDING", (0, 0), (-1, -1), 1.5),
                ("BOTTOMPADDING", (0, 0), (-1, -1), 1.5),
            ]
        )
    )
    return table


def _numbered_canvas(
    title: str, reference: str, when: dt.datetime, banner: str = ""
) -> type[rl_canvas.Canvas]:
    """A canvas that holds its pages until the end, then draws header and "page N of M";
    ``banner`` (a warning such as "NOT FIT TO DEPLOY") goes in bold in both, on every page."""
    stamp = when.astimezone(dt.UTC).strftime("D:%Y%m%d%H%M%S+00'00'")

    class NumberedCanvas(rl_canvas.Canvas):
        def __init__(self, *args: Any, **kwargs: Any) -> None:
            super().__init__(*args, **kwargs)
            self._pages: list[dict[str, Any]] = []
            # The creation date is the document's own date, not the clock.
            self.setDateFormatter(lambda *_: stamp)

        def showPage(self) -> None:  # noqa: N802 (reportlab's name)
            self._pages.append(dict(self.__dict__))
            self._startPage()  # type: ignore[attr-defined]  # reportlab's own page reset, unstubbed

        def save(self) -> None:
            total = len(self._pages)
            for number, state in enumerate(self._pages, start=1):
                self.__dict__.update(state)
                self._furniture(number, total)
                super().showPage()
            super().save()

        def _furniture(self, number: int, total: int) -> None:
            width, height = self._pagesize  # type: ignore[attr-defined]  # unstubbed page size
            self.saveState()
            self.setFont(FONT_BOLD, 8)
            self.setFillColor(INK)
            self.drawString(MARGIN, height - MARGIN + 2 * mm, f"Holdfast · {title}")
            self.setFont(FONT, 8)
            self.drawRightString(width - MARGIN, height - MARGIN + 2 * mm, reference)
            self.setStrokeColor(RULE)
            self.setLineWidth(0.5)
            self.line(MARGIN, height - MARGIN, width - MARGIN, height - MARGIN)
            self.line(MARGIN, MARGIN, width - MARGIN, MARGIN)
            self.drawString(MARGIN, MARGIN - 4.5 * mm, reference)
            self.drawRightString(width - MARGIN, MARGIN - 4.5 * mm, f"page {number} of {total}")
            if banner:
                self.setFont(FONT_BOLD, 10)
                self.drawCentredString(width / 2, height - MARGIN + 2 * mm, banner)
                self.drawCentredString(width / 2, MARGIN - 4.5 * mm, banner)
            self.restoreState()

    return NumberedCanvas


def build_pdf(
    story: list[Flowable],
    *,
    title: str,
    reference: str,
    when: dt.datetime,
    pagesize: tuple[float, float] = A4,
    banner: str = "",
) -> bytes:
    """Lay ``story`` out on ``pagesize`` with the running header and footer (and ``banner``
    in both, on every page); return the bytes."""
    out = io.BytesIO()
    doc = SimpleDocTemplate(
        out,
        pagesize=pagesize,
        leftMargin=MARGIN,
        rightMargin=MARGIN,
        topMargin=MARGIN + 3 * mm,
        bottomMargin=MARGIN + 3 * mm,
        title=f"{title} {reference}",
        author="Holdfast",
        creator="Holdfast",
        invariant=1,
    )
    doc.build(story, canvasmaker=_numbered_canvas(title, reference, when, banner))
    return out.getvalue()


def draw_pages(
    draw: Callable[[rl_canvas.Canvas, int], None],
    pages: int,
    *,
    title: str,
    reference: str,
    when: dt.datetime,
    pagesize: tuple[float, float],
) -> bytes:
    """For documents drawn directly on the canvas (label sheets): same header, footer, bytes."""
    out = io.BytesIO()
    canvas_class = _numbered_canvas(title, reference, when)
    c = canvas_class(out, pagesize=pagesize, invariant=1)
    c.setTitle(f"{title} {reference}")
    c.setAuthor("Holdfast")
    c.setCreator("Holdfast")
    for index in range(pages):
        draw(c, index)
        c.showPage()
    c.save()
    return out.getvalue()


def frame_width(pagesize: tuple[float, float] = A4) -> float:
    """Width a flowable may take: the page less margins and the frame's 6 pt padding each side."""
    return pagesize[0] - 2 * MARGIN - 12
