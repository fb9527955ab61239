"""Labels for chosen units (one from its page, a ticked set from the unit list), lost and
retired units left off unless asked, and the "if found, contact" line supervisors set."""

import datetime as dt

import pytest
from reportlab.pdfbase.pdfmetrics import stringWidth

from fleet.documents.base import FONT
from fleet.documents.labels import (
    CONTACT_LINES,
    CONTACT_SIZE,
    contact_lines,
    prepare_labels,
    render_labels,
)
from fleet.models import LabelSetting, Transponder, UnitHold
from fleet.services.labels import label_contact_save
from tests.builders import make_unit
from tests.documents.conftest import ON
from tests.documents.helpers import pdf_pages, pdf_text, render_png

pytestmark = pytest.mark.django_db

CONTACT = "If lost, call the Bench workshop on +00 0000 000000 or write to recover@example.org"


def url_for(unit):
    return f"http://testserver/units/{unit.serial}/"


@pytest.fixture
def units(variant, workshop):
    made = [
        make_unit(
            serial=f"TX-{i:04d}", acoustic_address=str(100 + i), variant=variant, place=workshop
        )
        for i in range(1, 6)
    ]
    Transponder.objects.filter(serial="TX-0002").update(hold=UnitHold.LOST, hold_reason="adrift")
    Transponder.objects.filter(serial="TX-0003").update(hold=UnitHold.RETIRED, hold_reason="old")
    Transponder.objects.filter(serial="TX-0004").update(
        hold=UnitHold.QUARANTINED, hold_reason="check seals"
    )
    return made


def serials_in(response):
    assert response.status_code == 200, response.content
    assert response["Content-Type"] == "application/pdf"
    text = pdf_text(response.content)
    return [s for s in ("TX-0001", "TX-0002", "TX-0003", "TX-0004", "TX-0005") if s in text]


def test_one_units_label_comes_from_its_page(as_viewer, units):
    page = as_viewer.get("/units/TX-0001/").content.decode()
    assert "/labels.pdf?paper=a4&amp;unit=TX-0001" in page
    response = as_viewer.get("/labels.pdf", {"unit": "TX-0001"})
    assert serials_in(response) == ["TX-0001"]
    assert "HF-LB-A4-U-TX-0001-" in pdf_text(response.content)


def test_a_lost_units_page_asks_for_its_label_explicitly(as_viewer, units):
    page = as_viewer.get("/units/TX-0002/").content.decode()
    assert "unit=TX-0002&amp;include_held=1" in page
    response = as_viewer.get("/labels.pdf", {"unit": "TX-0002", "include_held": "1"})
    assert serials_in(response) == ["TX-0002"]


def test_a_sheet_of_chosen_units_leaves_lost_and_retired_ones_off(as_viewer, units):
    chosen = {"unit": ["TX-0001", "tx-0002", "TX-0003", "TX-0004"], "paper": "letter"}
    # A quarantined unit is still in the workshop: it keeps its label.
    assert serials_in(as_viewer.get("/labels.pdf", chosen)) == ["TX-0001", "TX-0004"]
    with_held = as_viewer.get("/labels.pdf", {**chosen, "include_held": "1"})
    assert serials_in(with_held) == ["TX-0001", "TX-0002", "TX-0003", "TX-0004"]
    assert "HF-LB-LETTER-SEL4-" in pdf_text(with_held.content)


def test_the_sheet_of_every_unit_leaves_lost_and_retired_ones_off(as_viewer, units):
    assert serials_in(as_viewer.get("/labels.pdf")) == ["TX-0001", "TX-0004", "TX-0005"]


def test_the_unit_list_offers_ticks_for_the_label_sheet(as_viewer, units):
    body = as_viewer.get("/units/").content.decode()
    assert 'id="label-sheet"' in body and 'name="include_held"' in body
    assert '<input type="checkbox" name="unit" value="TX-0001" form="label-sheet" />' in body


