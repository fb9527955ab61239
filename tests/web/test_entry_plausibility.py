"""Plausibility at entry: what a technician types is refused with a message when it cannot be
right, instead of being saved or failing later with a 500."""

import datetime as dt

import pytest
from django.conf import settings
from django.core.exceptions import ValidationError
from django.db.models import F
from django.test import override_settings
from django.urls import reverse
from django.utils import timezone

from fleet.calc.seawater import pressure_dbar
from fleet.models import (
    AnodeReading,
    PressureTest,
    ReleaseTest,
    SealChange,
    SensorCheck,
    ServiceRecord,
    Variant,
)
from fleet.selectors import previous_anode_mass
from tests.builders import T0, make_record, make_unit, make_variant, pressure_test
from tests.web.test_records import pack, record_post

pytestmark = pytest.mark.django_db


def _pressure_row(**overrides: str) -> dict[str, str]:
    row = {
        "tested_on": "2026-03-02",
        "facility": "Tank 2",
        "test_pressure_dbar": "1900",
        "hold_minutes": "60",
        "start_pressure_dbar": "1900",
        "end_pressure_dbar": "1898",
        "water_temperature_start_c": "14",
        "water_temperature_end_c": "14.2",
    }
    row.update(overrides)
    return row


def _post(client, unit, workshop, technician, **rows):
    data = record_post(unit, workshop, technician, **rows)
    return client.post(reverse("record-new", args=[unit.serial]), data)


# --- the numbers that used to give a 500 -------------------------------------------------


def test_water_at_45_c_is_refused_with_a_field_message_not_a_500(
    as_technician, unit, workshop, technician
):
    row = _pressure_row(water_temperature_start_c="45", water_temperature_end_c="45")
    response = _post(as_technician, unit, workshop, technician, pressure=[row])
    assert response.status_code == 400
    assert "less than or equal to 40.0" in response.content.decode()
    assert ServiceRecord.objects.count() == 0


def test_a_pt100_reading_beyond_850_c_is_refused_not_a_500(
    as_technician, unit, workshop, technician
):
    # 450 ohm is above a Pt100's 390.48 ohm at 850 °C (IEC 60751 CVD), the top of calc.rtd.
    row = {
        "checked_on": "2026-03-02",
        "sensor": "temperature",
        "reference_value": "4.0",
        "unit_reading": "4.05",
        "raw_resistance_ohm": "450",
    }
    response = _post(as_technician, unit, workshop, technician, sensors=[row])
    assert response.status_code == 400
    assert "less than or equal to 390.0" in response.content.decode()
    assert SensorCheck.objects.count() == 0


def test_a_pack_above_the_battery_calc_capacity_is_refused_not_a_500(
    as_technician, unit, workshop, technician
):
    row = pack("PK-1", "2026-03-02") | {"capacity_ah": "5000"}
    response = _post(as_technician, unit, workshop, technician, battery=[row])
    assert response.status_code == 400
    assert "less than or equal to 1000.0" in response.content.decode()


# --- pressure test plausibility ----------------------------------------------------------


def test_an_end_pressure_above_the_start_is_refused_with_repeat_the_test(
    as_technician, unit, workshop, technician
):
    row = _pressure_row(
        test_pressure_dbar="1900", start_pressure_dbar="1900", end_pressure_dbar="1920"
    )
    response = _post(as_technician, unit, workshop, technician, pressure=[row])
    assert response.status_code == 400
    body = response.content.decode()
    assert "a gauge or temperature effect or a leak in the rig: repeat the test" in body
    assert PressureTest.objects.count() == 0


def test_9500_dbar_at_the_end_after_3810_at_the_start_is_refused(technician):
    variant = make_variant(name="Deep 3000", depth_rating_m=3000.0)
    unit = make_unit(variant=variant, serial="TX-3000")
    record = make_record(unit=unit, by=technician)
    test = pressure_test(
        dt.date(2026, 3, 2),
        record=record,
        test_pressure_dbar=3810,
        start_pressure_dbar=3810,
        end_pressure_dbar=9500,
    )
    with pytest.raises(ValidationError) as caught:
        test.full_clean()
    assert set(caught.value.message_dict) == {"end_pressure_dbar"}


