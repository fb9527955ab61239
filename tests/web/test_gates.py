"""Gates: a unit deploys only when readiness passes (or a supervisor overrides with a reason);
a bench visit opens only for a unit ashore, one at a time; a visit closes only when it is
complete, and an empty one can be discarded. Every refusal is a message, never a 500, and
nothing is half-saved."""

import datetime as dt

import pytest
from django.core.exceptions import ValidationError
from django.db import IntegrityError, transaction
from django.urls import reverse
from django.utils import timezone

from fleet.documents.checklist import prepare_checklist, render_checklist
from fleet.due.condition import Condition, condition_of
from fleet.due.planned import PlannedDeployment
from fleet.models import AnodeReading, Deployment, HousingOpening, ServiceRecord, UnitHold
from fleet.services.deployments import ReadinessError, deployment_start
from fleet.services.records import (
    service_record_close,
    service_record_discard,
    service_record_save,
)
from tests.builders import make_record, make_unit, make_user, serviced_unit
from tests.documents.helpers import pdf_text

pytestmark = pytest.mark.django_db

REASON = "Pressure test booked on arrival; the job cannot wait a week."


def _when(days: float) -> str:
    return (timezone.now() - dt.timedelta(days=days)).strftime("%Y-%m-%dT%H:%M")


def _deploy(client, unit, site, *, days_ago=0.1, reason=None):
    data = {
        "unit": unit.pk,
        "site": site.pk,
        "over_side_at": _when(days_ago),
        "planned_days": "90",
        "planned_interrogations_per_day": "400",
        "transmit_power_step": "1",
    }
    if reason is not None:
        data["override-reason"] = reason
    return client.post(reverse("deployment-new"), data)


def _open_deployments():
    return Deployment.objects.filter(recovered_at__isnull=True)


@pytest.fixture
def ready(unit, site, technician):
    serviced_unit(unit, by=technician, site=site, day=timezone.localdate() - dt.timedelta(days=10))
    return unit


# --- Deploying ---------------------------------------------------------------------------


def test_a_failed_readiness_blocks_the_deployment_and_lists_every_failing_check(
    as_technician, unit, site
):
    response = _deploy(as_technician, unit, site)  # a unit with no records at all
    assert response.status_code == 400
    body = response.content.decode()
    assert f"Readiness for {site.name} from {timezone.localdate()} for 90 days failed" in body
    for name, numbers in (
        ("Pressure test", "no pressure test recorded"),
        ("Battery", "no pack recorded as fitted"),
        ("Release test", "no release test recorded"),
    ):
        assert f"<td>{name}</td>" in body
        assert numbers in body
    assert "Only a supervisor can deploy a unit against a failed check" in body
    assert not Deployment.objects.exists()


def test_a_failed_release_test_on_a_closed_record_blocks_the_deployment(
    as_technician, unit, site, technician
):
    day = timezone.localdate() - dt.timedelta(days=10)
    serviced_unit(unit, by=technician, site=site, day=day, limit_switch_ok=False)
    response = _deploy(as_technician, unit, site)
    assert response.status_code == 400
    assert "<td>Release test</td>" in response.content.decode()
    assert not _open_deployments().exists()


def test_a_deployment_entered_after_the_fact_is_still_checked(as_technician, ready, site):
    # Over the side three days ago: checked from today for the planned days, not skipped and
    # not a 500 for a start in the past.
    response = _deploy(as_technician, ready, site, days_ago=3)
    assert response.status_code == 302
    assert _open_deployments().get().override_reason == ""
    # A unit without records, entered just as late, is blocked.
    bare = make_unit(serial="TX-0002", acoustic_address="102", variant=ready.variant)
    response = _deploy(as_technician, bare, site, days_ago=3)
    assert response.status_code == 400
    assert "no pressure test recorded" in response.content.decode()
    assert not _open_deployments().filter(unit=bare).exists()


def test_a_technician_cannot_override(as_technician, unit, site, technician):
    response = _deploy(as_technician, unit, site, reason=REASON)
    assert response.status_code == 400
    assert not Deployment.objects.exists()
    # The service refuses it too, whoever calls it.
    with pytest.raises(ReadinessError) as exc:
        deployment_start(
            deployment=Deployment(
                unit=unit,
                site=site,
                over_side_at=timezone.now() - dt.timedelta(hours=1),
                planned_days=90,
                planned_interrogations_per_day=400,
                transmit_power_step=1,
            ),
            by=technician,
            override_reason=REASON,
        )
    assert exc.value.override_error == "Only a supervisor can deploy against a failed check."
    assert not Deployment.objects.exists()


def test_a_short_override_reason_is_refused(as_supervisor, unit, site):
    response = _deploy(as_supervisor, unit, site, reason="urgent")
    assert response.status_code == 400
    body = response.content.decode()
    assert "Write at least 10 characters" in body
    assert "<td>Pressure test</td>" in body  # the failing checks are still listed
    assert not Deployment.objects.exists()


