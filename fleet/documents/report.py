"""Service report: a closed bench visit, every entry of every kind, its amendments (original
and corrected values), photos, and who did what when. Only closed records are reported: an
open one can still change under the paper."""

from __future__ import annotations

import datetime as dt
from dataclasses import dataclass
from pathlib import Path
from typing import Any

from django.core.files.storage import default_storage
from reportlab.lib.units import mm
from reportlab.lib.utils import ImageReader
from reportlab.platypus import (
    CondPageBreak,
    Flowable,
    Image,
    KeepTogether,
    Spacer,
    Table,
    TableStyle,
)

from fleet import selectors
from fleet.cautions import record_cautions
from fleet.charts import Chart, anode_chart, battery_chart
from fleet.due.engine import evaluate_unit, loaded_unit
from fleet.due.history import anode_history, battery_history
from fleet.due.rules import rules_for
from fleet.models import AnodeReading, ServiceRecord

from .base import (
    build_pdf,
    cautions_table,
    display_name,
    facts_table,
    fitted_widths,
    fmt_date,
    fmt_datetime,
    frame_width,
    grid_table,
    para,
    para_bold,
    signature_table,
)
from .chart_drawing import chart_drawing

TITLE = "Service report"


class RecordOpenError(ValueError):
    """A report was asked for an open record."""


@dataclass(frozen=True, slots=True)
class EntrySection:
    """One entry kind: its labels as headers, one row per entry (values in words with their
    units), and, for a test, the verdict as the last column. ``failed`` lists the (row,
    column) cells the verdict failed on: they print bold, with ✖, so a black-and-white copy
    still shows them."""

    title: str
    headers: tuple[str, ...]
    rows: tuple[tuple[str, ...], ...]
    failed: tuple[tuple[int, int], ...] = ()
    singular: str = ""  # one entry's title, "Pressure test"


@dataclass(frozen=True, slots=True)
class AmendmentLine:
    when: dt.datetime
    by: str
    target: str
    field: str
    original: str
    corrected: str
    reason: str


@dataclass(frozen=True, slots=True)
class PhotoLine:
    caption: str
    path: str  # absolute file path in storage; may be gone


@dataclass(frozen=True, slots=True)
class ReportDocument:
    reference: str
    record_id: int
    serial: str
    variant: str
    place: str
    technician: str
    opened_at: dt.datetime
    closed_at: dt.datetime
    closed_by: str
    created_at: dt.datetime
    created_by: str
    summary: str
    sections: tuple[EntrySection, ...]
    amendments: tuple[AmendmentLine, ...]
    photos: tuple[PhotoLine, ...]
    cautions: tuple[str, ...]
    updated_at: dt.datetime | None = None  # the last change after creation, if any
    updated_by: str = ""
    failed_tests: int = 0
    charts: tuple[Chart, ...] = ()
    charts_on: dt.date | None = None


def section_of(section: selectors.EntrySection) -> EntrySection:
    """The page's section of one kind as the report prints it. The "#" column numbers the
    entries within their section (1, 2, ...): the paper never shows a database id."""
    headers = ("#", *section.labels, *(("Verdict",) if section.judged else ()))
    rows = []
    failed = []
    for r, row in enumerate(section.rows):
        cells = [str(r + 1)]
        for c, cell in enumerate(row.cells, start=1):
            if cell.failed:
                failed.append((r, c))
                cells.append(f"✖ {cell.text}")
            else:
                cells.append(cell.text)
        if section.judged:
            cells.append(row.verdict.words if row.verdict is not None else "—")
            if row.verdict is not None and not row.verdict.passed:
                failed.append((r, len(cells) - 1))
        rows.append(tuple(cells))
    return EntrySection(section.title, headers, tuple(rows), tuple(failed), section.singular)


def _photo_path(field: Any) -> str:
    try:
        return str(default_storage.path(field.name))
    except NotImplementedError:  # a remote storage: no local path, skip the photo
        return ""


