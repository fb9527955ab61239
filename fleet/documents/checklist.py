"""Pre-deployment checklist: the readiness checks for one unit, site and period, the manual
items to tick on deck, cautions and sign-off. ``prepare_checklist`` computes everything the
page states (via ``fleet.due.readiness``); ``render_checklist`` turns it into bytes."""

from __future__ import annotations

import datetime as dt
from dataclasses import dataclass

from django.utils import timezone
from django.utils.text import slugify
from reportlab.lib.units import mm
from reportlab.platypus import CondPageBreak, Flowable, KeepTogether, Spacer, Table, TableStyle

from fleet.cautions import Task, unit_cautions
from fleet.due.planned import PlannedDeployment
from fleet.due.readiness import Verdict, readiness_for
from fleet.models import BatteryInstall, Deployment, Transponder

from .base import (
    SHADE,
    QrCode,
    build_pdf,
    cautions_table,
    facts_table,
    fmt_date,
    fmt_datetime,
    frame_width,
    grid_table,
    para,
    para_bold,
    signature_table,
)

TITLE = "Pre-deployment checklist"
NOT_FIT = "✖ NOT FIT TO DEPLOY"


@dataclass(frozen=True, slots=True)
class CheckLine:
    name: str
    verdict: str  # pass / warn / fail
    verdict_label: str  # Pass / Check / Fail
    verdict_icon: str
    numbers: str
    source: str


@dataclass(frozen=True, slots=True)
class ManualItem:
    text: str
    reading: str  # what to write down, "" for a tick only


@dataclass(frozen=True, slots=True)
class OverrideNote:
    """The unit's open deployment went ahead against failed checks."""

    site: str
    over_side_at: dt.datetime
    reason: str
    by: str
    at: dt.datetime
    failed_checks: tuple[str, ...]


@dataclass(frozen=True, slots=True)
class ChecklistDocument:
    reference: str
    prepared_at: dt.datetime
    serial: str
    variant: str
    acoustic_address: str
    turnaround_delay: str
    site_id: int
    site: str
    site_depth_m: float
    start: dt.date
    end: dt.date
    days: int
    interrogations_per_day: int
    power_step: int
    verdict: str
    verdict_label: str
    verdict_icon: str
    checks: tuple[CheckLine, ...]
    manual_items: tuple[ManualItem, ...]
    cautions: tuple[str, ...]
    unit_url: str
    override: OverrideNote | None = None


def checklist_reference(serial: str, start: dt.date, site: str) -> str:
    """The printed reference: unit, start and site by name (site names are unique), never a
    database id: ``HF-CL-TX-0001-2026-04-10-GREY-SHOAL-ARRAY``."""
    return f"HF-CL-{serial}-{start.isoformat()}-{slugify(site).upper()}"


def manual_items(unit: Transponder, pack: BatteryInstall | None) -> tuple[ManualItem, ...]:
    delay = f"{unit.turnaround_delay_ms:g} ms"
    pack_words = (
        f"pack {pack.pack_serial}, {pack.nominal_voltage_v:g} V nominal, "
        f"{pack.ocv_install_v:g} V at install"
        if pack
        else "no pack recorded as fitted"
    )
    items = [
        ManualItem("Seals inspected, clean and greased; no nicks, set or debris", ""),
        ManualItem("Vent plug fitted and tight", ""),
        ManualItem("Anodes tight, bonded and not painted over", "bond ______ Ω"),
        ManualItem("Flotation collar fitted and secured (or not used on this job)", ""),
    ]
    if unit.variant.release_fitted:
        items.append(ManualItem("Release latched and hook safe; safety pin removed at launch", ""))
    items += [
        ManualItem(
            f"Acoustic address {unit.acoustic_address} and turnaround delay {delay} "
            "set and verified on deck with the deck unit",
            "read back ______ / ______ ms",
        ),
        ManualItem(f"Battery volts recorded ({pack_words})", "______ V open circuit"),
    ]
    return tuple(items)


