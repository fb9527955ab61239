"""Pre-deployment checklist: the prepared document, the PDF read back, and the view."""

import datetime as dt

import pytest
from django.utils import timezone

from fleet.documents.checklist import (
    CheckLine,
    ManualItem,
    prepare_checklist,
    render_checklist,
)
from fleet.due.planned import PlannedDeployment
from fleet.models import Site
from tests.builders import make_site
from tests.documents.conftest import AT, HOSTILE
from tests.documents.helpers import pdf_pages, pdf_text, render_png

pytestmark = pytest.mark.django_db

START = dt.date(2026, 4, 10)
URL = "http://testserver/units/TX-0001/"


def prepare(history, **kwargs):
    kwargs.setdefault("site", history.site)
    kwargs.setdefault("start", START)
    kwargs.setdefault("days", 90)
    kwargs.setdefault("interrogations_per_day", 200)
    kwargs.setdefault("power_step", None)
    return prepare_checklist(history.unit, PlannedDeployment(**kwargs), at=AT, unit_url=URL)


def test_it_prepares_every_field_for_the_hand_built_history(history):
    doc = prepare(history)
    # The site by name, never its database id.
    assert doc.reference == "HF-CL-TX-0001-2026-04-10-TEST-SITE-A"
    assert (doc.prepared_at, doc.serial, doc.variant) == (AT, "TX-0001", "Test variant 1500")
    assert (doc.acoustic_address, doc.turnaround_delay) == ("101", "12.5 ms")
    assert (doc.site_id, doc.site, doc.site_depth_m) == (history.site.pk, "Test site A", 1350.0)
    assert (doc.start, doc.end, doc.days) == (START, dt.date(2026, 7, 9), 90)
    assert (doc.interrogations_per_day, doc.power_step) == (200, 1)
    assert (doc.verdict, doc.verdict_label, doc.verdict_icon) == ("pass", "Pass", "✔")
    assert [(c.name, c.verdict) for c in doc.checks] == [
        ("Unit condition", "pass"),
        ("Depth rating", "pass"),
        ("Pressure test", "pass"),
        ("Battery", "pass"),
        ("Anode: Anode 1", "pass"),
        ("Anode: Anode 2", "pass"),
        ("Seal: Seal 1", "pass"),
        ("Seal: Seal 2", "pass"),
        ("Release test", "pass"),
        ("Sensor: Temperature (°C)", "pass"),
        ("Sensor: Pressure (dbar)", "pass"),
        ("Recovery buoyancy", "pass"),
        ("Reply timing", "pass"),
        ("Acoustic address", "pass"),
    ]
    # Numbers and sources come from fleet.due unchanged; spot-check the ones fixed by the data.
    assert doc.checks[1] == CheckLine(
        "Depth rating",
        "pass",
        "Pass",
        "✔",
        "site 1,350 m, rating 1,500 m: 150 m to spare, 10 % of the rating (want at least 10 %)",
        "margin: common practice, no published source",
    )
    assert doc.checks[8].numbers == "due 2026-08-29, after recovery 2026-07-09"  # 180 days
    assert doc.checks[13].numbers == "address 101 free at Test site A"
    assert "200 replies a day" in doc.checks[3].numbers
    assert doc.manual_items == (
        ManualItem("Seals inspected, clean and greased; no nicks, set or debris", ""),
        ManualItem("Vent plug fitted and tight", ""),
        ManualItem("Anodes tight, bonded and not painted over", "bond ______ Ω"),
        ManualItem("Flotation collar fitted and secured (or not used on this job)", ""),
        ManualItem("Release latched and hook safe; safety pin removed at launch", ""),
        ManualItem(
            "Acoustic address 101 and turnaround delay 12.5 ms set and verified on deck "
            "with the deck unit",
            "read back ______ / ______ ms",
        ),
        ManualItem(
            "Battery volts recorded (pack PK-77, 31.5 V nominal, 33.1 V at install)",
            "______ V open circuit",
        ),
    )
    assert len(doc.cautions) == 6
    assert doc.unit_url == URL


def test_a_failing_check_makes_the_checklist_fail(history):
    deep = make_site(name="Deep trench", water_depth_m=1600.0)
    doc = prepare(history, site=deep)
    depth = next(c for c in doc.checks if c.name == "Depth rating")
    assert (depth.verdict, depth.verdict_label, depth.verdict_icon) == ("fail", "Fail", "✖")
    assert (doc.verdict, doc.verdict_label) == ("fail", "Fail")
    assert "✖ Fail" in pdf_text(render_checklist(doc))