def prepare_report(record: ServiceRecord, *, charts_on: dt.date | None = None) -> ReportDocument:
    """The report's content. With ``charts_on``, the unit page's charts as of that day too."""
    closed_at = record.closed_at
    if closed_at is None:  # the record is open
        raise RecordOpenError("This record is still open; close it before printing a report.")
    page_sections = selectors.record_sections(
        record=record, rules=rules_for(record.unit.variant), utc=True
    )
    sections = tuple(section_of(s) for s in page_sections if s.rows)
    # (model, pk) -> how the paper names an entry: "Anode reading 2", as the record page does.
    names = selectors.section_entry_names(page_sections)
    photos = [
        PhotoLine(
            f"{names[(AnodeReading, row.entry.pk)]}: {row.entry.position.name}", _photo_path(e)
        )
        for s in page_sections
        for row in s.rows
        if isinstance(row.entry, AnodeReading) and (e := row.entry.photo)
    ]
    failed_tests = sum(
        1 for s in page_sections for row in s.rows if row.verdict and not row.verdict.passed
    )
    amendments = tuple(
        AmendmentLine(
            a.created_at,
            display_name(a.created_by),
            a.target_label,
            a.field_label,
            a.original_words,
            a.corrected_words,
            a.reason,
        )
        for a in selectors.record_amendments(record=record, utc=True, names=names)
    )
    charts = _unit_charts(record, charts_on) if charts_on is not None else ()
    unit = record.unit
    return ReportDocument(
        reference=f"HF-SR-{record.pk}",
        record_id=record.pk,
        serial=unit.serial,
        variant=unit.variant.name,
        place=record.place.name,
        technician=display_name(record.technician),
        opened_at=record.opened_at,
        closed_at=closed_at,
        closed_by=display_name(record.closed_by),
        created_at=record.created_at,
        created_by=display_name(record.created_by),
        updated_at=record.updated_at if record.updated_by_id else None,
        updated_by=display_name(record.updated_by) if record.updated_by_id else "",
        summary=record.summary,
        sections=sections,
        amendments=amendments,
        photos=tuple(photos),
        cautions=tuple(str(c) for c in record_cautions(record)),
        failed_tests=failed_tests,
        charts=charts,
        charts_on=charts_on,
    )


def _unit_charts(record: ServiceRecord, on: dt.date) -> tuple[Chart, ...]:
    """The unit page's charts (each anode position, the battery) as of ``on``."""
    unit = loaded_unit(record.unit_id)
    ev = evaluate_unit(unit, on=on)
    anodes = [anode_history(ev, p.position_id) for p in ev.anodes]
    return (
        *(
            anode_chart(history, serial=unit.serial, today=on)
            for history in anodes
            if history is not None
        ),
        battery_chart(battery_history(ev), serial=unit.serial, today=on),
    )


def _photo_flowable(photo: PhotoLine, max_w: float, max_h: float) -> Image | None:
    """The stored photo scaled into the box; None when the file is missing or unreadable."""
    if not photo.path or not Path(photo.path).is_file():
        return None
    try:
        reader = ImageReader(photo.path)
        w, h = reader.getSize()
    except Exception:  # noqa: BLE001 - a damaged file must not stop the report
        return None
    scale = min(max_w / w, max_h / h, 1.0)
    return Image(photo.path, width=w * scale, height=h * scale)


# A kind with more columns than this prints each entry as its own block of label/value pairs
# (a pressure test has ten values and a verdict: too many for one row of A4).
MAX_GRID_COLUMNS = 8


def _grid(section: EntrySection, width: float) -> list[Flowable]:
    """The section as one table: "#" narrow, the last column twice the others."""
    rows = [section.headers, *section.rows]
    # Each column at least as wide as its longest word (a serial, a date), so none breaks.
    widths = fitted_widths(rows, width)
    body = [
        [para_bold(cell) if (r - 1, c) in section.failed else cell for c, cell in enumerate(row)]
        for r, row in enumerate(rows)
    ]
    return [
        CondPageBreak(30 * mm),
        para(section.title, "h2_flow"),
        grid_table(body, widths),
    ]