def prepare_checklist(
    unit: Transponder,
    planned: PlannedDeployment,
    *,
    at: dt.datetime,
    unit_url: str,
) -> ChecklistDocument:
    """Everything the checklist states for ``planned``, prepared at ``at``."""
    readiness = readiness_for(unit, planned, on=timezone.localdate(at))
    site, start, days = planned.site, planned.start, planned.days
    pack = BatteryInstall.objects.filter(unit=unit, removal__isnull=True).first()
    verdict = readiness.verdict
    in_water = (
        Deployment.objects.filter(unit=unit, recovered_at__isnull=True)
        .select_related("site", "override_by")
        .first()
    )
    override = (
        OverrideNote(
            site=in_water.site.name,
            over_side_at=in_water.over_side_at,
            reason=in_water.override_reason,
            by=str(in_water.override_by),
            # deployment_start sets the time together with the reason; the field allows null.
            at=in_water.override_at,  # type: ignore[arg-type]
            failed_checks=tuple(in_water.override_check_lines),
        )
        if in_water is not None and in_water.overridden
        else None
    )
    return ChecklistDocument(
        reference=checklist_reference(unit.serial, start, site.name),
        prepared_at=at,
        serial=unit.serial,
        variant=unit.variant.name,
        acoustic_address=unit.acoustic_address,
        turnaround_delay=f"{unit.turnaround_delay_ms:g} ms",
        site_id=site.pk,
        site=site.name,
        site_depth_m=site.water_depth_m,
        start=start,
        end=readiness.end,
        days=days,
        interrogations_per_day=readiness.interrogations_per_day,
        power_step=readiness.power_step,
        verdict=verdict.value,
        verdict_label=verdict.label,
        verdict_icon=verdict.icon,
        checks=tuple(
            CheckLine(c.name, c.verdict.value, c.verdict.label, c.verdict.icon, c.numbers, c.source)
            for c in readiness.checks
        ),
        manual_items=manual_items(unit, pack),
        cautions=tuple(str(c) for c in unit_cautions(unit, tasks=[Task.DEPLOY])),
        unit_url=unit_url,
        override=override,
    )


def verdict_cell(label: str, icon: str) -> str:
    """Word and icon shape, so a black-and-white copy still reads."""
    return f"{icon} {label}"


def not_fit_box(doc: ChecklistDocument, width: float) -> list[Flowable]:
    """On a failing checklist: what failed and what it means, before anything else."""
    if doc.verdict != Verdict.FAIL:
        return []
    failed = [c.name for c in doc.checks if c.verdict == Verdict.FAIL]
    box = Table(
        [
            [para_bold(f"{NOT_FIT}: {len(failed)} automated check(s) failed", "verdict")],
            [para(f"Failed: {', '.join(failed)}.")],
            [
                para(
                    "Do not deploy this unit. Fix the failures and print a new checklist, or "
                    "a supervisor writes the reason to deploy regardless below, and the same "
                    "reason is recorded with the deployment."
                )
            ],
        ],
        colWidths=[width],
    )
    box.setStyle(
        TableStyle(
            [
                ("BOX", (0, 0), (-1, -1), 3, "black"),
                ("TOPPADDING", (0, 0), (-1, -1), 3),
                ("BOTTOMPADDING", (0, 0), (-1, -1), 4),
            ]
        )
    )
    return [box, Spacer(0, 3 * mm)]


def sign_off(doc: ChecklistDocument, width: float) -> Flowable:
    """A plain sign-off when every check passed or asks only to be checked; on a failing
    checklist the supervisor's override, with lines for the reason, instead."""
    if doc.verdict != Verdict.FAIL:
        return KeepTogether(
            [para("Sign-off", "h2"), signature_table(["Technician", "Supervisor"], width)]
        )
    lines = Table([[""] for _ in range(4)], colWidths=[width], rowHeights=[8 * mm] * 4)
    lines.setStyle(TableStyle([("LINEBELOW", (0, 0), (-1, -1), 0.5, "black")]))
    return KeepTogether(
        [
            para(f"Supervisor's override ({NOT_FIT})", "h2"),
            para(
                "Only if the unit must go despite the failed checks above. Reason for deploying "
                "it regardless, and what was done to make that safe:"
            ),
            lines,
            Spacer(0, 2 * mm),
            signature_table(["Technician (checks done as listed)", "Supervisor (override)"], width),
        ]
    )


def override_section(note: OverrideNote | None, width: float) -> list[Flowable]:
    """A boxed notice when the unit's open deployment went ahead against failed checks."""
    if note is None:
        return []
    lines = [
        para_bold("Deployed against a failed check", "h2"),
        para(
            f"Over the side at {note.site} on {fmt_datetime(note.over_side_at)}. "
            f"Reason: {note.reason}"
        ),
        para(f"By {note.by}, {fmt_datetime(note.at)}"),
        para("Failed checks as they read then:"),
        *(para(f"✖ {line}") for line in note.failed_checks),
    ]
    box = Table([[lines]], colWidths=[width])
    box.setStyle(
        TableStyle(
            [
                ("BOX", (0, 0), (-1, -1), 2, "black"),
                ("TOPPADDING", (0, 0), (-1, -1), 3),
                ("BOTTOMPADDING", (0, 0), (-1, -1), 5),
            ]
        )
    )
    return [box, Spacer(0, 3 * mm)]