def test_an_end_within_the_gauge_tolerance_above_the_start_is_accepted(unit, technician):
    # 0.5 % of 1900 dbar is 9.5 dbar: a reading 5 dbar up is gauge noise, not a rise.
    record = make_record(unit=unit, by=technician)
    pressure_test(dt.date(2026, 3, 2), record=record, end_pressure_dbar=1905).full_clean()


def test_a_9000_dbar_test_on_a_3000_m_unit_is_refused_against_its_rating(technician):
    variant = make_variant(name="Deep 3000", depth_rating_m=3000.0)
    unit = make_unit(variant=variant, serial="TX-3000")
    record = make_record(unit=unit, by=technician)
    rated = pressure_dbar(3000.0, 45.0)  # TEOS-10 via gsw, about 3029 dbar
    test = pressure_test(
        dt.date(2026, 3, 2),
        record=record,
        test_pressure_dbar=9000,
        start_pressure_dbar=9000,
        end_pressure_dbar=8995,
    )
    with pytest.raises(ValidationError) as caught:
        test.full_clean()
    assert "housing is not rated for it" in caught.value.message_dict["test_pressure_dbar"][0]
    # At the limit (1.5 × the rating's pressure) the test is accepted.
    top = 1.5 * rated
    pressure_test(
        dt.date(2026, 3, 2),
        record=record,
        test_pressure_dbar=top,
        start_pressure_dbar=top,
        end_pressure_dbar=top - 5,
    ).full_clean()


def test_a_start_of_9000_after_a_3810_dbar_test_is_refused(technician):
    variant = make_variant(name="Deep 3000", depth_rating_m=3000.0)
    unit = make_unit(variant=variant, serial="TX-3000")
    record = make_record(unit=unit, by=technician)
    test = pressure_test(
        dt.date(2026, 3, 2),
        record=record,
        test_pressure_dbar=3810,
        start_pressure_dbar=9000,
        end_pressure_dbar=8990,
    )
    with pytest.raises(ValidationError) as caught:
        test.full_clean()
    message = caught.value.message_dict["start_pressure_dbar"][0]  # 3810 × (1 ± 0.005)
    assert "within the gauge tolerance of ±0.5 % (3790.9 to 3829.0 dbar)" in message


@override_settings(
    HOLDFAST={
        **settings.HOLDFAST,
        "PRESSURE_TEST_MAX_OVER_RATING": 1.2,
        "PRESSURE_GAUGE_TOLERANCE_PERCENT": 2.0,
    }
)
def test_the_rating_multiple_and_the_gauge_tolerance_come_from_settings(unit, technician):
    record = make_record(unit=unit, by=technician)
    rated = pressure_dbar(1500.0, 45.0)
    over = round(1.2 * rated + 1)
    with pytest.raises(ValidationError) as caught:
        pressure_test(
            dt.date(2026, 3, 2),
            record=record,
            test_pressure_dbar=over,
            start_pressure_dbar=over * 1.015,  # inside 2 %
            end_pressure_dbar=over,
        ).full_clean()
    assert set(caught.value.message_dict) == {"test_pressure_dbar"}


@pytest.mark.parametrize(
    ("field", "value"),
    [("test_pressure_dbar", 0.0), ("hold_minutes", 0.0), ("water_temperature_end_c", -2.5)],
)
def test_a_zero_test_a_zero_hold_and_water_below_minus_2_c_are_refused(
    unit, technician, field, value
):
    record = make_record(unit=unit, by=technician)
    test = pressure_test(dt.date(2026, 3, 2), record=record, **{field: value})
    with pytest.raises(ValidationError) as caught:
        test.full_clean()
    assert field in caught.value.message_dict


