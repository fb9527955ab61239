"""Release-test certificate: the values certified at issue against their acceptance values,
the verdict, validity, status, signatures, and where to verify it. Everything comes from the
certificate row (frozen at issue), so a later amendment to the test cannot change the paper.
"""

from __future__ import annotations

import datetime as dt
from dataclasses import dataclass

from django.utils import timezone
from reportlab.lib.units import mm
from reportlab.platypus import Flowable, KeepTogether, Spacer, Table, TableStyle

from fleet.cautions import Task, unit_cautions
from fleet.models import ReleaseCertificate, ReleaseTest

from .base import (
    SHADE,
    QrCode,
    build_pdf,
    cautions_table,
    display_name,
    facts_table,
    fmt_date,
    fmt_datetime,
    fmt_number,
    frame_width,
    grid_table,
    para,
    para_bold,
    signature_table,
)

TITLE = "Release test certificate"


@dataclass(frozen=True, slots=True)
class AcceptanceLine:
    item: str
    measured: str
    acceptance: str
    met: bool | None  # None: recorded for information, no acceptance value


@dataclass(frozen=True, slots=True)
class CertificateDocument:
    number: str
    status: str  # issued / superseded / withdrawn
    status_label: str
    status_note: str
    issued_at: dt.datetime
    issued_by: str
    serial: str
    variant: str
    record_id: int
    tested_on: dt.date
    kind: str
    lines: tuple[AcceptanceLine, ...]
    passed: bool
    verdict_label: str
    verdict_icon: str
    valid_from: dt.date
    valid_until: dt.date
    verify_url: str
    cautions: tuple[str, ...]


def _yes(value: bool) -> str:
    return "confirmed" if value else "not confirmed"


def acceptance_lines(cert: ReleaseCertificate) -> tuple[AcceptanceLine, ...]:
    """The certified values against the acceptance values stored at issue. The overall verdict
    was decided by ``fleet.due.acceptance.release_test_failures``; these marks mirror its tests."""
    return (
        AcceptanceLine(
            "Load on the hook",
            fmt_number(cert.load_kg, "kg") if cert.load_kg else "none",
            "as recorded",
            None,
        ),
        AcceptanceLine(
            "Time to release",
            fmt_number(cert.seconds_to_release, "s"),
            f"≤ {fmt_number(cert.max_seconds, 's')}",
            cert.seconds_to_release <= cert.max_seconds,
        ),
        AcceptanceLine(
            "Peak motor current",
            fmt_number(cert.motor_current_a, "A"),
            f"≤ {fmt_number(cert.max_motor_current_a, 'A')}",
            cert.motor_current_a <= cert.max_motor_current_a,
        ),
        AcceptanceLine(
            "Limit switch", _yes(cert.limit_switch_ok), "confirmed", cert.limit_switch_ok
        ),
        AcceptanceLine(
            "Acoustic release command",
            _yes(cert.acoustic_command_ok),
            "confirmed",
            cert.acoustic_command_ok,
        ),
    )


def status_note(cert: ReleaseCertificate) -> str:
    when = fmt_date(timezone.localdate(cert.status_changed_at)) if cert.status_changed_at else "—"
    if cert.status == ReleaseCertificate.Status.SUPERSEDED:
        newer = cert.superseded_by.number if cert.superseded_by else "a newer certificate"
        return f"SUPERSEDED by {newer} on {when}. Do not rely on this copy."
    if cert.status == ReleaseCertificate.Status.WITHDRAWN:
        return f"WITHDRAWN on {when}. Do not rely on this copy."
    if cert.status == ReleaseCertificate.Status.NOT_VALID:
        return f"NOT VALID since {when}: the release test was amended. Do not rely on this copy."
    return ""