def test_the_pdf_states_the_checks_items_cautions_and_sign_off(history):
    data = render_checklist(prepare(history))
    pages = pdf_pages(data)
    text = " ".join(pages)
    for expected in (
        "Pre-deployment checklist",
        "TX-0001",
        "Test variant 1500",
        "Test site A",
        "2026-04-10 to 2026-07-09",
        "Automated checks overall: ✔ Pass",
        "site 1,350 m, rating 1,500 m: 150 m to spare, 10 % of the rating (want at least 10 %)",
        "✔ Pass",
        "Acoustic address 101 and turnaround delay 12.5 ms set and verified on deck",
        "Vent plug fitted",
        "Flotation collar fitted",
        "Release latched and hook safe",
        "☐",
        "kilovolt pulses",
        "discharge the drive",
        "never stand in line with an end cap",
        "Alkaline pack: alkaline cells can give off hydrogen",  # PK-77 is alkaline
        "pinch points",
        "rated gear",
        "Follow local codes, your company's procedures and licensed practice",
        "Technician",
        "Supervisor",
        "Signature",
        "Time",
    ):
        assert expected in text, expected
    assert "Lithium" not in text  # the fitted pack is alkaline
    assert "NOT FIT TO DEPLOY" not in text
    assert f"(id {history.site.pk})" not in text  # no database id on paper
    for number, page in enumerate(pages, start=1):
        assert "HF-CL-TX-0001-2026-04-10-TEST-SITE-A" in page
        assert f"page {number} of {len(pages)}" in page


def test_hostile_site_names_print_literally(history):
    history.site.name = HOSTILE
    history.site.save()
    doc = prepare(history, site=Site.objects.get(pk=history.site.pk))
    assert HOSTILE in pdf_text(render_checklist(doc))


def test_the_same_input_gives_the_same_bytes(history):
    assert render_checklist(prepare(history)) == render_checklist(prepare(history))


def test_page_one_renders_to_png(history, tmp_path):
    render_png(render_checklist(prepare(history)), tmp_path)


# --- the view -----------------------------------------------------------------------------


def url(serial="TX-0001", **params):
    query = "&".join(f"{k}={v}" for k, v in params.items())
    return f"/units/{serial}/checklist.pdf?{query}"


def tomorrow():
    return (timezone.localdate() + dt.timedelta(days=1)).isoformat()


@pytest.mark.parametrize("persona", ["as_technician", "as_supervisor", "as_viewer"])
def test_every_role_downloads_the_checklist(request, persona, history):
    client = request.getfixturevalue(persona)
    response = client.get(url(site=history.site.pk, start=tomorrow(), days=30, rate=100, step=1))
    assert response.status_code == 200
    assert response["Content-Type"] == "application/pdf"
    assert f"HF-CL-TX-0001-{tomorrow()}-TEST-SITE-A.pdf" in response["Content-Disposition"]
    assert "TX-0001" in pdf_text(response.content)


@pytest.mark.parametrize(
    ("params", "message"),
    [
        ({"start": "FUTURE", "days": "30"}, b"Choose a site."),
        ({"site": "abc", "start": "FUTURE", "days": "30"}, b"There is no such site."),
        ({"site": "999999", "start": "FUTURE", "days": "30"}, b"There is no such site."),
        ({"site": "SITE", "days": "30"}, b"Give the start date."),
        ({"site": "SITE", "start": "2099-13-01", "days": "30"}, b"YYYY-MM-DD"),
        ({"site": "SITE", "start": "2000-01-01", "days": "30"}, b"today"),
        ({"site": "SITE", "start": "9999-12-31", "days": "30"}, b"on or before"),
        ({"site": "SITE", "start": "FUTURE"}, b"Give the planned days."),
        ({"site": "SITE", "start": "FUTURE", "days": "0"}, b"between 1 and 3650"),
        ({"site": "SITE", "start": "FUTURE", "days": "9999"}, b"between 1 and 3650"),
        ({"site": "SITE", "start": "FUTURE", "days": "30", "rate": "-1"}, b"rate"),
        ({"site": "SITE", "start": "FUTURE", "days": "30", "step": "12"}, b"step"),
    ],
)
def test_bad_parameters_are_a_400_with_a_message(as_viewer, history, params, message):
    future = (timezone.localdate() + dt.timedelta(days=30)).isoformat()
    swap = {"SITE": history.site.pk, "FUTURE": future}
    params = {k: swap.get(v, v) for k, v in params.items()}
    response = as_viewer.get(url(**params))
    assert response.status_code == 400
    assert message in response.content


def test_the_checklist_form_links_to_the_pdf(as_viewer, history):
    response = as_viewer.get("/units/TX-0001/checklist/")
    assert response.status_code == 200
    assert b'action="/units/TX-0001/checklist.pdf"' in response.content
    assert b"Test site A" in response.content


def test_outsiders_get_403_and_anonymous_visitors_the_login(client, as_outsider, history):
    target = url(site=history.site.pk, start=tomorrow(), days=30)
    assert as_outsider.get(target).status_code == 403
    response = client.get(target)
    assert response.status_code == 302
    assert response["Location"].startswith("/accounts/login/")
