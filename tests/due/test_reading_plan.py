"""A unit's readings are found through its visits, not by a position's readings across the
fleet (SQLite keeps no statistics, so its planner has to be steered)."""

import pytest
from django.db import connection

from fleet.due.state import unit_readings

pytestmark = pytest.mark.django_db


@pytest.mark.skipif(connection.vendor != "sqlite", reason="SQLite's planner")
def test_a_units_readings_at_a_position_are_looked_up_by_its_visits(unit):
    position = unit.variant.anode_positions.first()
    query = unit_readings(unit, [position.pk]).order_by("record__opened_at").values("mass_g")
    sql, params = query.query.sql_with_params()
    with connection.cursor() as cursor:
        cursor.execute(f"EXPLAIN QUERY PLAN {sql}", params)
        plan = " | ".join(row[-1] for row in cursor.fetchall())
    assert "unit_id=?" in plan and "record_id=?" in plan, plan
    assert "position_id=?" not in plan, plan
