"""A row's relations given as rows read from the database are not looked up again when the
row is validated; a relation given by a bare key still is, with Django's message."""

import pytest
from django.db import connection
from django.test.utils import CaptureQueriesContext

from fleet.models import AnodePosition, AnodeReading
from fleet.models.kits import loaded_relations
from tests.builders import make_record

pytestmark = pytest.mark.django_db


def _lookups(queries, table: str) -> list[str]:
    return [q["sql"] for q in queries.captured_queries if f'FROM "{table}"' in q["sql"]]


def test_a_reading_of_loaded_rows_validates_without_looking_them_up(unit, technician):
    record = make_record(unit=unit, by=technician)
    position = unit.variant.anode_positions.first()
    reading = AnodeReading(record=record, position=position, mass_g=300.0)
    assert loaded_relations(reading) == {"record", "position"}
    with CaptureQueriesContext(connection) as queries:
        reading.full_clean()
    assert _lookups(queries, "fleet_anodeposition") == []
    assert _lookups(queries, "fleet_servicerecord") == []


def test_a_relation_given_by_key_is_still_looked_up(unit, technician):
    record = make_record(unit=unit, by=technician)
    position = unit.variant.anode_positions.first()
    reading = AnodeReading(record=record, position_id=position.pk, mass_g=300.0)
    assert loaded_relations(reading) == {"record"}
    with CaptureQueriesContext(connection) as queries:
        reading.full_clean()
    # Django's existence check: SELECT 1 ... WHERE id = %s LIMIT 1
    assert any('SELECT 1 AS "a"' in sql for sql in _lookups(queries, "fleet_anodeposition"))


def test_an_unsaved_or_mismatched_row_is_not_trusted(unit, technician):
    record = make_record(unit=unit, by=technician)
    position = unit.variant.anode_positions.first()
    unsaved = AnodePosition(variant=unit.variant, name="not saved", new_net_mass_g=500.0)
    assert "position" not in loaded_relations(AnodeReading(record=record, position=unsaved))
    reading = AnodeReading(record=record, position=position)
    other = unit.variant.anode_positions.exclude(pk=position.pk).first()
    reading.position_id = other.pk  # the key changed after the object was given
    assert "position" not in loaded_relations(reading)
