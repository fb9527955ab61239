"""The new service record page: every entry on one page, saved all together or not at all."""

import datetime as dt
import io

import pytest
from django.urls import reverse
from django.utils import timezone
from PIL import Image

from fleet.models import (
    AnodeReading,
    BatteryInstall,
    PressureTest,
    SealChange,
    ServiceRecord,
)
from fleet.services.records import service_record_close
from tests.builders import make_record

pytestmark = pytest.mark.django_db


def close_open_visit(unit, by):
    """One open visit per unit: close the one in progress before the next opens."""
    record = ServiceRecord.objects.get(unit=unit, closed_at__isnull=True)
    service_record_close(record=record, by=by, at=record.opened_at + dt.timedelta(hours=4))


PREFIXES = (
    "anodes",
    "seals",
    "battery",
    "pressure",
    "release",
    "sensors",
    "openings",
    "packremovals",
)


def record_post(unit, workshop, technician, **rows):
    """POST data for the record page. ``rows`` maps a prefix to a list of field dicts."""
    data = {
        "opened_at": "2026-03-02T09:00",
        "technician": technician.pk,
        "place": workshop.pk,
        "summary": "Routine bench visit",
    }
    for prefix in PREFIXES:
        forms = rows.get(prefix, [])
        data[f"{prefix}-TOTAL_FORMS"] = str(len(forms))
        data[f"{prefix}-INITIAL_FORMS"] = "0"
        data[f"{prefix}-MIN_NUM_FORMS"] = "0"
        data[f"{prefix}-MAX_NUM_FORMS"] = "1000"
        for i, fields in enumerate(forms):
            for key, value in fields.items():
                data[f"{prefix}-{i}-{key}"] = value
    return data


def test_the_page_offers_one_anode_row_per_position(as_technician, unit):
    response = as_technician.get(reverse("record-new", args=[unit.serial]))
    assert response.status_code == 200
    assert response.context["formsets"][0][1].total_form_count() == 2
    assert b"vent it from behind a shield" in response.content


def test_it_saves_a_record_with_all_its_entries(as_technician, unit, workshop, technician):
    anodes = list(unit.variant.anode_positions.all())
    seal = unit.variant.seal_positions.first()
    data = record_post(
        unit,
        workshop,
        technician,
        anodes=[
            {"position": anodes[0].pk, "mass_g": "350", "bond_resistance_ohm": "0.02"},
            {"position": anodes[1].pk, "remaining_percent": "80"},
        ],
        seals=[
            {
                "position": seal.pk,
                "material": "NBR",
                "cure_date": "2025-10-01",
                "reason": "interval",
            }
        ],
        battery=[
            {
                "pack_serial": "PK-77",
                "chemistry": "alkaline",
                "nominal_voltage_v": "31.5",
                "capacity_ah": "17",
                "made_on": "2025-12-01",
                "installed_on": "2026-03-02",
                "ocv_install_v": "32.4",
            }
        ],
        pressure=[
            {
                "tested_on": "2026-03-02",
                "facility": "Tank 2",
                "test_pressure_dbar": "1900",
                "hold_minutes": "30",
                "start_pressure_dbar": "1900",
                "end_pressure_dbar": "1896",
                "water_temperature_start_c": "14",
                "water_temperature_end_c": "14.2",
            }
        ],
    )
    response = as_technician.post(reverse("record-new", args=[unit.serial]), data)
    assert response.status_code == 302, response.context and response.context.get("errors")
    record = ServiceRecord.objects.get()
    assert response["Location"] == record.get_absolute_url()
    assert record.created_by == technician
    assert record.anode_readings.count() == 2
    assert record.seal_changes.count() == 1
    assert BatteryInstall.objects.get().unit == unit
    assert PressureTest.objects.get().end_pressure_dbar == 1896