def _blocks(section: EntrySection, width: float) -> list[Flowable]:
    """The section as one block per entry: label/value pairs, three to a row, the verdict
    across the foot; each block kept on one page."""
    story: list[Flowable] = [CondPageBreak(40 * mm), para(section.title, "h2_flow")]
    labels = section.headers[1:-1]
    pair_w = width / 3
    for r, row in enumerate(section.rows):
        cells: list[Any] = []
        for c, (label, text) in enumerate(zip(labels, row[1:-1], strict=True), start=1):
            value = para_bold(text) if (r, c) in section.failed else para(text, "cell")
            cells.append([para(label, "small"), value])
        grid = [cells[i : i + 3] for i in range(0, len(cells), 3)]
        grid[-1] += [""] * (3 - len(grid[-1]))
        verdict_failed = (r, len(row) - 1) in section.failed
        verdict = para_bold(row[-1]) if verdict_failed else para(row[-1], "cell")
        head = para_bold(f"{section.singular or section.title} {row[0]}")
        table = Table(
            [[head, "", ""], *grid, [verdict, "", ""]],
            colWidths=[pair_w] * 3,
        )
        box = 2 if verdict_failed else 0.75
        table.setStyle(
            [
                ("SPAN", (0, 0), (-1, 0)),
                ("SPAN", (0, -1), (-1, -1)),
                ("BOX", (0, 0), (-1, -1), box, "black"),
                ("LINEBELOW", (0, 0), (-1, 0), 0.5, "black"),
                ("LINEABOVE", (0, -1), (-1, -1), 0.5, "black"),
                ("VALIGN", (0, 0), (-1, -1), "TOP"),
                ("TOPPADDING", (0, 0), (-1, -1), 1.5),
                ("BOTTOMPADDING", (0, 0), (-1, -1), 2),
            ]
        )
        story += [KeepTogether([table, Spacer(0, 2 * mm)])]
    return story


def _section(section: EntrySection, width: float) -> list[Flowable]:
    if section.headers[-1] == "Verdict" and len(section.headers) > MAX_GRID_COLUMNS:
        return _blocks(section, width)
    return _grid(section, width)


def _facts(doc: ReportDocument, width: float) -> Table:
    pairs = [
        ("Unit serial", doc.serial),
        ("Variant", doc.variant),
        ("Place", doc.place),
        ("Technician", doc.technician),
        ("Opened", fmt_datetime(doc.opened_at)),
        ("Created", f"{fmt_datetime(doc.created_at)} by {doc.created_by}"),
    ]
    if doc.updated_at is not None:
        pairs.append(("Last changed", f"{fmt_datetime(doc.updated_at)} by {doc.updated_by}"))
    pairs.append(("Closed", f"{fmt_datetime(doc.closed_at)} by {doc.closed_by}"))
    return facts_table(pairs, [22 * mm, width / 2 - 22 * mm, 22 * mm, width / 2 - 22 * mm])


def _failed_notice(doc: ReportDocument, width: float) -> list[Flowable]:
    if not doc.failed_tests:
        return []
    box = Table(
        [
            [
                para_bold(
                    f"✖ {doc.failed_tests} test{'s' if doc.failed_tests != 1 else ''} FAILED on "
                    "this visit (marked ✖ below). Do not deploy the unit until each is "
                    "repeated and passes.",
                    "body",
                )
            ]
        ],
        colWidths=[width],
    )
    box.setStyle([("BOX", (0, 0), (-1, -1), 2, "black")])
    return [Spacer(0, 2 * mm), box]