@pytest.mark.parametrize(
    ("params", "message"),
    [
        ({"unit": "TX-9999"}, "No unit has the serial TX-9999."),
        ({"unit": "<script>"}, "is not a unit serial"),
        ({"unit": "TX-0002"}, "lost or retired, so left off the sheet"),
        ({"unit": [f"TX-{i:04d}" for i in range(501)]}, "at most 500 units"),
        ({"unit": "TX-0001", "paper": "a3"}, "Unknown paper size"),
        ({"unit": "TX-0001", "variant": "x"}, "variant must be a whole number"),
    ],
)
def test_a_bad_label_request_is_a_400_with_a_message(as_viewer, units, params, message):
    response = as_viewer.get("/labels.pdf", params)
    assert response.status_code == 400
    assert message in response.content.decode()


def test_a_user_with_no_role_gets_no_labels(as_outsider, units):
    assert as_outsider.get("/labels.pdf", {"unit": "TX-0001"}).status_code == 403


def test_a_sheet_of_chosen_units_is_the_same_queries_for_one_or_many(
    as_viewer, units, django_assert_num_queries
):
    # Expect: session, user, groups (role check), the units, the contact line.
    with django_assert_num_queries(5):
        as_viewer.get("/labels.pdf", {"unit": "TX-0001"})
    with django_assert_num_queries(5):
        as_viewer.get("/labels.pdf", {"unit": [u.serial for u in units], "include_held": "1"})


# The contact line


def test_a_supervisor_sets_the_contact_line_and_every_label_prints_it(
    as_supervisor, as_viewer, supervisor, units
):
    response = as_supervisor.post("/labels/contact/", {"contact_line": "  Call +00 0000 0000  "})
    assert response.status_code == 302
    setting = LabelSetting.objects.get()
    assert (setting.contact_line, setting.updated_by) == ("Call +00 0000 0000", supervisor)
    text = pdf_text(as_viewer.get("/labels.pdf", {"unit": "TX-0001"}).content)
    assert "If found, contact: Call +00 0000 0000" in text
    label_contact_save(contact_line="", by=supervisor, at=dt.datetime(2026, 4, 1, tzinfo=dt.UTC))
    assert "If found" not in pdf_text(as_viewer.get("/labels.pdf", {"unit": "TX-0001"}).content)
    assert LabelSetting.objects.count() == 1


@pytest.mark.parametrize("persona", ["as_viewer", "as_technician", "as_outsider"])
def test_only_supervisors_set_the_contact_line(request, persona):
    client = request.getfixturevalue(persona)
    assert client.get("/labels/contact/").status_code == 403
    assert client.post("/labels/contact/", {"contact_line": "x"}).status_code == 403
    assert not LabelSetting.objects.exists()


@pytest.mark.parametrize(
    ("line", "message"),
    [
        ("x" * 81, "at most 80 characters"),
        ("two\nlines", "without line breaks"),
        ("tab\there", "without line breaks"),
    ],
)
def test_a_bad_contact_line_is_refused_and_nothing_is_saved(as_supervisor, line, message):
    response = as_supervisor.post("/labels/contact/", {"contact_line": line})
    assert response.status_code == 200
    assert message in response.content.decode()
    assert not LabelSetting.objects.exists()


def test_the_contact_line_never_runs_past_its_label():
    width = 50 * 2.8346  # 50 mm
    for text in [
        CONTACT,
        "x" * 80,
        "short",
        "Wordwithoutanyspacesatallthatgoesonandonandonforever",
    ]:
        lines = contact_lines(text, width)
        assert 1 <= len(lines) <= CONTACT_LINES
        assert all(stringWidth(line, FONT, CONTACT_SIZE) <= width for line in lines)
    assert contact_lines("", width) == []
    assert contact_lines(CONTACT, width)[-1].endswith("…")  # cut, not dropped silently


@pytest.mark.parametrize("paper", ["a4", "letter"])
def test_labels_with_a_contact_line_render(variant, units, paper, tmp_path):
    sheet = prepare_labels(
        list(Transponder.objects.select_related("variant")),
        paper=paper,
        variant_id=None,
        on=ON,
        url_for=url_for,
        contact=CONTACT,
    )
    data = render_labels(sheet)
    page = pdf_pages(data)[0]
    assert page.count("If found, contact:") == 5
    render_png(data, tmp_path)
