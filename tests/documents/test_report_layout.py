"""The service report's layout: serials never broken, the sign-off kept with the cautions it
follows, and the unit page's charts drawn with reportlab."""

import dataclasses
import datetime as dt

import pytest
from reportlab.lib.units import mm
from reportlab.pdfbase import pdfmetrics

from fleet.documents.base import FONT_BOLD, fitted_widths, frame_width
from fleet.documents.report import EntrySection, prepare_report, render_report
from fleet.models import ServiceRecord
from tests.documents.helpers import pdf_pages, pdf_text

pytestmark = pytest.mark.django_db

BATTERY_HEADERS = (
    "#",
    "Pack",
    "Chemistry",
    "Nominal",
    "Made / installed",
    "Removed",
    "OCV install",
)
LONG_SERIAL = "AK21-2504-3483"


def fresh(record):
    return ServiceRecord.objects.select_related(
        "unit__variant", "place", "technician", "created_by", "closed_by"
    ).get(pk=record.pk)


def battery_row(number: int) -> tuple[str, ...]:
    return (
        str(number),
        LONG_SERIAL,
        "Alkaline Zn/MnO₂",
        "31.5 V, 15 Ah",
        "2025-04-19 / 2025-07-30",
        "—",
        "33.78 V",
    )


def test_it_prints_a_long_pack_serial_on_one_line(history):
    doc = dataclasses.replace(
        prepare_report(fresh(history.record)),
        sections=(EntrySection("Battery installs", BATTERY_HEADERS, (battery_row(1),)),),
    )
    text = pdf_text(render_report(doc))
    # Split across two lines, the serial reads back with a space inside it.
    assert LONG_SERIAL in text


def test_fitted_widths_keep_every_word_whole_and_fill_the_frame():
    rows = [BATTERY_HEADERS, battery_row(1)]
    width = frame_width()
    widths = fitted_widths(rows, width)
    assert sum(widths) == pytest.approx(width)
    for column, w in zip(zip(*rows, strict=True), widths, strict=True):
        longest = max(
            pdfmetrics.stringWidth(word, FONT_BOLD, 8) for cell in column for word in cell.split()
        )
        assert w >= longest


def test_fitted_widths_shrink_in_proportion_when_words_cannot_fit():
    rows = [("m" * 80, "m" * 40 + " " + "m" * 80)]
    widths = fitted_widths(rows, 100 * mm)
    assert sum(widths) == pytest.approx(100 * mm)
    assert widths[0] == pytest.approx(widths[1])


@pytest.mark.parametrize("rows", range(18, 40, 3))
def test_the_sign_off_is_never_alone_on_its_page(history, rows):
    # However long the entries run, both sign-offs share their page with the cautions.
    doc = dataclasses.replace(
        prepare_report(fresh(history.record)),
        sections=(
            EntrySection(
                "Battery installs",
                BATTERY_HEADERS,
                tuple(battery_row(n) for n in range(1, rows + 1)),
            ),
        ),
        photos=(),
        amendments=(),
    )
    pages = pdf_pages(render_report(doc))
    signed = [page for page in pages if "I have checked every entry" in page]
    assert len(signed) == 1
    assert "never stand in line with an end cap" in signed[0]
    assert "the entries above are the work I did" in signed[0]


def test_it_draws_the_unit_charts_when_asked(history):
    record = fresh(history.record)
    on = dt.date(2026, 4, 1)
    doc = prepare_report(record, charts_on=on)
    names = sorted(record.unit.variant.anode_positions.values_list("name", flat=True))
    titles = [c.title for c in doc.charts]
    # One chart per anode position, then the battery: the unit page's charts.
    assert sorted(titles[:-1]) == [f"TX-0001: anode {name}" for name in names]
    assert titles[-1] == "TX-0001: battery charge"
    assert all(c.today == on for c in doc.charts)
    text = pdf_text(render_report(doc))
    assert "Charts, as of 2026-04-01" in text
    assert "TX-0001: battery charge" in text
    assert "% of new mass" in text


def test_it_has_no_charts_unless_asked(history):
    assert prepare_report(fresh(history.record)).charts == ()


def test_a_thinned_anode_chart_says_so_in_the_report(history):
    import dataclasses

    record = fresh(history.record)
    doc = prepare_report(record, charts_on=dt.date(2026, 4, 1))
    first = doc.charts[0]
    assert not first.note  # a short history is drawn in full
    thinned = dataclasses.replace(first, note="130 of 1,667 readings drawn")
    doc = dataclasses.replace(doc, charts=(thinned, *doc.charts[1:]))
    text = pdf_text(render_report(doc))
    assert f"{first.title}: 130 of 1,667 readings drawn." in text
