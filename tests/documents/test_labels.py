"""Asset label sheets on A4 and US Letter."""

import io

import pytest
from pypdf import PdfReader

from fleet.documents.labels import Label, LabelSheet, prepare_labels, render_labels
from tests.builders import make_unit, make_variant
from tests.documents.conftest import HOSTILE, ON
from tests.documents.helpers import pdf_pages, render_png

pytestmark = pytest.mark.django_db


def url_for(unit):
    return f"http://testserver/units/{unit.serial}/"


def many_units(variant, count):
    return [
        make_unit(serial=f"TX-{i:04d}", variant=variant, acoustic_address=str(100 + i))
        for i in range(1, count + 1)
    ]


def test_it_prepares_one_label_per_unit(variant):
    units = many_units(variant, 2)
    sheet = prepare_labels(units, paper="letter", variant_id=variant.pk, on=ON, url_for=url_for)
    assert sheet == LabelSheet(
        reference=f"HF-LB-LETTER-V{variant.pk}-2026-04-01",
        paper="letter",
        printed_on=ON,
        labels=(
            Label("TX-0001", "Test variant 1500", "http://testserver/units/TX-0001/"),
            Label("TX-0002", "Test variant 1500", "http://testserver/units/TX-0002/"),
        ),
    )


@pytest.mark.parametrize(("paper", "size"), [("a4", (595, 842)), ("letter", (612, 792))])
def test_labels_fill_pages_of_the_chosen_paper(variant, paper, size):
    units = many_units(variant, 25)  # 24 to a page: two pages
    data = render_labels(
        prepare_labels(units, paper=paper, variant_id=None, on=ON, url_for=url_for)
    )
    reader = PdfReader(io.BytesIO(data))
    assert len(reader.pages) == 2
    box = reader.pages[0].mediabox
    assert (round(float(box.width)), round(float(box.height))) == size
    pages = pdf_pages(data)
    assert "TX-0001" in pages[0] and "TX-0024" in pages[0] and "TX-0025" in pages[1]
    assert "page 1 of 2" in pages[0] and "page 2 of 2" in pages[1]
    assert f"HF-LB-{paper.upper()}-ALL-2026-04-01" in pages[1]
    assert data == render_labels(
        prepare_labels(units, paper=paper, variant_id=None, on=ON, url_for=url_for)
    )


def test_hostile_variant_names_print_literally(db):
    variant = make_variant(name=HOSTILE)
    units = many_units(variant, 1)
    data = render_labels(prepare_labels(units, paper="a4", variant_id=None, on=ON, url_for=url_for))
    assert HOSTILE in pdf_pages(data)[0]


def test_page_one_renders_to_png(variant, tmp_path):
    units = many_units(variant, 3)
    render_png(
        render_labels(prepare_labels(units, paper="a4", variant_id=None, on=ON, url_for=url_for)),
        tmp_path,
    )


def test_the_view_filters_by_variant(as_viewer, variant):
    many_units(variant, 2)
    other = make_variant(name="Other variant")
    make_unit(serial="OT-0001", variant=other)
    response = as_viewer.get(f"/labels.pdf?paper=letter&variant={other.pk}")
    assert response.status_code == 200
    assert response["Content-Type"] == "application/pdf"
    text = pdf_pages(response.content)[0]
    assert "OT-0001" in text and "TX-0001" not in text
    all_units = pdf_pages(as_viewer.get("/labels.pdf?paper=a4").content)[0]
    assert "OT-0001" in all_units and "TX-0002" in all_units


@pytest.mark.parametrize(
    ("query", "message"),
    [
        ("paper=a3", b"Unknown paper size 'a3'"),
        ("paper=legal", b"use one of: a4, letter"),
        ("paper=a4&variant=x", b"variant must be a whole number"),
        ("paper=a4&variant=424242", b"no variant with id 424242"),
    ],
)
def test_bad_parameters_are_a_400(as_viewer, variant, query, message):
    response = as_viewer.get(f"/labels.pdf?{query}")
    assert response.status_code == 400
    assert message in response.content


def test_outsiders_get_403_and_anonymous_visitors_the_login(client, as_outsider, variant):
    assert as_outsider.get("/labels.pdf?paper=a4").status_code == 403
    response = client.get("/labels.pdf?paper=a4")
    assert response.status_code == 302
    assert response["Location"].startswith("/accounts/login/")