def prepare_certificate(cert: ReleaseCertificate, *, verify_url: str) -> CertificateDocument:
    test = cert.release_test
    unit = test.record.unit
    return CertificateDocument(
        number=cert.number,
        status=cert.status,
        status_label=cert.get_status_display(),
        status_note=status_note(cert),
        issued_at=cert.issued_at,
        issued_by=display_name(cert.issued_by),
        serial=unit.serial,
        variant=unit.variant.name,
        record_id=test.record_id,
        tested_on=cert.tested_on,
        kind=ReleaseTest.Kind(cert.kind).label,
        lines=acceptance_lines(cert),
        passed=cert.passed,
        verdict_label="PASS" if cert.passed else "FAIL",
        verdict_icon="✔" if cert.passed else "✖",
        valid_from=cert.tested_on,
        valid_until=cert.valid_until,
        verify_url=verify_url,
        cautions=tuple(
            str(c) for c in unit_cautions(unit, tasks=[Task.RELEASE_TEST, Task.BATTERY])
        ),
    )


def render_certificate(doc: CertificateDocument) -> bytes:
    width = frame_width()
    qr_size = 30 * mm
    head = Table(
        [
            [
                [
                    para(TITLE, "title"),
                    para_bold(f"Certificate {doc.number}", "h2"),
                    para(f"Unit {doc.serial} ({doc.variant}), bench visit #{doc.record_id}"),
                ],
                [QrCode(doc.verify_url, qr_size), para("Scan to verify", "small")],
            ]
        ],
        colWidths=[width - qr_size - 2 * mm, qr_size + 2 * mm],
    )
    head.setStyle(
        TableStyle([("VALIGN", (0, 0), (-1, -1), "TOP"), ("LEFTPADDING", (0, 0), (-1, -1), 0)])
    )
    story: list[Flowable] = [head]
    if doc.status_note:
        banner = Table([[para_bold(doc.status_note, "verdict")]], colWidths=[width])
        banner.setStyle(
            TableStyle(
                [("BOX", (0, 0), (-1, -1), 2.5, "black"), ("BOTTOMPADDING", (0, 0), (-1, -1), 5)]
            )
        )
        story += [Spacer(0, 2 * mm), banner]
    story += [
        Spacer(0, 3 * mm),
        facts_table(
            [
                ("Unit serial", doc.serial),
                ("Variant", doc.variant),
                ("Test", f"{doc.kind}, {fmt_date(doc.tested_on)}"),
                ("Status", doc.status_label),
                ("Valid from", fmt_date(doc.valid_from)),
                ("Valid until", fmt_date(doc.valid_until)),
                ("Issued", fmt_datetime(doc.issued_at)),
                ("Issued by", doc.issued_by),
            ],
            [24 * mm, width / 2 - 24 * mm, 24 * mm, width / 2 - 24 * mm],
        ),
        para("Results against acceptance values", "h2"),
    ]
    rows = [["Item", "Measured", "Acceptance", "Met"]]
    for line in doc.lines:
        met = "—" if line.met is None else ("✔ yes" if line.met else "✖ NO")
        rows.append([line.item, line.measured, line.acceptance, met])
    story.append(grid_table(rows, [55 * mm, 45 * mm, 45 * mm, width - 145 * mm]))
    verdict = Table(
        [[para_bold(f"Verdict: {doc.verdict_icon} {doc.verdict_label}", "verdict")]],
        colWidths=[width],
    )
    verdict.setStyle(
        TableStyle(
            [
                ("BOX", (0, 0), (-1, -1), 1.5, "black"),
                ("BACKGROUND", (0, 0), (-1, -1), SHADE),
                ("BOTTOMPADDING", (0, 0), (-1, -1), 5),
            ]
        )
    )
    story += [
        Spacer(0, 4 * mm),
        verdict,
        Spacer(0, 2 * mm),
        para(
            f"The release mechanism of unit {doc.serial} was tested on {fmt_date(doc.tested_on)} "
            f"and is certified until {fmt_date(doc.valid_until)}, unless this certificate is "
            "superseded or withdrawn before then."
        ),
        Spacer(0, 2 * mm),
        para(f"Verify this certificate at {doc.verify_url}", "small"),
        Spacer(0, 4 * mm),
        KeepTogether([cautions_table(doc.cautions, width)]),
        KeepTogether(
            [
                para("Signatures", "h2"),
                signature_table(["Tested by (technician)", "Certified by (supervisor)"], width),
            ]
        ),
    ]
    return build_pdf(story, title=TITLE, reference=doc.number, when=doc.issued_at)
