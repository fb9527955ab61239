"""A small shore fleet with history, for the kit tests."""

import datetime as dt
from dataclasses import dataclass

import pytest
from django.utils import timezone

from fleet.models import AnodeReading, ReleaseTest, ServiceRecord, Site, Transponder, UnitHold
from fleet.services.certificates import certificate_issue
from fleet.services.fleet import unit_hold_set
from fleet.services.records import amendment_create
from tests.builders import make_site, make_unit, make_user, serviced_unit


@dataclass
class Shore:
    units: list[Transponder]  # TX-0001, TX-0002 go to sea; TX-0003 stays
    sites: list[Site]  # North 7 (chosen), Deep 2 (only in the units' history)
    sailing: list  # technician, supervisor
    ashore: object  # closes records; never sails
    record: ServiceRecord  # TX-0001's closed visit


@pytest.fixture
def shore(db, workshop, technician, supervisor) -> Shore:
    ashore = make_user("harbour", "supervisor")
    north = make_site(name="North 7")
    deep = make_site(name="Deep 2")
    units = [
        make_unit(serial=f"TX-000{i}", acoustic_address=str(100 + i), place=workshop)
        for i in (1, 2, 3)
    ]
    day = timezone.localdate() - dt.timedelta(days=30)
    for unit in units:
        serviced_unit(unit, by=technician, site=deep, day=day)
    record = ServiceRecord.objects.filter(unit=units[0]).get()
    reading = AnodeReading.objects.filter(record=record).first()
    amendment_create(
        record=record,
        target=reading,
        field_name="note",
        corrected_value="Checked again",
        reason="Note added after the visit",
        by=ashore,
    )
    certificate_issue(
        release_test=ReleaseTest.objects.get(record=record), by=supervisor, at=timezone.now()
    )
    unit_hold_set(
        unit=units[1],
        hold=UnitHold.QUARANTINED,
        reason="Connector to check",
        by=ashore,
        at=timezone.now(),
    )
    unit_hold_set(
        unit=units[1], hold=UnitHold.NONE, reason="Connector fine", by=ashore, at=timezone.now()
    )
    for unit in units:
        unit.refresh_from_db()
    return Shore(
        units=units,
        sites=[north, deep],
        sailing=[technician, supervisor],
        ashore=ashore,
        record=record,
    )
