"""A correction is parsed by the same form field that took the value at entry: typed,
localised, time-zone aware, with the entry form's limits and messages; then the model checks
it as a whole. Nothing the entry form would refuse reaches the record."""

import datetime as dt
import zoneinfo

import pytest
from django.urls import reverse

from fleet.forms import parse_amendment_value
from fleet.models import AnodeReading, HousingOpening, PressureTest, ReleaseTest
from fleet.services.records import amendable_fields, amendable_targets
from tests.web.entry_rows import assert_storable, closed_record_with_every_kind

pytestmark = pytest.mark.django_db


@pytest.fixture
def closed(unit, technician):
    return closed_record_with_every_kind(unit, technician)


def _amend(client, record, target, field_name, value, reason="Transcription error"):
    record.refresh_from_db()
    return client.post(
        reverse("record-amend", args=[record.pk]),
        {
            "version": record.version,
            "target_field": f"{target._meta.model_name}:{target.pk}:{field_name}",
            "corrected_value": value,
            "reason": reason,
        },
    )


@pytest.mark.parametrize("value", ["nan", "NaN", "inf", "-inf", "1e309", "-1e309"])
@pytest.mark.parametrize(
    ("kind", "field_name"),
    [(AnodeReading, "mass_g"), (PressureTest, "hold_minutes"), (ReleaseTest, "load_kg")],
)
def test_a_non_finite_correction_is_refused_with_the_form_message(
    as_supervisor, closed, kind, field_name, value
):
    target = kind.objects.filter(record=closed).first()
    before = getattr(target, field_name)
    response = _amend(as_supervisor, closed, target, field_name, value)
    assert response.status_code == 400
    # django.forms.FloatField's own message for a value that is not a finite number
    assert response.context["form"].errors["corrected_value"] == ["Enter a number."]
    target.refresh_from_db()
    assert getattr(target, field_name) == before
    assert closed.amendments.count() == 0


def test_a_naive_time_is_read_in_the_workshop_time_zone(as_supervisor, closed, settings):
    settings.TIME_ZONE = "Pacific/Auckland"
    opening = HousingOpening.objects.get(record=closed)
    response = _amend(as_supervisor, closed, opening, "opened_at", "2026-03-02 20:45")
    assert response.status_code == 302, response.context and response.context["form"].errors
    opening.refresh_from_db()
    # 20:45 in Auckland on 2 March 2026 (daylight time, UTC+13) is 07:45 UTC the same day.
    assert opening.opened_at == dt.datetime(
        2026, 3, 2, 20, 45, tzinfo=zoneinfo.ZoneInfo("Pacific/Auckland")
    )
    assert opening.opened_at == dt.datetime(2026, 3, 2, 7, 45, tzinfo=dt.UTC)
    amendment = closed.amendments.get()
    assert amendment.corrected_value == "2026-03-02T07:45:00+00:00"
    assert amendment.original_value == "2026-03-02T08:30:00+00:00"


def test_an_aware_time_keeps_its_offset(as_supervisor, closed):
    opening = HousingOpening.objects.get(record=closed)
    response = _amend(as_supervisor, closed, opening, "opened_at", "2026-03-02T10:40+02:00")
    assert response.status_code == 302
    opening.refresh_from_db()
    assert opening.opened_at == dt.datetime(2026, 3, 2, 8, 40, tzinfo=dt.UTC)


@pytest.mark.parametrize(
    ("value", "message"),
    [
        ("0001-01-01 00:00", "before 1 January 1980"),
        ("9999-12-31 23:59", "check the year"),
        ("2026-02-30 10:00", "Enter a valid date/time."),
    ],
)
def test_an_impossible_time_gets_a_message(as_supervisor, closed, settings, value, message):
    settings.TIME_ZONE = "Pacific/Pago_Pago"
    opening = HousingOpening.objects.get(record=closed)
    response = _amend(as_supervisor, closed, opening, "opened_at", value)
    assert response.status_code == 400
    assert message in " ".join(response.context["form"].errors["corrected_value"])