def test_one_invalid_entry_saves_nothing_and_shows_every_error(
    as_technician, unit, workshop, technician
):
    anodes = list(unit.variant.anode_positions.all())
    data = record_post(
        unit,
        workshop,
        technician,
        anodes=[
            {"position": anodes[0].pk, "mass_g": "350"},
            {"position": anodes[1].pk, "mass_g": "9000"},  # heavier than a new anode (400 g)
        ],
        release=[
            {
                "tested_on": "2026-03-02",
                "kind": "load",
                "seconds_to_release": "4",
                "motor_current_a": "1.2",
            }
        ],
    )
    response = as_technician.post(reverse("record-new", args=[unit.serial]), data)
    assert response.status_code == 400
    body = response.content.decode()
    assert "heavier than a new anode" in body
    assert "A test under load needs the load in kg." in body
    assert ServiceRecord.objects.count() == 0
    assert AnodeReading.objects.count() == 0


def test_a_future_date_is_refused_with_a_field_message(as_technician, unit, workshop, technician):
    future = (timezone.localdate() + dt.timedelta(days=3)).isoformat()
    data = record_post(
        unit,
        workshop,
        technician,
        pressure=[
            {
                "tested_on": future,
                "facility": "Tank 2",
                "test_pressure_dbar": "1900",
                "hold_minutes": "30",
                "start_pressure_dbar": "1900",
                "end_pressure_dbar": "1899",
                "water_temperature_start_c": "14",
                "water_temperature_end_c": "14",
            }
        ],
    )
    response = as_technician.post(reverse("record-new", args=[unit.serial]), data)
    assert response.status_code == 400
    assert "This date is in the future." in response.content.decode()
    assert ServiceRecord.objects.count() == 0


def test_garbage_numbers_get_a_field_message_not_a_500(as_technician, unit, workshop, technician):
    anode = unit.variant.anode_positions.first()
    data = record_post(
        unit, workshop, technician, anodes=[{"position": anode.pk, "mass_g": "twelve"}]
    )
    data["opened_at"] = "not a date"
    response = as_technician.post(reverse("record-new", args=[unit.serial]), data)
    assert response.status_code == 400
    assert "Enter a number." in response.content.decode()
    assert "Enter a valid date/time." in response.content.decode()


def pack(serial: str, day: str) -> dict[str, str]:
    """Form fields for an alkaline pack installed on ``day``."""
    return {
        "pack_serial": serial,
        "chemistry": "alkaline",
        "nominal_voltage_v": "31.5",
        "capacity_ah": "17",
        "made_on": "2025-01-01",
        "installed_on": day,
        "ocv_install_v": "32.0",
    }


def test_a_second_pack_replaces_the_fitted_one(as_technician, unit, workshop, technician):
    url = reverse("record-new", args=[unit.serial])
    as_technician.post(
        url, record_post(unit, workshop, technician, battery=[pack("P1", "2025-06-01")])
    )
    close_open_visit(unit, technician)
    as_technician.post(
        url, record_post(unit, workshop, technician, battery=[pack("P2", "2026-02-01")])
    )
    first, second = BatteryInstall.objects.order_by("installed_on")
    assert first.removed_on == dt.date(2026, 2, 1)
    assert second.removed_on is None


def test_a_chemistry_the_bay_does_not_take_is_refused(as_technician, unit, workshop, technician):
    data = record_post(
        unit,
        workshop,
        technician,
        battery=[
            {
                "pack_serial": "PK-1",
                "chemistry": "li_mno2",
                "nominal_voltage_v": "30",
                "capacity_ah": "10",
                "made_on": "2025-01-01",
                "installed_on": "2025-06-01",
                "ocv_install_v": "31",
            }
        ],
    )
    response = as_technician.post(reverse("record-new", args=[unit.serial]), data)
    assert response.status_code == 400
    assert "battery bay accepts" in response.content.decode()
    assert BatteryInstall.objects.count() == 0


def _jpeg_bytes() -> bytes:
    out = io.BytesIO()
    Image.new("RGB", (64, 48), (120, 80, 40)).save(out, format="JPEG")
    return out.getvalue()


def test_an_anode_photo_is_re_encoded_and_stored(
    as_technician, unit, workshop, technician, settings, tmp_path
):
    from django.core.files.uploadedfile import SimpleUploadedFile

    settings.MEDIA_ROOT = tmp_path
    anode = unit.variant.anode_positions.first()
    data = record_post(unit, workshop, technician, anodes=[{"position": anode.pk, "mass_g": "300"}])
    data["anodes-0-photo"] = SimpleUploadedFile("pit.jpeg", _jpeg_bytes(), "image/jpeg")
    response = as_technician.post(reverse("record-new", args=[unit.serial]), data)
    assert response.status_code == 302
    reading = AnodeReading.objects.get()
    assert reading.photo.name.endswith(".jpg")
    with Image.open(reading.photo.path) as stored:
        assert stored.format == "JPEG"
        assert stored.size == (64, 48)


