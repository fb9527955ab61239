"""The shared helpers: escaping, fonts, determinism."""

import datetime as dt

import pytest
from reportlab.platypus import Paragraph

from fleet.documents import base
from tests.documents.conftest import HOSTILE
from tests.documents.helpers import pdf_pages, pdf_text

WHEN = dt.datetime(2026, 3, 2, 16, 0, tzinfo=dt.UTC)


@pytest.mark.parametrize(
    "text",
    [
        HOSTILE,
        "<A",  # crashes an unescaped Paragraph
        "S&P",  # corrupted to "S" unescaped
        "</para>",
        "&amp; stays &amp;",
        "<font size=40>big</font>",
    ],
)
def test_para_prints_markup_literally(text):
    doc = base.build_pdf([base.para(text)], title="Test", reference="HF-T-1", when=WHEN)
    assert text in pdf_text(doc)


def test_an_unescaped_paragraph_would_have_crashed():
    # The reason para() exists: this is what raw user text does to reportlab.
    with pytest.raises(ValueError):
        Paragraph("<A href=x> S&P <unclosed", base.STYLES["body"])


def test_the_fonts_are_the_vendored_dejavu_files():
    assert (base.FONT_DIR / "DejaVuSans.ttf").is_file()
    assert (base.FONT_DIR / "DejaVuSans-Bold.ttf").is_file()
    assert "Bitstream" in (base.FONT_DIR / "LICENSE-DejaVu.txt").read_text()
    doc = base.build_pdf(
        [base.para("✔ Pass ✖ Fail ☐ ≤ 3 A Ω °C")], title="T", reference="R", when=WHEN
    )
    assert "✔ Pass ✖ Fail ☐ ≤ 3 A Ω °C" in pdf_text(doc)
    assert b"DejaVuSans" in doc  # embedded, not a base-14 stand-in


def test_the_same_story_gives_the_same_bytes_and_the_documents_date():
    def build():
        return base.build_pdf([base.para("x")], title="T", reference="R-1", when=WHEN)

    first = build()
    assert first == build()
    assert b"D:20260302160000+00'00'" in first
    other = base.build_pdf([base.para("x")], title="T", reference="R-1", when=WHEN.replace(day=3))
    assert other != first


def test_every_page_carries_the_reference_and_page_n_of_m():
    story = [base.para(f"line {i}") for i in range(200)]
    pages = pdf_pages(base.build_pdf(story, title="T", reference="HF-T-9", when=WHEN))
    assert len(pages) >= 3
    for number, text in enumerate(pages, start=1):
        assert "HF-T-9" in text
        assert f"page {number} of {len(pages)}" in text