@pytest.mark.parametrize("value", ["0001-01-01", "9999-12-31"])
def test_a_date_correction_in_year_1_or_9999_gets_a_message(as_supervisor, closed, value):
    test = PressureTest.objects.get(record=closed)
    response = _amend(as_supervisor, closed, test, "tested_on", value)
    assert response.status_code == 400
    assert "check the year" in " ".join(response.context["form"].errors["corrected_value"])


def test_a_choice_is_checked_against_the_form_choices(as_supervisor, closed):
    test = ReleaseTest.objects.get(record=closed)
    response = _amend(as_supervisor, closed, test, "kind", "catapult")
    assert response.status_code == 400
    assert "Select a valid choice" in " ".join(response.context["form"].errors["corrected_value"])


@pytest.mark.parametrize(("typed", "stored"), [("no", False), ("False", False), ("0", False)])
def test_a_yes_no_field_takes_yes_or_no(as_supervisor, closed, typed, stored):
    test = ReleaseTest.objects.get(record=closed)
    assert test.acoustic_command_ok is True
    response = _amend(as_supervisor, closed, test, "acoustic_command_ok", typed)
    assert response.status_code == 302
    test.refresh_from_db()
    assert test.acoustic_command_ok is stored


def test_a_yes_no_field_refuses_anything_else(as_supervisor, closed):
    test = ReleaseTest.objects.get(record=closed)
    response = _amend(as_supervisor, closed, test, "acoustic_command_ok", "perhaps")
    assert response.status_code == 400
    assert response.context["form"].errors["corrected_value"] == ["Enter yes or no."]


def test_an_empty_required_value_is_refused_and_an_optional_one_cleared(as_supervisor, closed):
    test = ReleaseTest.objects.get(record=closed)
    response = _amend(as_supervisor, closed, test, "motor_current_a", "  ")
    assert response.status_code == 400
    assert response.context["form"].errors["corrected_value"] == ["This field is required."]
    response = _amend(as_supervisor, closed, test, "kind", "bench")  # no load needed then
    assert response.status_code == 302
    response = _amend(as_supervisor, closed, test, "load_kg", "")
    assert response.status_code == 302
    test.refresh_from_db()
    assert test.load_kg is None


def test_a_long_summary_or_reason_is_refused_with_a_message(as_supervisor, closed):
    response = _amend(as_supervisor, closed, closed, "summary", "x" * 2001)
    assert response.status_code == 400
    assert "at most 2000 characters" in response.content.decode()
    response = _amend(as_supervisor, closed, closed, "summary", "Seal lot noted", "r" * 501)
    assert response.status_code == 400
    assert "at most 500 characters" in response.content.decode()
    assert closed.amendments.count() == 0


# Values no entry form accepts for a number, and dates and texts at and past every limit.
HOSTILE = [
    "nan",
    "inf",
    "-inf",
    "1e309",
    "\x00",
    "12\x00",
    "0001-01-01",
    "9999-12-31",
    "0001-01-01 00:00",
    "9999-12-31T23:59",
    "x" * 1_000_000,
]


def test_every_amendable_field_refuses_each_hostile_value_or_stores_what_the_form_accepts(
    closed, supervisor
):
    """Every amendable field of every target, through the service, with each hostile value:
    a ValidationError naming the value, or a stored value the model accepts."""
    from django.core.exceptions import ValidationError

    from fleet.services.records import amendment_create

    targets = amendable_targets(closed)
    covered = 0
    for target in targets:
        for field_name in amendable_fields(target):
            covered += 1
            for value in HOSTILE:
                try:
                    parse_amendment_value(target, field_name, value)
                except ValidationError as exc:
                    assert "corrected_value" in exc.message_dict, (field_name, value[:20])
                    continue
                try:
                    amendment_create(
                        record=closed,
                        target=target,
                        field_name=field_name,
                        corrected_value=value,
                        reason="Fuzzed correction",
                        by=supervisor,
                    )
                except ValidationError:
                    pass
                target.refresh_from_db()
                assert_storable(target)
    assert covered == sum(len(amendable_fields(t)) for t in targets) > 40
