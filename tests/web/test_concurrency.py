"""Technicians saving at the same moment: every save lands, none sees "database is locked"."""

import datetime as dt
import threading

import pytest
from django.db import connection

from fleet.models import AnodeReading, ServiceRecord
from fleet.services.records import service_record_close, service_record_save
from tests.builders import make_unit

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
