"""Service report: a closed bench visit, every entry of every kind, its amendments (original
and corrected values), photos, and who did what when. Only closed records are reported: an
open one can still change under the paper."""

from __future__ import annotations

import datetime as dt
from collections.abc import Callable
from dataclasses import dataclass
from functools import partial
from pathlib import Path
from typing import Any

from django.core.files.storage import default_storage
from django.db import models
from django.utils.text import capfirst
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

from fleet.charts import Chart, anode_chart, battery_chart
from fleet.due.engine import evaluate_unit, fleet_queryset
from fleet.due.history import anode_history, battery_history
from fleet.models import (
    AnodeReading,
    BatteryInstall,
    HousingOpening,
    PressureTest,
    ReleaseTest,
    SealChange,
    SensorCheck,
    ServiceRecord,
    Transponder,
)
from fleet.models.records import Entry, amendable_field, entry_kinds

from .base import (
    CAUTIONS,
    build_pdf,
    cautions_table,
    display_name,
    facts_table,
    fitted_widths,
    fmt_date,
    fmt_datetime,
    fmt_number,
    frame_width,
    grid_table,
    para,
    signature_table,
)
from .chart_drawing import chart_drawing

TITLE = "Service report"


class RecordOpenError(ValueError):
    """A report was asked for an open record."""


@dataclass(frozen=True, slots=True)
class EntrySection:
    title: str
    headers: tuple[str, ...]
    rows: tuple[tuple[str, ...], ...]


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
    charts: tuple[Chart, ...] = ()
    charts_on: dt.date | None = None


def _yes(value: bool) -> str:
    return "yes" if value else "no"


def _n(value: float | None, unit: str = "") -> str:
    return fmt_number(value, unit)


# The report's own columns for an entry kind: (header, getter). A kind not listed here is
# printed with its amendable fields (``_field_columns``). Every section starts with a "#"
# column, the entry's number within its section (1, 2, ...): the paper never shows a
# database id, and amendments and photos name entries by that number.
Column = tuple[str, Callable[[Any], str]]
COLUMNS: dict[type[Entry], tuple[Column, ...]] = {
    AnodeReading: (
        ("Position", lambda e: e.position.name),
        ("Net mass", lambda e: _n(e.mass_g, "g")),
        ("Remaining", lambda e: _n(e.remaining_percent, "%")),
        ("Bond", lambda e: _n(e.bond_resistance_ohm, "Ω")),
        ("Replaced", lambda e: _yes(e.replaced)),
        ("Note", lambda e: e.note),
    ),
    SealChange: (
        ("Position", lambda e: f"{e.position.name} ({e.position.size_label})"),
        ("Material", lambda e: e.material),
        ("Cure date", lambda e: fmt_date(e.cure_date)),
        ("Lot", lambda e: e.lot),
        ("Reason", lambda e: e.get_reason_display()),
    ),
    BatteryInstall: (
        ("Pack", lambda e: e.pack_serial),
        ("Chemistry", lambda e: e.get_chemistry_display()),
        ("Nominal", lambda e: f"{_n(e.nominal_voltage_v, 'V')}, {_n(e.capacity_ah, 'Ah')}"),
        ("Made / installed", lambda e: f"{fmt_date(e.made_on)} / {fmt_date(e.installed_on)}"),
        ("Removed", lambda e: fmt_date(e.removed_on)),
        ("OCV install", lambda e: _n(e.ocv_install_v, "V")),
    ),
    PressureTest: (
        ("Tested", lambda e: fmt_date(e.tested_on)),
        ("Test pressure", lambda e: _n(e.test_pressure_dbar, "dbar")),
        ("Hold", lambda e: _n(e.hold_minutes, "min")),
        (
            "Start → end",
            lambda e: f"{_n(e.start_pressure_dbar)} → {_n(e.end_pressure_dbar, 'dbar')}",
        ),
        (
            "Water",
            lambda e: f"{_n(e.water_temperature_start_c)} → {_n(e.water_temperature_end_c, '°C')}",
        ),
        ("Ingress", lambda e: _yes(e.ingress_found)),
        ("Facility", lambda e: e.facility),
    ),
    ReleaseTest: (
        ("Tested", lambda e: fmt_date(e.tested_on)),
        ("Kind", lambda e: e.get_kind_display()),
        ("Load", lambda e: _n(e.load_kg, "kg")),
        ("Time to release", lambda e: _n(e.seconds_to_release, "s")),
        ("Motor current", lambda e: _n(e.motor_current_a, "A")),
        ("Limit switch", lambda e: _yes(e.limit_switch_ok)),
        ("Acoustic command", lambda e: _yes(e.acoustic_command_ok)),
    ),
    SensorCheck: (
        ("Checked", lambda e: fmt_date(e.checked_on)),
        ("Sensor", lambda e: e.get_sensor_display()),
        ("Reference", lambda e: _n(e.reference_value)),
        ("Unit reads", lambda e: _n(e.unit_reading)),
        ("Error", lambda e: f"{e.error:+.3g}"),
        ("Raw", lambda e: _n(e.raw_resistance_ohm, "Ω")),
    ),
    HousingOpening: (
        ("Opened", lambda e: fmt_datetime(e.opened_at)),
        ("Closed", lambda e: fmt_datetime(e.closed_at)),
        ("Vented first", lambda e: _yes(e.vented_before_opening)),
        ("Pressure found", lambda e: _yes(e.internal_pressure_found)),
        ("Reason", lambda e: e.reason),
    ),
}


