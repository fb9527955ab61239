"""A record a supervisor can sign from: every entry's values with units and its verdict (the
rules readiness applies), amendments by entry and label, and an audit trail that tells who
created, last changed and closed it, each with its own time."""

import datetime as dt
import re

import pytest
from django.urls import reverse

from fleet.models import BatteryInstall, ReleaseTest, ServiceRecord
from fleet.services.records import (
    amendment_create,
    check_version,
    service_record_close,
    service_record_save,
)
from tests.builders import T0, pressure_test
from tests.documents.conftest import bench_visit, release_test

pytestmark = pytest.mark.django_db

CLOSED_AT = dt.datetime(2026, 3, 2, 16, 0, tzinfo=dt.UTC)


def text_of(html: str) -> str:
    """The page's words, tags and runs of whitespace folded away."""
    return re.sub(r"\s+", " ", re.sub(r"<[^>]+>", " ", html))


@pytest.fixture
def failed_visit(unit, technician, supervisor):
    """A closed visit with a failed pressure test (water inside, pressure fell 1.6 %) and a
    passed release test."""
    return bench_visit(
        unit,
        technician,
        pressure_test(
            dt.date(2026, 3, 2),
            test_pressure_dbar=1900,
            start_pressure_dbar=1900,
            end_pressure_dbar=1870,
            ingress_found=True,
        ),
        release_test(),
        close_at=CLOSED_AT,
        closer=supervisor,
    )


def test_the_record_page_shows_each_value_with_its_unit_and_the_verdict(
    as_supervisor, failed_visit
):
    html = as_supervisor.get(failed_visit.get_absolute_url()).content.decode()
    words = text_of(html)
    for label in (
        "Test pressure (dbar)",
        "Hold (min)",
        "Start of hold (dbar)",
        "End of hold (dbar)",
        "Water at start (°C)",
        "Ingress found",
        "Time to release (s)",
        "Peak motor current (A)",
        "Limit switch ok",
    ):
        assert f"<th>{label}</th>" in html, label
    for value in ("1,900 dbar", "60 min", "12 °C", "12.2 °C", "12.5 s", "1.8 A", "250 kg"):
        assert value in words, value
    # 1900 -> 1870 dbar is a 1.58 % drop, over the 1 % allowed (common practice, no published
    # source; calc.pressure's default), and water was found inside: the same verdict readiness
    # gives, said in words and marked on the values, bold with ✖, not by colour alone.
    assert "✖ FAIL" in words
    assert "pressure fell 30.0 dbar (1.58 %), more than the allowed 1 %" in words
    assert "water found inside the housing" in words
    assert (
        '<td class="fail"><strong><span aria-hidden="true">✖</span> 1,870 dbar</strong></td>'
        in html
    )
    assert '<td class="fail"><strong><span aria-hidden="true">✖</span> Yes</strong></td>' in html
    assert "✔ Pass" in words  # the release test
    assert "1 test failed on this visit" in words


def test_the_unit_history_carries_each_tests_numbers_and_verdict(as_viewer, failed_visit, unit):
    html = as_viewer.get(unit.get_absolute_url()).content.decode()
    history = text_of(html.split("<h2>History")[1])
    assert "Pressure test at 1,900 dbar: 1,900 dbar to 1,870 dbar over 60 min" in history
    assert "✖ FAIL" in history
    assert "Under load release test under 250 kg: released in 12.5 s at 1.8 A" in history
    assert "✔ Pass" in history


def _step(client, record, **params):
    return client.get(reverse("record-amend", args=[record.pk]), params).content.decode()


def test_the_amendment_form_picks_the_entry_then_the_value_by_its_label(
    as_supervisor, failed_visit
):
    release = ReleaseTest.objects.get(record=failed_visit)
    first = _step(as_supervisor, failed_visit)
    assert f'value="releasetest:{release.pk}"' in first
    assert "Release test 1: Under load release test" in first
    assert f"#{release.pk}" not in text_of(first)
    second = text_of(_step(as_supervisor, failed_visit, target=f"releasetest:{release.pk}"))
    assert "Limit switch ok (now: Yes)" in second
    assert "Kind (now: Under load)" in second
    assert "Peak motor current (A) (now: 1.8 A)" in second
    for internal in ("now: True", "now: False", "now: load", "motor_current_a", "now: None"):
        assert internal not in second, internal
    # The value's own input: a yes/no field as two choices, a choice as its list.
    third = _step(
        as_supervisor, failed_visit, target=f"releasetest:{release.pk}", field="limit_switch_ok"
    )
    assert 'type="radio" name="corrected_value" value="yes"' in third
    assert 'type="radio" name="corrected_value" value="no"' in third
    assert "now recorded: <strong>Yes</strong>" in third
    kind = _step(as_supervisor, failed_visit, target=f"releasetest:{release.pk}", field="kind")
    assert '<select name="corrected_value"' in kind
    assert '<option value="wet">Wet (in tank or alongside)</option>' in kind


