"""Rows written on a vessel kit carry the kit's code and a uid of their own; ashore, an empty
origin; certificate numbers on board come from the kit's reserved range only."""

import datetime as dt

import pytest
from django.core.exceptions import ValidationError
from django.utils import timezone

from fleet.kits.identity import current_kit, current_origin
from fleet.models import (
    AnodeReading,
    CertificateCounter,
    Deployment,
    HoldChange,
    Kit,
    ReleaseTest,
    ServiceRecord,
    UnitHold,
)
from fleet.services.certificates import certificate_issue
from fleet.services.deployments import deployment_recover, deployment_start
from fleet.services.fleet import unit_hold_set
from fleet.services.records import amendment_create
from tests.builders import T0
from tests.documents.conftest import bench_visit, release_test

pytestmark = pytest.mark.django_db


def _kit_here(by, **kwargs) -> Kit:
    kwargs.setdefault("code", "K0003")
    kwargs.setdefault("certificate_year", timezone.localdate().year)
    kwargs.setdefault("certificate_first", 201)
    kwargs.setdefault("certificate_last", 202)
    return Kit.objects.create(
        job="Survey block North 7", created_at=T0, created_by=by, here=True, **kwargs
    )


def _closed_release_visit(unit, technician, supervisor) -> ServiceRecord:
    position = unit.variant.anode_positions.first()
    return bench_visit(
        unit,
        technician,
        AnodeReading(position=position, mass_g=360.0),
        release_test(),
        close_at=T0 + dt.timedelta(hours=3),
        closer=supervisor,
    )


def test_ashore_there_is_no_kit_and_rows_carry_an_empty_origin(unit, technician, supervisor):
    assert current_kit() is None
    assert current_origin() == ""
    record = _closed_release_visit(unit, technician, supervisor)
    assert record.origin == ""
    assert record.uid is not None


def test_every_row_written_on_a_kit_carries_its_code_and_a_uid_of_its_own(
    unit, site, technician, supervisor
):
    _kit_here(supervisor)
    assert current_origin() == "K0003"
    record = _closed_release_visit(unit, technician, supervisor)
    test = ReleaseTest.objects.get(record=record)
    reading = record.anode_readings.get()
    amendment = amendment_create(
        record=record,
        target=reading,
        field_name="mass_g",
        corrected_value="361",
        reason="Scale read again",
        by=supervisor,
    )
    certificate = certificate_issue(release_test=test, by=supervisor, at=timezone.now())
    deployment = deployment_start(
        deployment=Deployment(
            unit=unit,
            site=site,
            over_side_at=timezone.now() - dt.timedelta(hours=2),
            planned_days=30,
            planned_interrogations_per_day=10,
            transmit_power_step=1,
        ),
        by=supervisor,
        override_reason="Kit test: readiness is not what this checks.",
    )
    deployment_recover(
        deployment=deployment,
        recovered_at=timezone.now() - dt.timedelta(hours=1),
        replies_counted=12,
        place=unit.place,
        by=technician,
    )
    change = unit_hold_set(
        unit=unit, hold=UnitHold.QUARANTINED, reason="Flood alarm", by=supervisor, at=timezone.now()
    )
    rows = [record, test, reading, amendment, certificate, deployment, change]
    for row in rows:
        row.refresh_from_db()
        assert row.origin == "K0003", type(row).__name__
        assert row.uid is not None, type(row).__name__
    assert len({row.uid for row in rows}) == len(rows)
    assert HoldChange.objects.get(pk=change.pk).origin == "K0003"


def test_a_kit_issues_certificate_numbers_from_its_range_and_refuses_past_its_end(
    unit, technician, supervisor
):
    year = timezone.localdate().year
    CertificateCounter.objects.create(year=year, last_number=7)  # the shore's, copied over
    _kit_here(supervisor, certificate_first=201, certificate_last=202)
    test = ReleaseTest.objects.get(record=_closed_release_visit(unit, technician, supervisor))
    first = certificate_issue(release_test=test, by=supervisor, at=timezone.now())
    second = certificate_issue(release_test=test, by=supervisor, at=timezone.now())
    assert (first.sequence, second.sequence) == (201, 202)
    assert first.number == f"RC-{year}-0201"
    with pytest.raises(ValidationError, match=r"issued all 2 certificate numbers.*201 to 202"):
        certificate_issue(release_test=test, by=supervisor, at=timezone.now())


def test_a_kit_refuses_a_certificate_in_a_year_it_holds_no_numbers_for(
    unit, technician, supervisor
):
    _kit_here(supervisor, certificate_year=timezone.localdate().year - 1)
    test = ReleaseTest.objects.get(record=_closed_release_visit(unit, technician, supervisor))
    with pytest.raises(ValidationError, match="holds no certificate numbers for"):
        certificate_issue(release_test=test, by=supervisor, at=timezone.now())


def test_the_kit_is_read_again_after_its_row_changes(supervisor):
    assert current_kit() is None
    kit = _kit_here(supervisor)
    assert current_kit() == kit
    kit.delete()
    assert current_kit() is None


def test_checking_a_new_row_asks_the_database_nothing_about_its_uid(unit, technician):
    # One query per row checked would make a 100,000-row import ask 100,000 times; the
    # unique index is the backstop for a uuid4.
    from django.db import connection
    from django.test.utils import CaptureQueriesContext

    from fleet.models import ServiceRecord

    record = ServiceRecord(
        unit=unit, opened_at=T0, technician=technician, place=unit.place, created_by=technician
    )
    with CaptureQueriesContext(connection) as queries:
        record.full_clean()
    assert not [q["sql"] for q in queries if '"uid"' in q["sql"]]