def render_checklist(doc: ChecklistDocument) -> bytes:
    width = frame_width()
    qr_size = 26 * mm
    head = Table(
        [
            [
                [
                    para(TITLE, "title"),
                    para(
                        f"Unit {doc.serial} ({doc.variant}) to {doc.site}, "
                        f"{fmt_date(doc.start)} to {fmt_date(doc.end)}"
                    ),
                ],
                [QrCode(doc.unit_url, qr_size), para("Scan: unit page", "small")],
            ]
        ],
        colWidths=[width - qr_size - 4 * mm, qr_size + 4 * mm],
    )
    head.setStyle(
        TableStyle([("VALIGN", (0, 0), (-1, -1), "TOP"), ("LEFTPADDING", (0, 0), (-1, -1), 0)])
    )
    facts = facts_table(
        [
            ("Serial", doc.serial),
            ("Variant", doc.variant),
            ("Site", f"{doc.site}, {doc.site_depth_m:g} m"),
            ("Deployment", f"{fmt_date(doc.start)} to {fmt_date(doc.end)}, {doc.days} days"),
            ("Acoustic address", doc.acoustic_address),
            ("Turnaround delay", doc.turnaround_delay),
            ("Duty", f"{doc.interrogations_per_day} replies a day, power step {doc.power_step}"),
            ("Prepared", fmt_datetime(doc.prepared_at)),
        ],
        [24 * mm, width / 2 - 24 * mm, 24 * mm, width / 2 - 24 * mm],
    )
    overall = Table(
        [
            [
                para_bold(
                    "Automated checks overall: "
                    + verdict_cell(doc.verdict_label, doc.verdict_icon),
                    "verdict",
                )
            ]
        ],
        colWidths=[width],
    )
    overall.setStyle(
        TableStyle(
            [
                ("BOX", (0, 0), (-1, -1), 2 if doc.verdict == Verdict.FAIL else 1, "black"),
                ("BACKGROUND", (0, 0), (-1, -1), SHADE),
                ("TOPPADDING", (0, 0), (-1, -1), 3),
                ("BOTTOMPADDING", (0, 0), (-1, -1), 5),
            ]
        )
    )
    check_rows = [["Check", "Verdict", "Numbers", "Source"]]
    fails = []
    for i, c in enumerate(doc.checks, start=1):
        check_rows.append(
            [c.name, verdict_cell(c.verdict_label, c.verdict_icon), c.numbers, c.source]
        )
        if c.verdict == Verdict.FAIL:
            fails.append(("BOX", (1, i), (1, i), 1.5, "black"))
    checks = grid_table(
        check_rows,
        [32 * mm, 17 * mm, width - 32 * mm - 17 * mm - 45 * mm, 45 * mm],
        extra=fails,
    )
    manual_rows = [["", "Item", "Reading"]] + [
        [para("☐", "tick"), item.text, item.reading] for item in doc.manual_items
    ]
    manual = grid_table(
        manual_rows,
        [8 * mm, width - 8 * mm - 55 * mm, 55 * mm],
        extra=[("TOPPADDING", (0, 1), (-1, -1), 5), ("BOTTOMPADDING", (0, 1), (-1, -1), 5)],
    )
    story = [
        head,
        Spacer(0, 2 * mm),
        facts,
        Spacer(0, 3 * mm),
        *override_section(doc.override, width),
        *not_fit_box(doc, width),
        overall,
        CondPageBreak(30 * mm),
        para("Automated checks", "h2_flow"),
        checks,
        # The sign-off signs for the manual checks: they, the cautions and the sign-off move
        # to a new page together rather than leave the sign-off alone on a last page.
        KeepTogether(
            [
                para("Manual checks on deck", "h2_flow"),
                manual,
                Spacer(0, 4 * mm),
                cautions_table(doc.cautions, width),
                sign_off(doc, width),
            ]
        ),
    ]
    return build_pdf(
        story,
        title=TITLE,
        reference=doc.reference,
        when=doc.prepared_at,
        banner=NOT_FIT if doc.verdict == Verdict.FAIL else "",
    )