def test_a_date_and_time_is_offered_in_the_workshop_time_zone(
    as_supervisor, unit, technician, supervisor, settings
):
    settings.TIME_ZONE = "Pacific/Auckland"
    from fleet.models import HousingOpening

    record = bench_visit(
        unit,
        technician,
        HousingOpening(opened_at=T0, closed_at=T0 + dt.timedelta(hours=2), reason="battery change"),
        close_at=CLOSED_AT,
        closer=supervisor,
    )
    opening = HousingOpening.objects.get(record=record)
    page = _step(as_supervisor, record, target=f"housingopening:{opening.pk}", field="opened_at")
    # 09:00 UTC on 2 March 2026 is 22:00 in Auckland (daylight time, UTC+13).
    assert 'type="datetime-local" name="corrected_value" value="2026-03-02T22:00"' in page
    assert "now recorded: <strong>2026-03-02 22:00 NZDT</strong>" in page


def test_the_amendments_table_reads_labels_and_values_in_words(
    as_supervisor, failed_visit, supervisor
):
    release = ReleaseTest.objects.get(record=failed_visit)
    failed_visit.refresh_from_db()
    response = as_supervisor.post(
        reverse("record-amend", args=[failed_visit.pk]),
        {
            "version": failed_visit.version,
            "target_field": f"releasetest:{release.pk}:limit_switch_ok",
            "corrected_value": "no",
            "reason": "The switch was taped shut during the test",
        },
    )
    assert response.status_code == 302
    html = as_supervisor.get(failed_visit.get_absolute_url()).content.decode()
    table = text_of(html.split("<h2>Amendments</h2>")[1])
    assert "Release test 1 Limit switch ok Yes No" in table
    assert "limit_switch_ok" not in html
    assert "False" not in table


def test_a_value_not_in_the_record_is_refused_in_plain_words(as_supervisor, failed_visit):
    failed_visit.refresh_from_db()
    response = as_supervisor.post(
        reverse("record-amend", args=[failed_visit.pk]),
        {
            "version": failed_visit.version,
            "target_field": "releasetest:999999:record",
            "corrected_value": "x",
            "reason": "test",
        },
    )
    assert response.status_code == 400
    assert "That value is not one this record can correct" in response.content.decode()


def test_closing_is_its_own_event_not_the_last_change(as_supervisor, unit, technician, supervisor):
    record = bench_visit(unit, technician, release_test())
    created_at = record.created_at
    record.summary = "Release re-greased"
    service_record_save(record=record, by=technician, expected_version=record.version)
    record.refresh_from_db()
    edited_at = record.updated_at
    service_record_close(record=record, by=supervisor, at=CLOSED_AT + dt.timedelta(days=400))
    record.refresh_from_db()
    assert (record.created_by, record.created_at) == (technician, created_at)
    assert (record.updated_by, record.updated_at) == (technician, edited_at)
    assert record.closed_by == supervisor
    words = text_of(as_supervisor.get(record.get_absolute_url()).content.decode())
    assert f"Created by {technician}," in words
    assert f"Last changed by {technician}," in words
    assert f"Closed by {supervisor}, 2027-04-06 16:00 UTC" in words
    # A page loaded before the close is refused naming the supervisor who closed it.
    with pytest.raises(Exception, match=f"{supervisor} changed this record at 2027-04-06 16:00"):
        check_version(record, record.version - 1)


def test_an_amendment_is_the_last_change_of_a_closed_record(
    as_supervisor, failed_visit, supervisor
):
    release = ReleaseTest.objects.get(record=failed_visit)
    amendment_create(
        record=failed_visit,
        target=release,
        field_name="motor_current_a",
        corrected_value="2.5",
        reason="Meter read again",
        by=supervisor,
    )
    words = text_of(as_supervisor.get(failed_visit.get_absolute_url()).content.decode())
    assert f"Last changed by {supervisor}," in words
    assert "(an amendment)" in words


def test_a_past_visit_keeps_its_own_creation_time(unit, technician):
    record = ServiceRecord(unit=unit, opened_at=T0, technician=technician, place=unit.place)
    service_record_save(record=record, entries=[release_test()], by=technician, at=T0)
    record.refresh_from_db()
    assert (record.created_at, record.updated_at) == (T0, T0)


def test_the_bench_form_puts_each_caution_in_its_section(as_technician, unit, technician):
    # The unit has no pack: the variant allows alkaline and lithium, so both show.
    assert not BatteryInstall.objects.filter(unit=unit).exists()
    html = as_technician.get(reverse("record-new", args=[unit.serial])).content.decode()
    sections = {
        m.group(1): m.group(2)
        for m in re.finditer(r'<fieldset class="block" id="fs-(\w+)">(.*?)</fieldset>', html, re.S)
    }
    assert "Pressure test:" in sections["pressure"] and "exclusion zone" in sections["pressure"]
    assert "Release mechanism:" in sections["release"]
    assert "Lithium pack:" in sections["battery"] and "Alkaline pack:" in sections["battery"]
    assert "Release mechanism" not in sections["pressure"]
    assert "local codes" in html  # the deferral to local rules, once, at the top


def test_a_unit_without_a_release_gets_no_release_caution(as_technician, unit):
    unit.variant.release_fitted = False
    unit.variant.allowed_chemistries = ["alkaline"]
    unit.variant.save()
    html = as_technician.get(reverse("record-new", args=[unit.serial])).content.decode()
    assert "Release mechanism" not in html
    assert "Lithium pack" not in html
    assert "Alkaline pack:" in html
    assert "exclusion zone" in html  # the pressure section keeps its own caution
