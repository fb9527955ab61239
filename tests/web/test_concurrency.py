"""Technicians saving at the same moment: every save lands, none sees "database is locked", and
none silently overwrites another (real threads on a file SQLite database or PostgreSQL)."""

import datetime as dt
import threading

import pytest
from django.core.exceptions import ValidationError
from django.db import connection, transaction
from django.utils import timezone

from fleet.due.store import refresh_unit
from fleet.models import AnodeReading, AnodeState, ReleaseCertificate, ServiceRecord
from fleet.services.certificates import certificate_issue
from fleet.services.records import amendment_create, service_record_close, service_record_save
from tests.builders import make_unit
from tests.documents.conftest import AT, CLOSED_AT, bench_visit, release_test

pytestmark = pytest.mark.django_db(transaction=True)


def test_parallel_bench_visits_all_save(variant, workshop, technician):
    units = [
        make_unit(serial=f"PAR-{i}", acoustic_address=str(500 + i), variant=variant, place=workshop)
        for i in range(4)
    ]
    position = variant.anode_positions.first()
    errors: list[BaseException] = []
    start = threading.Barrier(len(units))

    def work(unit):
        try:
            start.wait()
            for k in range(5):
                record = ServiceRecord(
                    unit=unit,
                    opened_at=dt.datetime(2026, 3, 1 + k, 9, tzinfo=dt.UTC),
                    technician=technician,
                    place=workshop,
                )
                service_record_save(
                    record=record,
                    entries=[AnodeReading(position=position, mass_g=390 - k)],
                    by=technician,
                )
                # One open visit per unit: close it before the next one opens.
                service_record_close(
                    record=record, by=technician, at=record.opened_at + dt.timedelta(hours=4)
                )
        except BaseException as exc:  # collected and asserted below
            errors.append(exc)
        finally:
            connection.close()

    threads = [threading.Thread(target=work, args=(u,)) for u in units]
    for thread in threads:
        thread.start()
    for thread in threads:
        thread.join(timeout=120)
    assert errors == []
    assert ServiceRecord.objects.count() == 20
    assert AnodeReading.objects.count() == 20


def test_parallel_issues_for_one_release_test_leave_one_current_certificate(
    unit, technician, supervisor
):
    record = bench_visit(unit, technician, release_test(), close_at=CLOSED_AT, closer=supervisor)
    test = record.release_tests.get()
    workers = 4
    errors: list[BaseException] = []
    start = threading.Barrier(workers)

    def work():
        try:
            start.wait()
            certificate_issue(release_test=test, by=supervisor, at=AT)
        except BaseException as exc:  # collected and asserted below
            errors.append(exc)
        finally:
            connection.close()

    threads = [threading.Thread(target=work) for _ in range(workers)]
    for thread in threads:
        thread.start()
    for thread in threads:
        thread.join(timeout=120)
    assert errors == []
    statuses = sorted(ReleaseCertificate.objects.values_list("status", flat=True))
    assert statuses == ["issued"] + ["superseded"] * (workers - 1)
    numbers = sorted(ReleaseCertificate.objects.values_list("number", flat=True))
    assert numbers == [f"RC-2026-{n:04d}" for n in range(1, workers + 1)]


def _race(work, workers: int = 2) -> list[BaseException]:
    """Run ``work(i)`` in ``workers`` threads released at once; the exceptions they raised."""
    errors: list[BaseException] = []
    start = threading.Barrier(workers)

    def run(i):
        try:
            start.wait()
            work(i)
        except BaseException as exc:  # collected and asserted by the caller
            errors.append(exc)
        finally:
            connection.close()

    threads = [threading.Thread(target=run, args=(i,)) for i in range(workers)]
    for thread in threads:
        thread.start()
    for thread in threads:
        thread.join(timeout=120)
    return errors


@pytest.fixture
def closed_reading(unit, technician, supervisor):
    position = unit.variant.anode_positions.first()
    record = bench_visit(
        unit,
        technician,
        AnodeReading(position=position, mass_g=350.0),
        close_at=CLOSED_AT,
        closer=supervisor,
    )
    return record, record.anode_readings.get()


def test_two_amendments_to_one_entry_at_once_both_land_in_order(closed_reading, supervisor):
    record, reading = closed_reading
    # Each amender holds its own copy of the entry, loaded before either started.
    copies = [AnodeReading.objects.get(pk=reading.pk) for _ in range(2)]
    values = ["340", "330"]

    def work(i):
        amendment_create(
            record=record,
            target=copies[i],
            field_name="mass_g",
            corrected_value=values[i],
            reason=f"Weighed again ({i})",
            by=supervisor,
        )

    assert _race(work) == []
    amendments = list(record.amendments.order_by("pk"))
    assert len(amendments) == 2
    # The second correction starts from the first one's value: none is lost or hidden.
    assert amendments[0].original_value == "350.0"
    assert amendments[1].original_value == amendments[0].corrected_value
    reading.refresh_from_db()
    assert str(reading.mass_g) == amendments[1].corrected_value
    assert ServiceRecord.objects.get(pk=record.pk).version == record.version + 2


def test_two_amendments_from_one_page_version_land_once_and_refuse_once(closed_reading, supervisor):
    record, reading = closed_reading
    fields = [("mass_g", "340"), ("note", "bracket left on")]

    def work(i):
        amendment_create(
            record=record,
            target=reading,
            field_name=fields[i][0],
            corrected_value=fields[i][1],
            reason="Correction",
            by=supervisor,
            expected_version=record.version,
        )

    errors = _race(work)
    assert len(errors) == 1 and isinstance(errors[0], ValidationError)
    assert f"{supervisor} changed this record at" in errors[0].messages[0]
    assert record.amendments.count() == 1
    landed = record.amendments.get()
    reading.refresh_from_db()
    assert str(getattr(reading, landed.field_name)) == landed.corrected_value


def test_two_bench_visit_saves_on_one_unit_at_once_both_land(unit, technician):
    positions = list(unit.variant.anode_positions.order_by("name"))
    record = bench_visit(unit, technician, AnodeReading(position=positions[0], mass_g=390.0))

    def work(i):
        # Each technician saves from a copy of the record loaded before either started.
        service_record_save(
            record=copies[i],
            entries=[AnodeReading(position=positions[1], mass_g=380.0 - i)],
            by=technician,
        )

    copies = [ServiceRecord.objects.get(pk=record.pk) for _ in range(2)]
    assert _race(work) == []
    assert record.anode_readings.count() == 3
    assert ServiceRecord.objects.get(pk=record.pk).version == record.version + 2
    # The derived state is whole: one row per anode position, nothing duplicated.
    assert AnodeState.objects.filter(unit=unit).count() == len(positions)


def test_two_refreshes_of_one_unit_at_once_take_turns(unit, technician):
    # Two writers recomputing one unit's derived state in their own transactions: without
    # refresh_unit's unit-row lock, PostgreSQL refuses the second insert (uniq_anode_state).
    position = unit.variant.anode_positions.first()
    bench_visit(unit, technician, AnodeReading(position=position, mass_g=390.0))

    def work(i):
        with transaction.atomic():
            refresh_unit(unit, at=timezone.now())

    assert _race(work, workers=4) == []
    assert AnodeState.objects.filter(unit=unit).count() == unit.variant.anode_positions.count()
