"""Service report for a closed bench visit."""

import pytest

from fleet.documents.report import (
    AmendmentLine,
    EntrySection,
    PhotoLine,
    RecordOpenError,
    prepare_report,
    render_report,
)
from fleet.models import ServiceRecord
from tests.builders import T0
from tests.documents.conftest import CLOSED_AT, HOSTILE, bench_visit, release_test
from tests.documents.helpers import pdf_pages, pdf_text, render_png

pytestmark = pytest.mark.django_db


def fresh(record):
    return ServiceRecord.objects.select_related(
        "unit__variant", "place", "technician", "created_by", "closed_by"
    ).get(pk=record.pk)


def test_it_prepares_every_entry_amendment_and_photo(history):
    record = fresh(history.record)
    doc = prepare_report(record)
    ids = {
        kind: list(getattr(record, kind).order_by("pk").values_list("pk", flat=True))
        for kind in ("anode_readings", "seal_changes", "release_tests", "housing_openings")
    }
    a1, a2 = ids["anode_readings"]
    s1, s2 = ids["seal_changes"]
    assert doc.reference == f"HF-SR-{record.pk}"
    assert (doc.serial, doc.variant, doc.place) == (
        "TX-0001",
        "Test variant 1500",
        "Bench workshop",
    )
    assert (doc.technician, doc.created_by, doc.closed_by) == ("tech", "tech", "super")
    assert (doc.opened_at, doc.closed_at, doc.created_at) == (T0, CLOSED_AT, record.created_at)
    assert doc.summary == f"Annual service. {HOSTILE}"
    assert [s.title for s in doc.sections] == [
        "Anode readings",
        "Seal changes",
        "Battery installs",
        "Pressure tests",
        "Release tests",
        "Sensor checks",
        "Housing openings",
    ]
    assert doc.sections[0] == EntrySection(
        "Anode readings",
        (
            "#",
            "Position",
            "Net mass (g)",
            "Estimated remaining (%)",
            "Bond resistance (Ω)",
            "Replaced",
            "Note",
        ),
        (
            ("1", "Anode 1 (Al-Zn-In)", "382 g", "—", "0.03 Ω", "No", "—"),  # amended 380
            ("2", "Anode 2 (Al-Zn-In)", "390 g", "—", "0.02 Ω", "No", HOSTILE),
        ),
        singular="Anode reading",
    )
    assert doc.sections[1].rows == (
        ("1", "Seal 1 (AS568-240)", "NBR (nitrile)", "2025-10-01", "L-1", "Interval reached"),
        ("2", "Seal 2 (AS568-240)", "NBR (nitrile)", "2025-10-01", "L-1", "Interval reached"),
    )
    # A test carries its verdict, from the same rules readiness applies.
    assert doc.sections[3].headers[-1] == "Verdict"
    assert doc.sections[4].rows == (
        (
            "1",
            "2026-03-02",
            "Under load",
            "250 kg",
            "12.5 s",
            "1.8 A",
            "Yes",
            "Yes",
            "✔ Pass",
        ),
    )
    assert doc.sections[6].rows[0][1:] == (
        "2026-03-02 09:15 UTC",
        "2026-03-02 11:00 UTC",
        "Yes",
        "No",
        "battery change",
    )
    amendment = record.amendments.get()
    # Labels and values in words, never the field's name or its stored text.
    assert doc.amendments == (
        AmendmentLine(
            amendment.created_at,
            "super",
            "Anode reading 1",
            "Net mass (g)",
            "380 g",
            "382 g",
            f"Scale misread. {HOSTILE}",
        ),
    )
    assert doc.photos == (PhotoLine("Anode reading 2: Anode 2", history.photo_reading.photo.path),)


def test_the_pdf_shows_entries_amendments_people_and_hostile_text_literally(history):
    data = render_report(prepare_report(fresh(history.record)))
    pages = pdf_pages(data)
    text = " ".join(pages)
    for expected in (
        "Service report",
        "TX-0001",
        "Technician tech",
        "2026-03-02 16:00 UTC by super",
        "PK-77",
        "2,000 dbar",
        "Tank 2",
        "12.5 s",
        "Temperature (°C)",
        "battery change",
        "380 g 382 g",
        "Annual service. <b>bold</b> & <A href=x> S&P <unclosed",
        "Scale misread. <b>bold</b> & <A href=x> S&P <unclosed",
        "Anode reading 2: Anode 2",
        "never stand in line with an end cap",
        "Technician (tech): the entries above",
        "Supervisor (super): I have checked every entry",
    ):
        assert expected in text, expected
    assert text.count("<b>bold</b> & <A href=x> S&P <unclosed") == 3  # summary, note, reason
    for number, page in enumerate(pages, start=1):
        assert f"HF-SR-{history.record.pk}" in page
        assert f"page {number} of {len(pages)}" in page
    assert b"/Subtype /Image" in data  # the photo went in


def test_a_missing_photo_file_is_skipped_with_a_note(history):
    import os

    os.remove(history.photo_reading.photo.path)
    data = render_report(prepare_report(fresh(history.record)))
    assert "photo file missing, not printed" in pdf_text(data)
    assert b"/Subtype /Image" not in data


def test_the_same_record_gives_the_same_bytes(history):
    doc = prepare_report(fresh(history.record))
    assert render_report(doc) == render_report(prepare_report(fresh(history.record)))


def test_page_one_renders_to_png(history, tmp_path):
    render_png(render_report(prepare_report(fresh(history.record))), tmp_path)


def test_an_open_record_has_no_report(unit, technician):
    record = bench_visit(unit, technician, release_test())
    with pytest.raises(RecordOpenError):
        prepare_report(fresh(record))


@pytest.mark.parametrize("persona", ["as_technician", "as_supervisor", "as_viewer"])
def test_every_role_downloads_the_report(request, persona, history):
    client = request.getfixturevalue(persona)
    page = client.get(history.record.get_absolute_url())
    assert f"/records/{history.record.pk}/report.pdf".encode() in page.content
    response = client.get(f"/records/{history.record.pk}/report.pdf")
    assert response.status_code == 200
    assert response["Content-Type"] == "application/pdf"
    assert f'filename="HF-SR-{history.record.pk}.pdf"' in response["Content-Disposition"]


def test_an_open_record_is_a_409_with_a_message(as_viewer, unit, technician):
    record = bench_visit(unit, technician, release_test())
    response = as_viewer.get(f"/records/{record.pk}/report.pdf")
    assert response.status_code == 409
    assert b"still open" in response.content


def test_outsiders_get_403_and_anonymous_visitors_the_login(client, as_outsider, history):
    target = f"/records/{history.record.pk}/report.pdf"
    assert as_outsider.get(target).status_code == 403
    response = client.get(target)
    assert response.status_code == 302
    assert response["Location"].startswith("/accounts/login/")