def test_a_held_test_at_the_proof_pressure_is_accepted(unit, technician):
    record = make_record(unit=unit, by=technician)
    pressure_test(dt.date(2026, 3, 2), record=record).full_clean()


# --- variant: the proof pressure stays inside the pressure-test calc ----------------------


def test_a_full_ocean_depth_rating_at_the_default_proof_factor_is_refused(db):
    # 1.25 × gsw.p_from_z(-11000 m, 90°) is about 14,000 dbar, past calc.pressure's 12,000.
    variant = Variant(
        name="Full depth",
        depth_rating_m=11000.0,
        housing_alloy="ti_gr5",
        allowed_chemistries=["li_socl2"],
        cells_in_series=8,
        listen_current_a=0.0002,
    )
    with pytest.raises(ValidationError) as caught:
        variant.full_clean()
    assert "above the 12000 dbar" in caught.value.message_dict["depth_rating_m"][0]
    variant.depth_rating_m = 9000.0  # 1.25 × about 9,150 dbar = 11,440 dbar
    variant.full_clean()


def test_a_proof_factor_above_the_entry_limit_is_refused(db):
    variant = Variant(
        name="Overproofed",
        depth_rating_m=1000.0,
        housing_alloy="al6061",
        allowed_chemistries=["alkaline"],
        cells_in_series=21,
        listen_current_a=0.0002,
        proof_factor=2.0,
    )
    with pytest.raises(ValidationError) as caught:
        variant.full_clean()
    assert set(caught.value.message_dict) == {"proof_factor"}


# --- release test ranges -----------------------------------------------------------------


@pytest.mark.parametrize(
    ("field", "value", "ok"),
    [
        ("seconds_to_release", 0.1, True),
        ("seconds_to_release", 600.0, True),
        ("seconds_to_release", 0.0, False),
        ("seconds_to_release", 601.0, False),
        ("motor_current_a", 0.01, True),
        ("motor_current_a", 20.0, True),
        ("motor_current_a", 0.0, False),
        ("motor_current_a", 25.0, False),
        ("load_kg", 5000.0, True),
        ("load_kg", 5001.0, False),
    ],
)
def test_release_test_numbers_stay_in_their_physical_ranges(unit, technician, field, value, ok):
    record = make_record(unit=unit, by=technician)
    values = {"seconds_to_release": 4.0, "motor_current_a": 1.2, "load_kg": 250.0, field: value}
    test = ReleaseTest(record=record, tested_on=dt.date(2026, 3, 2), kind="load", **values)
    if ok:
        test.full_clean()
    else:
        with pytest.raises(ValidationError) as caught:
            test.full_clean()
        assert set(caught.value.message_dict) == {field}


# --- dates -------------------------------------------------------------------------------


def test_a_cure_date_before_1980_is_refused_with_a_message(unit, technician):
    record = make_record(unit=unit, by=technician)
    change = SealChange(
        record=record,
        position=unit.variant.seal_positions.first(),
        material="NBR",
        cure_date=dt.date(1979, 12, 31),
        reason="interval",
    )
    with pytest.raises(ValidationError) as caught:
        change.full_clean()
    assert caught.value.message_dict["cure_date"] == [
        "1979-12-31 is before 1 January 1980; check the year."
    ]
    change.cure_date = dt.date(1980, 1, 1)
    change.full_clean()


def test_year_one_dates_on_the_bench_visit_page_get_messages_not_a_500(
    as_technician, unit, workshop, technician
):
    data = record_post(unit, workshop, technician, pressure=[_pressure_row(tested_on="0001-01-01")])
    data["opened_at"] = "0001-01-01T00:00"
    with timezone.override("Pacific/Auckland"):  # a zone ahead of UTC: year 1 minus hours
        response = as_technician.post(reverse("record-new", args=[unit.serial]), data)
    assert response.status_code == 400
    assert response.content.decode().count("is before 1 January 1980") == 2
    assert ServiceRecord.objects.count() == 0