def test_a_file_that_is_not_a_photo_is_refused(as_technician, unit, workshop, technician):
    from django.core.files.uploadedfile import SimpleUploadedFile

    anode = unit.variant.anode_positions.first()
    data = record_post(unit, workshop, technician, anodes=[{"position": anode.pk, "mass_g": "300"}])
    data["anodes-0-photo"] = SimpleUploadedFile("pit.jpg", _jpeg_bytes()[:200], "image/jpeg")
    response = as_technician.post(reverse("record-new", args=[unit.serial]), data)
    assert response.status_code == 400
    assert AnodeReading.objects.count() == 0


def test_a_closed_record_cannot_be_edited(as_technician, unit, technician):
    record = make_record(unit=unit, by=technician, closed_at=timezone.now())
    response = as_technician.get(reverse("record-edit", args=[record.pk]))
    assert response.status_code == 302
    assert response["Location"] == reverse("record-amend", args=[record.pk])


def test_an_open_record_is_edited_and_versioned(as_technician, unit, workshop, technician):
    record = make_record(unit=unit, by=technician, place=workshop)
    data = record_post(unit, workshop, technician)
    data["summary"] = "Changed summary"
    data["version"] = "1"
    response = as_technician.post(reverse("record-edit", args=[record.pk]), data)
    assert response.status_code == 302
    record.refresh_from_db()
    assert record.summary == "Changed summary"
    assert record.version == 2
    assert record.updated_by == technician


def test_a_stale_edit_is_refused(as_technician, unit, workshop, technician):
    record = make_record(unit=unit, by=technician, place=workshop, version=3)
    data = record_post(unit, workshop, technician)
    data["summary"] = "Stale"
    data["version"] = "2"
    response = as_technician.post(reverse("record-edit", args=[record.pk]), data)
    assert response.status_code == 400
    # It names who changed the record and when (the builder's record: its creator).
    assert f"{technician} changed this record at" in response.content.decode()
    record.refresh_from_db()
    assert record.summary == ""


def test_an_amendment_keeps_the_original_value(as_supervisor, supervisor, unit, technician):
    record = make_record(unit=unit, by=technician)
    reading = AnodeReading.objects.create(
        record=record, position=unit.variant.anode_positions.first(), mass_g=350.0
    )
    as_supervisor.post(
        reverse("record-close", args=[record.pk]), {"confirm": "on", "version": record.version}
    )
    record.refresh_from_db()
    response = as_supervisor.post(
        reverse("record-amend", args=[record.pk]),
        {
            "target_field": f"anodereading:{reading.pk}:mass_g",
            "corrected_value": "305",
            "reason": "Scale read with the bracket on",
            "version": record.version,
        },
    )
    assert response.status_code == 302
    reading.refresh_from_db()
    assert reading.mass_g == 305.0
    amendment = record.amendments.get()
    assert (amendment.original_value, amendment.corrected_value) == ("350.0", "305.0")
    assert amendment.created_by == supervisor
    page = as_supervisor.get(record.get_absolute_url()).content.decode()
    assert "Scale read with the bracket on" in page


def test_an_amendment_is_validated_like_the_original(as_supervisor, unit, technician):
    record = make_record(unit=unit, by=technician)
    reading = AnodeReading.objects.create(
        record=record, position=unit.variant.anode_positions.first(), mass_g=350.0
    )
    as_supervisor.post(
        reverse("record-close", args=[record.pk]), {"confirm": "on", "version": record.version}
    )
    record.refresh_from_db()
    response = as_supervisor.post(
        reverse("record-amend", args=[record.pk]),
        {
            "target_field": f"anodereading:{reading.pk}:mass_g",
            "corrected_value": "9000",
            "reason": "x",
            "version": record.version,
        },
    )
    assert response.status_code == 400
    assert "heavier than a new anode" in response.content.decode()
    reading.refresh_from_db()
    assert reading.mass_g == 350.0
    assert record.amendments.count() == 0


