"""Technicians saving at the same moment: every save lands, none sees "database is locked"."""

import datetime as dt
import threading

import pytest
from django.db import connection

from fleet.models import AnodeReading, ReleaseCertificate, ServiceRecord
from fleet.services.certificates import certificate_issue
from fleet.services.records import service_record_close, service_record_save
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