def test_a_planned_start_far_in_the_future_is_refused_not_a_500(as_viewer, unit, site):
    response = as_viewer.get(
        reverse("unit-readiness", args=[unit.serial]),
        {"site": site.pk, "start": "9999-12-01", "days": 3650},
    )
    assert response.status_code == 400
    assert "The start must be on or before" in response.content.decode()


# --- anode heavier than its last reading -------------------------------------------------


def _anode_visit(client, unit, workshop, technician, opened_at, **row):
    """Post a bench visit with one anode row; a saved visit is closed at once (one open
    visit per unit), as a supervisor would before the next visit."""
    position = unit.variant.anode_positions.first()
    data = record_post(unit, workshop, technician, anodes=[{"position": position.pk, **row}])
    data["opened_at"] = opened_at
    response = client.post(reverse("record-new", args=[unit.serial]), data)
    if response.status_code == 302:
        ServiceRecord.objects.filter(unit=unit, closed_at=None).update(
            closed_at=F("opened_at") + dt.timedelta(hours=8)
        )
    return response


def test_an_anode_heavier_than_its_last_reading_asks_for_confirmation_then_saves(
    as_technician, unit, workshop, technician
):
    first = _anode_visit(
        as_technician, unit, workshop, technician, "2026-01-10T09:00", mass_g="350"
    )
    assert first.status_code == 302

    heavier = _anode_visit(
        as_technician, unit, workshop, technician, "2026-03-02T09:00", mass_g="362"
    )
    assert heavier.status_code == 400
    body = heavier.content.decode()
    assert "362 g is heavier than this anode&#x27;s last reading (350 g on 2026-01-10)" in body
    assert 'type="checkbox" name="anodes-0-confirm_heavier"' in body
    assert AnodeReading.objects.count() == 1

    confirmed = _anode_visit(
        as_technician,
        unit,
        workshop,
        technician,
        "2026-03-02T09:00",
        mass_g="362",
        confirm_heavier="on",
    )
    assert confirmed.status_code == 302
    assert sorted(AnodeReading.objects.values_list("mass_g", flat=True)) == [350.0, 362.0]


def test_a_lighter_reading_saves_without_asking_and_the_box_stays_hidden(
    as_technician, unit, workshop, technician
):
    _anode_visit(as_technician, unit, workshop, technician, "2026-01-10T09:00", mass_g="350")
    page = as_technician.get(reverse("record-new", args=[unit.serial]))
    assert 'type="hidden" name="anodes-0-confirm_heavier"' in page.content.decode()
    response = _anode_visit(
        as_technician, unit, workshop, technician, "2026-03-02T09:00", mass_g="340"
    )
    assert response.status_code == 302


def test_a_new_anode_after_a_replacement_is_not_compared_with_the_old_one(
    as_technician, unit, workshop, technician
):
    _anode_visit(
        as_technician,
        unit,
        workshop,
        technician,
        "2026-01-10T09:00",
        mass_g="120",
        replaced="on",
    )
    response = _anode_visit(
        as_technician, unit, workshop, technician, "2026-03-02T09:00", mass_g="398"
    )
    assert response.status_code == 302


def test_the_previous_mass_skips_readings_without_a_mass_and_later_visits(unit, technician):
    position = unit.variant.anode_positions.first()
    for opened_at, values in (
        (T0.replace(month=1, day=10), {"mass_g": 380.0}),
        (T0.replace(month=1, day=20), {"remaining_percent": 90.0}),
        (T0.replace(month=2, day=10), {"mass_g": 300.0}),  # after the visit asked about
    ):
        record = make_record(unit=unit, by=technician, opened_at=opened_at, closed_at=opened_at)
        AnodeReading.objects.create(record=record, position=position, **values)
    previous = previous_anode_mass(
        unit_id=unit.pk, position_id=position.pk, before=T0.replace(month=1, day=30)
    )
    assert previous is not None
    assert (previous.mass_g, previous.on) == (380.0, dt.date(2026, 1, 10))
