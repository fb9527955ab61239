"""An anode reading's rules are written once (``anode_reading_errors``): ``AnodeReading.clean``
applies them to a model, ``check_entry_values`` to plain values, and both refuse the same
values with the same messages as ``full_clean``."""

import math

import pytest
from django.core.exceptions import ValidationError
from django.db.models import Max

from fleet.models import AnodePosition, AnodeReading
from fleet.models.records import EntryValues, check_entry_values
from tests.builders import make_record, make_variant

pytestmark = pytest.mark.django_db

CASES = {
    "good": {"mass_g": 300.0},
    "percent only": {"remaining_percent": 55.0},
    "neither mass nor percent": {},
    "mass not finite": {"mass_g": math.nan},
    "mass infinite": {"mass_g": math.inf, "bond_resistance_ohm": 2.0},
    "mass below zero": {"mass_g": -1.0},
    "heavier than new": {"mass_g": 401.0},
    "over the field's bound": {"mass_g": 100001.0},
    "percent over 100": {"mass_g": 10.0, "remaining_percent": 100.5},
    "bond out of range": {"mass_g": 10.0, "bond_resistance_ohm": 1000.1},
    "bond not finite": {"remaining_percent": 3.0, "bond_resistance_ohm": -math.inf},
    "note too long": {"mass_g": 10.0, "note": "x" * 201},
    "several at once": {"mass_g": 500.0, "remaining_percent": -2.0, "note": "y" * 300},
}


def _model_messages(reading: AnodeReading) -> dict[str, list[str]]:
    try:
        reading.full_clean()
    except ValidationError as exc:
        return exc.message_dict
    return {}


def _plain_messages(values: dict, variant_id: int) -> dict[str, list[str]]:
    try:
        check_entry_values(AnodeReading, values, unit_variant_id=variant_id)
    except ValidationError as exc:
        return exc.message_dict
    return {}


def test_anode_readings_may_be_checked_as_values():
    assert AnodeReading.checked_as_values()


@pytest.mark.parametrize("case", list(CASES))
def test_plain_values_are_refused_as_the_model_refuses_them(case, unit, technician):
    record = make_record(unit=unit, by=technician)
    position = unit.variant.anode_positions.first()
    values = {"position": position, **CASES[case]}
    expected = _model_messages(AnodeReading(record=record, **values))
    assert _plain_messages(dict(values), unit.variant_id) == expected
    if case in ("good", "percent only"):
        assert expected == {}
    else:
        assert expected


def test_a_position_of_another_variant_is_refused_by_both(unit, technician):
    record = make_record(unit=unit, by=technician)
    other = make_variant(name="Other variant").anode_positions.first()
    expected = _model_messages(AnodeReading(record=record, position=other, mass_g=1.0))
    assert expected == {"position": ["This anode position belongs to another variant."]}
    assert _plain_messages({"position": other, "mass_g": 1.0}, unit.variant_id) == expected


def test_the_plain_check_fills_the_defaults_a_new_reading_has(unit):
    position = unit.variant.anode_positions.first()
    values = {"position": position, "mass_g": 12.0}
    check_entry_values(AnodeReading, values, unit_variant_id=unit.variant_id)
    assert values["replaced"] is False and values["note"] == "" and values["uid"] is not None
    held = EntryValues(AnodeReading, values).instance()
    assert (held.mass_g, held.position, held.uid) == (12.0, position, values["uid"])


def test_clean_names_a_position_that_does_not_exist(unit, technician):
    record = make_record(unit=unit, by=technician)
    missing = (AnodePosition.objects.aggregate(top=Max("pk"))["top"] or 0) + 1000
    reading = AnodeReading(record=record, position_id=missing, mass_g=10.0)
    with pytest.raises(ValidationError) as refused:
        reading.clean()
    assert refused.value.message_dict == {"position": [f"No anode position has the id {missing}."]}
    # full_clean reports it too (the key's own check first), rather than failing.
    with pytest.raises(ValidationError) as refused:
        reading.full_clean()
    assert f"No anode position has the id {missing}." in refused.value.message_dict["position"]


def test_clean_still_applies_the_other_rules_beside_a_missing_position(unit, technician):
    record = make_record(unit=unit, by=technician)
    missing = (AnodePosition.objects.aggregate(top=Max("pk"))["top"] or 0) + 1000
    reading = AnodeReading(record=record, position_id=missing)
    with pytest.raises(ValidationError) as refused:
        reading.clean()
    assert set(refused.value.message_dict) == {"mass_g", "position"}