def test_a_supervisor_deploys_against_failed_checks_with_a_written_reason(
    as_supervisor, supervisor, unit, site
):
    response = _deploy(as_supervisor, unit, site, reason=f"  {REASON}  ")
    assert response.status_code == 302
    deployment = Deployment.objects.get()
    assert deployment.override_reason == REASON
    assert deployment.override_by == supervisor
    assert deployment.override_at is not None
    assert "Pressure test: no pressure test recorded" in deployment.override_check_lines
    assert "Battery: no pack recorded as fitted" in deployment.override_check_lines
    page = as_supervisor.get(reverse("unit-detail", args=[unit.serial])).content.decode()
    assert "Deployed against a failed check" in page
    assert REASON in page
    assert "Pressure test: no pressure test recorded" in page

    # The pre-deployment checklist says so too.
    at = timezone.now()
    doc = prepare_checklist(
        unit,
        PlannedDeployment(site, timezone.localdate(at), 30),
        at=at,
        unit_url="http://testserver/units/TX-0001/",
    )
    assert doc.override is not None
    assert (doc.override.reason, doc.override.by) == (REASON, str(supervisor))
    assert doc.override.at == deployment.override_at
    assert "Pressure test: no pressure test recorded" in doc.override.failed_checks
    text = pdf_text(render_checklist(doc))
    assert "Deployed against a failed check" in text
    assert REASON in text


def test_a_checklist_without_an_override_has_no_override_section(ready, site):
    at = timezone.now()
    doc = prepare_checklist(
        ready,
        PlannedDeployment(site, timezone.localdate(at), 30),
        at=at,
        unit_url="http://testserver/units/TX-0001/",
    )
    assert doc.override is None
    assert "Deployed against a failed check" not in pdf_text(render_checklist(doc))


@pytest.mark.parametrize("hold", [UnitHold.LOST, UnitHold.RETIRED, UnitHold.QUARANTINED])
def test_a_held_unit_cannot_deploy_even_with_an_override(as_supervisor, ready, site, hold):
    ready.hold, ready.hold_reason = hold, "set by the workshop"
    ready.save()
    response = _deploy(as_supervisor, ready, site, reason=REASON)
    assert response.status_code == 400
    assert f"TX-0001 is {hold.label.lower()} and cannot deploy" in response.content.decode()
    assert not _open_deployments().exists()


def test_a_unit_on_the_bench_cannot_deploy(as_supervisor, ready, technician, site):
    make_record(unit=ready, by=technician, opened_at=timezone.now() - dt.timedelta(hours=3))
    response = _deploy(as_supervisor, ready, site, reason=REASON)
    assert response.status_code == 400
    assert "TX-0001 is on the bench; close or discard its open bench visit first" in (
        response.content.decode()
    )
    assert not _open_deployments().exists()


# --- Opening a bench visit ------------------------------------------------------------------


def _new_visit(unit, by):
    record = ServiceRecord(
        unit=unit, opened_at=timezone.now() - dt.timedelta(hours=1), technician=by, place=unit.place
    )
    return service_record_save(record=record, by=by)


def test_a_bench_visit_cannot_open_for_a_unit_in_the_water(as_technician, ready, site, technician):
    assert _deploy(as_technician, ready, site).status_code == 302
    response = as_technician.get(reverse("record-new", args=[ready.serial]), follow=True)
    assert "TX-0001 is in the water; recover it before opening a bench visit." in (
        response.content.decode()
    )
    with pytest.raises(ValidationError, match="is in the water"):
        _new_visit(ready, technician)
    assert not ServiceRecord.objects.filter(closed_at__isnull=True).exists()


@pytest.mark.parametrize("hold", [UnitHold.LOST, UnitHold.RETIRED])
def test_a_bench_visit_cannot_open_for_a_lost_or_retired_unit(as_technician, unit, hold):
    unit.hold, unit.hold_reason = hold, "set by the workshop"
    unit.save()
    response = as_technician.post(reverse("record-new", args=[unit.serial]), {}, follow=True)
    assert f"TX-0001 is {hold.label.lower()}; a bench visit cannot be opened for it." in (
        response.content.decode()
    )
    assert not ServiceRecord.objects.exists()


def test_a_quarantined_unit_can_go_on_the_bench(unit, technician):
    unit.hold, unit.hold_reason = UnitHold.QUARANTINED, "water behind the end cap"
    unit.save()
    assert _new_visit(unit, technician).pk is not None