def _cell(field: Any, entry: Any) -> str:
    """One field of an entry, printed the way the columns above print its type."""
    value = getattr(entry, field.name)
    if field.choices:
        return str(getattr(entry, f"get_{field.name}_display")())
    if isinstance(field, models.BooleanField):
        return _yes(value)
    if isinstance(field, models.DateTimeField):
        return fmt_datetime(value)
    if isinstance(field, models.DateField):
        return fmt_date(value)
    if isinstance(field, models.FloatField | models.IntegerField | models.DecimalField):
        return _n(value)
    return "" if value is None else str(value)


def _field_columns(kind: type[Entry]) -> tuple[Column, ...]:
    fields = [amendable_field(kind, name) for name in kind.amendable_fields]
    return (*((str(capfirst(f.verbose_name)), partial(_cell, f)) for f in fields),)


def entry_sections() -> tuple[tuple[type[Entry], str, tuple[Column, ...]], ...]:
    """Per entry kind, in the registry's order: the kind, its section title, its columns."""
    return tuple(
        (kind, kind.plural_title(), COLUMNS.get(kind) or _field_columns(kind))
        for kind in entry_kinds()
    )


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
    sections = []
    photos = []
    # (model, pk) -> how the paper names the entry: "anode reading 2".
    names: dict[tuple[type[models.Model], int], str] = {(ServiceRecord, record.pk): "bench visit"}
    for kind, title, columns in entry_sections():
        entries = list(kind.with_list_related(getattr(record, kind.related_name()).order_by("pk")))
        if not entries:
            continue
        for number, e in enumerate(entries, start=1):
            names[(kind, e.pk)] = f"{kind.kind_label} {number}"
        sections.append(
            EntrySection(
                title,
                ("#", *(h for h, _ in columns)),
                tuple(
                    (str(number), *(get(e) for _, get in columns))
                    for number, e in enumerate(entries, start=1)
                ),
            )
        )
        if kind is AnodeReading:
            photos += [
                PhotoLine(
                    f"{capfirst(names[(kind, e.pk)])}: {e.position.name}", _photo_path(e.photo)
                )
                for e in entries
                if isinstance(e, AnodeReading) and e.photo
            ]
    amendments = tuple(
        AmendmentLine(
            a.created_at,
            display_name(a.created_by),
            _entry_name(names, a.target_type.model_class(), a.target_id, a.target_type.name),
            a.field_name,
            a.original_value or "(empty)",
            a.corrected_value or "(empty)",
            a.reason,
        )
        for a in record.amendments.select_related("created_by", "target_type").order_by(
            "created_at", "pk"
        )
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
        summary=record.summary,
        sections=tuple(sections),
        amendments=amendments,
        photos=tuple(photos),
        cautions=(CAUTIONS["pressure"], CAUTIONS["lithium"], CAUTIONS["defer"]),
        charts=charts,
        charts_on=charts_on,
    )