def _amendments(doc: ReportDocument, width: float) -> list[Flowable]:
    if not doc.amendments:
        return []
    return [
        para("Amendments (the original value is kept)", "h2"),
        grid_table(
            [
                ("When", "By", "Entry", "Value", "Original", "Corrected", "Reason"),
                *[
                    (
                        fmt_datetime(a.when),
                        a.by,
                        a.target,
                        a.field,
                        a.original,
                        a.corrected,
                        a.reason,
                    )
                    for a in doc.amendments
                ],
            ],
            [24 * mm, 18 * mm, 24 * mm, 24 * mm, 22 * mm, 22 * mm, width - 134 * mm],
        ),
    ]


def _photos(doc: ReportDocument, width: float) -> list[Flowable]:
    if not doc.photos:
        return []
    story: list[Flowable] = [para("Photos", "h2")]
    for photo in doc.photos:
        image = _photo_flowable(photo, width * 0.6, 70 * mm)
        if image is None:
            story.append(para(f"{photo.caption}: photo file missing, not printed.", "small"))
            continue
        image.hAlign = "LEFT"
        story.append(KeepTogether([image, para(photo.caption, "small"), Spacer(0, 3 * mm)]))
    return story


def _sign_off(doc: ReportDocument, width: float) -> list[Flowable]:
    """Technician and supervisor sign-off, each kept together with its statement."""
    return [
        KeepTogether(
            [
                para("Sign-off", "h2"),
                para(
                    f"Technician ({doc.technician}): the entries above are the work I did and "
                    "the values I read."
                ),
                Spacer(0, 1 * mm),
                signature_table(["Technician"], width),
            ]
        ),
        Spacer(0, 3 * mm),
        KeepTogether(
            [
                para(
                    f"Supervisor ({doc.closed_by}): I have checked every entry, value and "
                    "verdict above" + (", including the failed tests." if doc.failed_tests else ".")
                ),
                Spacer(0, 1 * mm),
                signature_table(["Supervisor"], width),
            ]
        ),
    ]


def _charts_section(doc: ReportDocument, width: float) -> list[Flowable]:
    """The unit page's charts, two to a row."""
    if not doc.charts or doc.charts_on is None:
        return []
    cell = (width - 4 * mm) / 2
    drawings: list[Any] = [chart_drawing(c, cell, 55 * mm) for c in doc.charts]
    if len(drawings) % 2:
        drawings.append("")
    rows = [drawings[i : i + 2] for i in range(0, len(drawings), 2)]
    table = Table(rows, colWidths=[cell + 2 * mm, cell + 2 * mm])
    table.setStyle(
        TableStyle([("LEFTPADDING", (0, 0), (-1, -1), 0), ("VALIGN", (0, 0), (-1, -1), "TOP")])
    )
    # A chart that draws only some of its readings says which, under the charts.
    notes = [para(f"{c.title}: {c.note}.", "small") for c in doc.charts if c.note]
    return [
        CondPageBreak(70 * mm),
        para(f"Charts, as of {fmt_date(doc.charts_on)}", "h2_flow"),
        table,
        *notes,
    ]


def render_report(doc: ReportDocument) -> bytes:
    width = frame_width()
    story: list[Flowable] = [
        para(TITLE, "title"),
        para(f"Bench visit #{doc.record_id} for unit {doc.serial} ({doc.variant})"),
        Spacer(0, 3 * mm),
        _facts(doc, width),
        *_failed_notice(doc, width),
    ]
    if doc.summary:
        story += [para("Summary", "h2"), para(doc.summary)]
    if not doc.sections:
        story += [para("Entries", "h2"), para("No entries were recorded on this visit.")]
    for section in doc.sections:
        story += _section(section, width)
    story += _amendments(doc, width)
    story += _photos(doc, width)
    story += _charts_section(doc, width)
    # The sign-off signs for what is above it: the cautions and both sign-offs move to a new
    # page together, never leaving a sign-off alone on a last page.
    story += [
        Spacer(0, 4 * mm),
        KeepTogether([cautions_table(doc.cautions, width), *_sign_off(doc, width)]),
    ]
    return build_pdf(story, title=TITLE, reference=doc.reference, when=doc.closed_at)
