"""``plain_columns`` reads the values Django reads (the same values of the same types), for
the planner's whole-fleet reads: a unit's columns across its relations, its anode state
rows and its due rows, each with date-times and dates among them."""

import pytest
from django.utils import timezone

from fleet.due.condition import annotate_condition
from fleet.due.facts import ANODE_COLUMNS, UNIT_COLUMNS
from fleet.models import AnodeReading, AnodeState, DueRow, Transponder
from fleet.models.functions import Day, Instant, plain_columns
from tests.due.test_engine import deploy, t, visit
from tests.test_selectors import pack

pytestmark = pytest.mark.django_db

DUE_COLUMNS = ("unit_id", "key", "due_on", "failed", "basis")


def _same(plain, django):
    assert plain == django
    for a, b in zip(plain, django, strict=True):
        assert [type(x) for x in a] == [type(x) for x in b]


def test_it_reads_what_django_reads(unit, site, technician):
    anode = unit.variant.anode_positions.order_by("name").first()
    visit(
        unit, technician, t(2026, 1, 5, 9, 30), AnodeReading(position=anode, mass_g=390.0), pack()
    )
    deploy(unit, site, technician, t(2026, 2, 1, 6, 15), t(2026, 5, 1, 18, 45))
    visit(unit, technician, t(2026, 5, 5, 9), AnodeReading(position=anode, mass_g=380.5))
    deploy(unit, site, technician, t(2026, 6, 1, 7))  # still in the water
    units = annotate_condition(Transponder.objects.all(), timezone.localdate())
    columns = plain_columns(Transponder, UNIT_COLUMNS)
    assert {type(c) for c in columns} == {str, Instant, Day}
    _same(list(units.values_list(*columns)), list(units.values_list(*UNIT_COLUMNS)))
    _same(
        list(AnodeState.objects.values_list(*plain_columns(AnodeState, ANODE_COLUMNS))),
        list(AnodeState.objects.values_list(*ANODE_COLUMNS)),
    )
    rows = DueRow.objects.order_by("pk")
    assert rows.exclude(due_on=None).exists()
    _same(
        list(rows.values_list(*plain_columns(DueRow, DUE_COLUMNS))),
        list(rows.values_list(*DUE_COLUMNS)),
    )


def test_a_missing_value_stays_missing(unit):
    # A unit never written: no state row, so every column through it is None.
    units = annotate_condition(Transponder.objects.filter(pk=unit.pk), timezone.localdate())
    _same(
        list(units.values_list(*plain_columns(Transponder, UNIT_COLUMNS))),
        list(units.values_list(*UNIT_COLUMNS)),
    )


def test_a_date_is_converted_only_where_the_driver_gives_text():
    """SQLite gives a date as text, parsed once; PostgreSQL's driver gives the date itself,
    so no call per value is made there."""
    from django.db import connection

    from fleet.models.functions import Day, _day

    converters = Day("due_on").get_db_converters(connection)
    assert converters == ([_day] if connection.vendor == "sqlite" else [])