def test_the_record_page_shows_who_created_and_closed_it(
    as_supervisor, supervisor, unit, technician
):
    record = make_record(unit=unit, by=technician)
    AnodeReading.objects.create(
        record=record, position=unit.variant.anode_positions.first(), mass_g=390
    )
    SealChange  # noqa: B018 (imported for the record's sections)
    as_supervisor.post(
        reverse("record-close", args=[record.pk]), {"confirm": "on", "version": record.version}
    )
    record.refresh_from_db()
    body = as_supervisor.get(record.get_absolute_url()).content.decode()
    assert "Closed, read-only" in body
    assert f"Created</dt><dd>by {technician}," in body
    assert f"Closed</dt><dd>by {supervisor}," in body
    # Closing is not a change to the contents: nobody edited the record after creating it.
    assert "Last changed" not in body


def test_a_fitted_pack_is_taken_out_with_its_removal_volts(
    as_technician, unit, workshop, technician
):
    url = reverse("record-new", args=[unit.serial])
    as_technician.post(
        url, record_post(unit, workshop, technician, battery=[pack("P1", "2025-06-01")])
    )
    close_open_visit(unit, technician)
    page = as_technician.get(url).content.decode()
    assert "Pack P1, installed 2025-06-01." in page
    data = record_post(unit, workshop, technician)
    data.update(remove_pack_on="2026-01-15", removed_pack_ocv_v="23.0")
    response = as_technician.post(url, data)
    assert response.status_code == 302
    removed = BatteryInstall.objects.get()
    assert removed.removed_on == dt.date(2026, 1, 15)
    assert removed.ocv_removal_v == 23.0


def test_a_removal_before_the_install_is_refused(as_technician, unit, workshop, technician):
    url = reverse("record-new", args=[unit.serial])
    data = record_post(
        unit,
        workshop,
        technician,
        battery=[
            {
                "pack_serial": "P1",
                "chemistry": "alkaline",
                "nominal_voltage_v": "31.5",
                "capacity_ah": "17",
                "made_on": "2025-01-01",
                "installed_on": "2025-06-01",
                "ocv_install_v": "32.0",
            }
        ],
    )
    as_technician.post(url, data)
    close_open_visit(unit, technician)
    data = record_post(unit, workshop, technician)
    data.update(remove_pack_on="2025-05-01")
    response = as_technician.post(url, data)
    assert response.status_code == 400
    assert "Removal must be on or after the install date." in response.content.decode()
    assert BatteryInstall.objects.get().removed_on is None
    assert ServiceRecord.objects.count() == 1


def test_a_variant_without_a_release_is_not_offered_a_release_test(as_technician, workshop):
    from tests.builders import make_unit, make_variant

    plain = make_unit(variant=make_variant(name="No-release build", release_fitted=False))
    page = as_technician.get(reverse("record-new", args=[plain.serial]))
    assert page.status_code == 200
    headings = [heading for heading, _ in page.context["formsets"]]
    assert "Release test" not in headings
    assert 'name="release-TOTAL_FORMS"' not in page.content.decode()


def test_a_release_test_on_a_unit_without_a_release_is_refused(technician, workshop):
    from django.core.exceptions import ValidationError

    from fleet.models import ReleaseTest
    from tests.builders import make_unit, make_variant

    plain = make_unit(variant=make_variant(name="No-release build", release_fitted=False))
    record = make_record(unit=plain, by=technician)
    test = ReleaseTest(
        record=record,
        tested_on=dt.date(2026, 3, 2),
        kind=ReleaseTest.Kind.BENCH,
        seconds_to_release=4.0,
        motor_current_a=0.4,
        limit_switch_ok=True,
        acoustic_command_ok=True,
    )
    with pytest.raises(ValidationError) as refused:
        test.full_clean()
    assert "has no release fitted" in refused.value.message_dict["kind"][0]


def test_the_battery_row_offers_only_the_chemistries_the_bay_accepts(as_technician, unit):
    page = as_technician.get(reverse("record-new", args=[unit.serial])).content.decode()
    assert 'value="alkaline"' in page and 'value="li_socl2"' in page
    assert 'value="li_mno2"' not in page