def _entry_name(
    names: dict[tuple[type[models.Model], int], str],
    model: type[models.Model] | None,
    pk: int,
    fallback: str,
) -> str:
    return names.get((model, pk), fallback) if model is not None else fallback


def _unit_charts(record: ServiceRecord, on: dt.date) -> tuple[Chart, ...]:
    """The unit page's charts (each anode position, the battery) as of ``on``."""
    unit = fleet_queryset(Transponder.objects.filter(pk=record.unit_id)).get()
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


def _charts_section(doc: ReportDocument, width: float) -> list[Flowable]:
    """The unit page's charts, two to a row."""
    if not doc.charts:
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
    return [
        CondPageBreak(70 * mm),
        para(f"Charts, as of {fmt_date(doc.charts_on)}", "h2_flow"),
        table,
    ]


def render_report(doc: ReportDocument) -> bytes:
    width = frame_width()
    story: list[Flowable] = [
        para(TITLE, "title"),
        para(f"Bench visit #{doc.record_id} for unit {doc.serial} ({doc.variant})"),
        Spacer(0, 3 * mm),
        facts_table(
            [
                ("Unit serial", doc.serial),
                ("Variant", doc.variant),
                ("Place", doc.place),
                ("Technician", doc.technician),
                ("Opened", fmt_datetime(doc.opened_at)),
                ("Closed", f"{fmt_datetime(doc.closed_at)} by {doc.closed_by}"),
                ("Created", f"{fmt_datetime(doc.created_at)} by {doc.created_by}"),
            ],
            [22 * mm, width / 2 - 22 * mm, 22 * mm, width / 2 - 22 * mm],
        ),
    ]
    if doc.summary:
        story += [para("Summary", "h2"), para(doc.summary)]
    if not doc.sections:
        story += [para("Entries", "h2"), para("No entries were recorded on this visit.")]
    for section in doc.sections:
        # Each column at least as wide as its longest word (a serial, a date), so none breaks.
        widths = fitted_widths([section.headers, *section.rows], width)
        story += [
            CondPageBreak(30 * mm),
            para(section.title, "h2_flow"),
            grid_table([section.headers, *section.rows], widths),
        ]
    if doc.amendments:
        story += [
            para("Amendments (the original value is kept)", "h2"),
            grid_table(
                [
                    ("When", "By", "Entry", "Field", "Original", "Corrected", "Reason"),
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
                [24 * mm, 18 * mm, 22 * mm, 22 * mm, 24 * mm, 24 * mm, width - 134 * mm],
            ),
        ]
    if doc.photos:
        story.append(para("Photos", "h2"))
        for photo in doc.photos:
            image = _photo_flowable(photo, width * 0.6, 70 * mm)
            if image is None:
                story.append(para(f"{photo.caption}: photo file missing, not printed.", "small"))
                continue
            image.hAlign = "LEFT"
            story.append(KeepTogether([image, para(photo.caption, "small"), Spacer(0, 3 * mm)]))
    story += _charts_section(doc, width)
    # The review signs for what is above it: cautions and sign-off move together, never
    # leaving the sign-off alone on a last page.
    story += [
        Spacer(0, 4 * mm),
        KeepTogether(
            [
                cautions_table(doc.cautions, width),
                para("Review", "h2"),
                signature_table(["Reviewed by (supervisor)"], width),
            ]
        ),
    ]
    return build_pdf(story, title=TITLE, reference=doc.reference, when=doc.closed_at)
