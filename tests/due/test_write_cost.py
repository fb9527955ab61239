"""A write costs what it changes: saving a bench visit makes the same number of queries
whatever the unit's history, and leaves the state equal to a rebuild."""

import datetime as dt

import pytest
from django.core.exceptions import ValidationError
from django.db import connection, transaction
from django.test.utils import CaptureQueriesContext
from django.utils import timezone

from fleet.due.snapshot import differences, state_snapshot
from fleet.due.store import rebuild_all, refresh_unit
from fleet.models import AnodeReading, AnodeState, Deployment, ServiceRecord
from fleet.services.records import service_record_save
from tests.builders import make_unit
from tests.due.test_engine import t

pytestmark = pytest.mark.django_db


def _history(unit, technician, site, visits: int) -> None:
    """``visits`` deployments of five days, each followed by a closed bench visit with a
    reading at every anode, written in bulk, then the unit's state derived once."""
    positions = list(unit.variant.anode_positions.all())
    start = t(2000, 1, 3)
    Deployment.objects.bulk_create(
        Deployment(
            unit=unit,
            site=site,
            over_side_at=start + dt.timedelta(days=7 * i),
            recovered_at=start + dt.timedelta(days=7 * i + 5),
            planned_days=5,
            planned_interrogations_per_day=100,
            transmit_power_step=1,
            created_by=technician,
        )
        for i in range(visits)
    )
    records = ServiceRecord.objects.bulk_create(
        ServiceRecord(
            unit=unit,
            opened_at=start + dt.timedelta(days=7 * i + 6),
            closed_at=start + dt.timedelta(days=7 * i + 6, hours=8),
            technician=technician,
            place=unit.place,
            created_by=technician,
        )
        for i in range(visits)
    )
    AnodeReading.objects.bulk_create(
        AnodeReading(record=r, position=p, mass_g=399.0 - i * 0.02)
        for i, r in enumerate(records)
        for p in positions
    )
    refresh_unit(unit, at=timezone.now())


def _save_visit(unit, technician) -> int:
    """Queries made by saving one new visit with a reading at every anode."""
    readings = [AnodeReading(position=p, mass_g=300.0) for p in unit.variant.anode_positions.all()]
    record = ServiceRecord(
        unit=unit, opened_at=timezone.now() - dt.timedelta(hours=1), technician=technician,
        place=unit.place,
    )  # fmt: skip
    with CaptureQueriesContext(connection) as captured:
        service_record_save(record=record, entries=readings, by=technician)
    return len(captured)


def test_a_visit_saved_on_a_unit_with_1000_readings_costs_the_queries_of_one_with_10(
    variant, site, technician, workshop
):
    small = make_unit(serial="WC-0001", acoustic_address="401", variant=variant, place=workshop)
    large = make_unit(serial="WC-0002", acoustic_address="402", variant=variant, place=workshop)
    _history(small, technician, site, 5)  # 10 readings at the two anodes
    _history(large, technician, site, 500)  # 1,000 readings
    assert AnodeReading.objects.filter(record__unit=large).count() == 1000
    queries = _save_visit(small, technician)
    assert _save_visit(large, technician) == queries
    # The unit locked and read once with its variant's positions for both the state and the
    # due rows, no savepoint of the refresh's own, the new record's constraints checked
    # without queries, on PostgreSQL the planner set once for the whole refresh: 55 queries
    # at first, 31 now on both databases (two anodes; the bound leaves room for the few a
    # row's own bookkeeping may add).
    assert queries <= 34
    # The running sums take the new reading: 501 readings since the anode went in.
    assert set(AnodeState.objects.filter(unit=large).values_list("n", flat=True)) == {501}
    stored = state_snapshot()
    with transaction.atomic():
        rebuild_all(at=timezone.now())
        assert differences(stored, state_snapshot()) == []
        transaction.set_rollback(True)


def test_a_new_visit_checks_its_constraints_without_a_query(unit, technician):
    """No other visit of the locked unit is open and the visit closes after it opened: both
    known in Python, so no ``SELECT 1 … _check`` in a savepoint (Django's way of checking a
    constraint) goes to the database."""
    record = ServiceRecord(
        unit=unit, opened_at=timezone.now() - dt.timedelta(hours=1), technician=technician,
        place=unit.place,
    )  # fmt: skip
    with CaptureQueriesContext(connection) as captured:
        service_record_save(record=record, entries=[], by=technician)
    assert record.pk is not None
    assert not [q["sql"] for q in captured if '"_check"' in q["sql"]]
    # The database still holds the line on a second open visit.
    with pytest.raises(ValidationError, match="already has an open bench visit"):
        service_record_save(
            record=ServiceRecord(
                unit=unit, opened_at=timezone.now(), technician=technician, place=unit.place
            ),
            entries=[],
            by=technician,
        )


def test_a_new_visit_that_closes_before_it_opened_is_refused_and_nothing_is_saved(unit, technician):
    opened = timezone.now() - dt.timedelta(hours=1)
    record = ServiceRecord(
        unit=unit, opened_at=opened, closed_at=opened - dt.timedelta(minutes=1),
        technician=technician, place=unit.place,
    )  # fmt: skip
    with pytest.raises(ValidationError) as raised:
        service_record_save(record=record, entries=[], by=technician)
    assert raised.value.message_dict == {"closed_at": ["A record cannot close before it opened."]}
    assert not ServiceRecord.objects.exists()