def test_a_second_open_visit_is_refused_with_a_link_to_the_open_one(
    as_technician, unit, technician
):
    first = _new_visit(unit, technician)
    response = as_technician.get(reverse("record-new", args=[unit.serial]))
    assert response.status_code == 302
    assert response.url == first.get_absolute_url()
    page = as_technician.get(response.url).content.decode()
    assert "TX-0001 already has an open bench visit" in page
    with pytest.raises(ValidationError, match="already has an open bench visit"):
        _new_visit(unit, technician)
    assert ServiceRecord.objects.count() == 1
    # The database holds the line too, with a clear message from model validation.
    second = ServiceRecord(
        unit=unit, opened_at=first.opened_at, technician=technician, place=unit.place
    )
    second.created_by = technician
    with pytest.raises(ValidationError) as exc:
        second.full_clean()
    assert exc.value.messages == [
        "This unit already has an open bench visit; finish or discard it first."
    ]
    with pytest.raises(IntegrityError), transaction.atomic():
        second.save()


# --- Closing and discarding ------------------------------------------------------------------


def test_a_record_cannot_close_while_a_housing_opening_has_no_close_time(
    as_supervisor, unit, technician
):
    opened = timezone.now() - dt.timedelta(hours=3)
    record = service_record_save(
        record=ServiceRecord(unit=unit, opened_at=opened, technician=technician, place=unit.place),
        entries=[
            HousingOpening(
                opened_at=opened + dt.timedelta(minutes=10),
                vented_before_opening=True,
                reason="battery change",
            )
        ],
        by=technician,
    )
    response = as_supervisor.post(
        reverse("record-close", args=[record.pk]),
        {"confirm": "on", "version": record.version},
        follow=True,
    )
    assert "has no close time. Enter when it was closed before closing the record." in (
        response.content.decode()
    )
    record.refresh_from_db()
    assert not record.is_closed


def test_a_record_with_no_entries_cannot_close(as_supervisor, unit, technician):
    record = _new_visit(unit, technician)
    response = as_supervisor.post(
        reverse("record-close", args=[record.pk]),
        {"confirm": "on", "version": record.version},
        follow=True,
    )
    assert "This record has no entries, so there is nothing to close" in (response.content.decode())
    record.refresh_from_db()
    assert not record.is_closed


def test_its_technician_discards_an_empty_visit(as_technician, unit, technician):
    record = _new_visit(unit, technician)
    page = as_technician.get(record.get_absolute_url()).content.decode()
    assert "Discard the empty visit" in page
    response = as_technician.post(reverse("record-discard", args=[record.pk]))
    assert response.status_code == 302
    assert response.url == unit.get_absolute_url()
    assert not ServiceRecord.objects.exists()


def test_a_supervisor_discards_anyones_empty_visit(as_supervisor, unit, technician):
    record = _new_visit(unit, technician)
    assert as_supervisor.post(reverse("record-discard", args=[record.pk])).status_code == 302
    assert not ServiceRecord.objects.exists()


def test_another_technician_or_a_viewer_cannot_discard(as_viewer, unit, technician, client):
    record = _new_visit(unit, technician)
    other = make_user("tech2", "technician")
    client.force_login(other)
    assert "Discard the empty visit" not in client.get(record.get_absolute_url()).content.decode()
    assert client.post(reverse("record-discard", args=[record.pk])).status_code == 403
    assert as_viewer.post(reverse("record-discard", args=[record.pk])).status_code == 403
    with pytest.raises(ValidationError, match="Only the visit's technician or a supervisor"):
        service_record_discard(record=record, by=other)
    assert ServiceRecord.objects.count() == 1


def test_a_visit_with_entries_cannot_be_discarded(as_technician, unit, technician):
    record = _new_visit(unit, technician)
    AnodeReading.objects.create(
        record=record, position=unit.variant.anode_positions.first(), mass_g=390
    )
    assert "Discard the empty visit" not in (
        as_technician.get(record.get_absolute_url()).content.decode()
    )
    response = as_technician.post(reverse("record-discard", args=[record.pk]), follow=True)
    assert "This visit has entries and cannot be discarded" in response.content.decode()
    assert ServiceRecord.objects.count() == 1
    service_record_close(record=record, by=technician, at=timezone.now())
    with pytest.raises(ValidationError, match="A closed record cannot be discarded."):
        service_record_discard(record=record, by=technician)


def test_recovery_leaves_the_condition_to_the_records(as_technician, ready, site):
    assert _deploy(as_technician, ready, site, days_ago=2).status_code == 302
    assert condition_of(ready, timezone.localdate()) == Condition.IN_WATER
    deployment = _open_deployments().get()
    response = as_technician.post(
        reverse("deployment-recover", args=[deployment.pk]), {"recovered_at": _when(0.5)}
    )
    assert response.status_code == 302
    assert condition_of(ready, timezone.localdate()) != Condition.IN_WATER
    # And it can go on the bench now.
    assert as_technician.get(reverse("record-new", args=[ready.serial])).status_code == 200
