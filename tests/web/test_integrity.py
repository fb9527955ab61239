"""Nothing lost, nothing changed silently: closed records are closed in the database too, a
later visit never edits an earlier record, amendments are a supervisor's and void a
certificate, and a unit's variant stays with its history."""

import datetime as dt

import pytest
from django.core.exceptions import PermissionDenied, ValidationError
from django.db import DatabaseError, connection, transaction
from django.urls import reverse

from fleet.models import (
    AnodeReading,
    BatteryInstall,
    PackRemoval,
    ReleaseCertificate,
    ServiceRecord,
    UnitState,
)
from fleet.services.certificates import certificate_issue
from fleet.services.records import amendment_create, service_record_close, service_record_save
from fleet.services.reference import unit_save
from tests.builders import T0, make_variant
from tests.documents.conftest import AT, CLOSED_AT, bench_visit, release_test

pytestmark = pytest.mark.django_db


def _pack(serial: str, installed_on: dt.date) -> BatteryInstall:
    return BatteryInstall(
        pack_serial=serial,
        chemistry="alkaline",
        nominal_voltage_v=31.5,
        capacity_ah=17.0,
        made_on=installed_on - dt.timedelta(days=30),
        installed_on=installed_on,
        ocv_install_v=32.0,
    )


@pytest.fixture
def closed(unit, technician, supervisor):
    """A closed visit with one anode reading."""
    position = unit.variant.anode_positions.first()
    record = bench_visit(
        unit,
        technician,
        AnodeReading(position=position, mass_g=350.0),
        close_at=T0 + dt.timedelta(hours=4),
        closer=supervisor,
    )
    return record, record.anode_readings.get()


def _refused(action) -> None:
    """``action`` is refused by the database; the test's transaction carries on."""
    with pytest.raises(DatabaseError), transaction.atomic():
        action()


# --- closed means closed, in the database ----------------------------------------------------


def test_the_database_refuses_a_queryset_update_of_a_closed_record_or_its_entry(closed):
    record, reading = closed
    _refused(lambda: ServiceRecord.objects.filter(pk=record.pk).update(summary="quietly"))
    _refused(lambda: AnodeReading.objects.filter(pk=reading.pk).update(mass_g=1.0))
    record.refresh_from_db()
    reading.refresh_from_db()
    assert (record.summary, reading.mass_g) == ("", 350.0)


def test_the_database_refuses_raw_sql_on_a_closed_record_or_its_entry(closed):
    record, reading = closed

    def raw(sql: str, pk: int):
        def run():
            with connection.cursor() as cursor:
                cursor.execute(sql, [pk])

        return run

    _refused(raw("UPDATE fleet_servicerecord SET summary = 'raw' WHERE id = %s", record.pk))
    _refused(raw("UPDATE fleet_anodereading SET mass_g = 2 WHERE id = %s", reading.pk))
    _refused(raw("DELETE FROM fleet_anodereading WHERE id = %s", reading.pk))
    _refused(raw("DELETE FROM fleet_servicerecord WHERE id = %s", record.pk))
    assert AnodeReading.objects.filter(pk=reading.pk).exists()


def test_the_database_refuses_deleting_a_closed_record_or_its_entry(closed):
    record, reading = closed
    _refused(lambda: AnodeReading.objects.get(pk=reading.pk).delete())
    _refused(lambda: ServiceRecord.objects.get(pk=record.pk).delete())
    assert ServiceRecord.objects.filter(pk=record.pk).exists()
    assert AnodeReading.objects.filter(pk=reading.pk).exists()


def test_the_database_refuses_reopening_a_closed_record(closed):
    record, _ = closed

    def reopen():
        stale = ServiceRecord.objects.get(pk=record.pk)
        stale.closed_at = None
        stale.save()

    _refused(reopen)
    _refused(lambda: ServiceRecord.objects.filter(pk=record.pk).update(closed_at=None))
    record.refresh_from_db()
    assert record.is_closed


def test_the_database_refuses_moving_an_entry_out_of_a_closed_record(closed, unit, technician):
    _, reading = closed
    other = bench_visit(unit, technician, when=T0 + dt.timedelta(days=2))
    _refused(lambda: AnodeReading.objects.filter(pk=reading.pk).update(record=other))


def test_an_amendment_through_the_service_still_changes_only_its_field(closed, supervisor):
    record, reading = closed
    amendment_create(
        record=record,
        target=reading,
        field_name="mass_g",
        corrected_value="340",
        reason="Weighed again without the bracket",
        by=supervisor,
        expected_version=record.version,
    )
    reading.refresh_from_db()
    record.refresh_from_db()
    assert reading.mass_g == 340.0
    assert (record.updated_by, record.is_closed) == (supervisor, True)
    # The door closes with the amendment: the same transaction cannot sneak a change after it.
    _refused(lambda: AnodeReading.objects.filter(pk=reading.pk).update(mass_g=1.0))


def test_a_record_that_is_still_open_can_be_changed_as_before(unit, technician):
    record = bench_visit(unit, technician)
    ServiceRecord.objects.filter(pk=record.pk).update(summary="still open")
    record.refresh_from_db()
    assert record.summary == "still open"


# --- versions: stale pages are refused, naming who and when ---------------------------------


def test_a_stale_amendment_form_is_refused_naming_who_changed_the_record(closed, supervisor):
    record, reading = closed
    loaded = record.version
    amendment_create(
        record=record,
        target=reading,
        field_name="mass_g",
        corrected_value="340",
        reason="First look",
        by=supervisor,
        expected_version=loaded,
    )
    with pytest.raises(ValidationError) as refused:
        amendment_create(
            record=record,
            target=reading,
            field_name="note",
            corrected_value="from a stale page",
            reason="Second look",
            by=supervisor,
            expected_version=loaded,
        )
    assert f"{supervisor} changed this record at" in refused.value.messages[0]
    reading.refresh_from_db()
    assert (reading.mass_g, reading.note) == (340.0, "")


def test_two_amendments_through_stale_instances_both_land(closed, supervisor):
    record, reading = closed
    first, second = AnodeReading.objects.get(pk=reading.pk), AnodeReading.objects.get(pk=reading.pk)
    for target, field, value in ((first, "mass_g", "340"), (second, "note", "rechecked")):
        amendment_create(
            record=record,
            target=target,
            field_name=field,
            corrected_value=value,
            reason="Correction",
            by=supervisor,
        )
    reading.refresh_from_db()
    assert (reading.mass_g, reading.note) == (340.0, "rechecked")


def test_closing_from_a_stale_page_is_refused(unit, technician, supervisor):
    record = bench_visit(
        unit, technician, AnodeReading(position=unit.variant.anode_positions.first(), mass_g=390.0)
    )
    seen = record.version
    service_record_save(
        record=ServiceRecord.objects.get(pk=record.pk),
        entries=[_pack("P9", dt.date(2026, 3, 1))],
        by=technician,
        expected_version=seen,
    )
    with pytest.raises(ValidationError) as refused:
        service_record_close(record=record, by=supervisor, at=CLOSED_AT, expected_version=seen)
    assert f"{technician} changed this record at" in refused.value.messages[0]
    assert not ServiceRecord.objects.get(pk=record.pk).is_closed


def test_the_close_form_carries_the_version(as_supervisor, unit, technician):
    record = bench_visit(
        unit, technician, AnodeReading(position=unit.variant.anode_positions.first(), mass_g=390.0)
    )
    url = reverse("record-close", args=[record.pk])
    as_supervisor.post(url, {"confirm": "on", "version": record.version - 1})
    assert not ServiceRecord.objects.get(pk=record.pk).is_closed
    as_supervisor.post(url, {"confirm": "on", "version": record.version})
    assert ServiceRecord.objects.get(pk=record.pk).is_closed


# --- a later visit never edits an earlier record -------------------------------------------


def test_a_new_pack_removes_the_old_one_by_an_entry_of_the_new_visit(unit, technician, supervisor):
    first = bench_visit(
        unit, technician, _pack("P1", dt.date(2026, 1, 5)), close_at=T0 + dt.timedelta(hours=4)
    )
    old = first.battery_installs.get()
    second = bench_visit(
        unit,
        technician,
        _pack("P2", dt.date(2026, 3, 1)),
        when=T0 + dt.timedelta(days=3),
        close_at=T0 + dt.timedelta(days=3, hours=4),
        closer=supervisor,
    )
    removal = PackRemoval.objects.get()
    assert (removal.record, removal.install, removal.removed_on) == (
        second,
        old,
        dt.date(2026, 3, 1),
    )
    old.refresh_from_db()
    assert old.removed_on == dt.date(2026, 3, 1)
    assert old.record == first and first.battery_installs.get().record.is_closed
    state = UnitState.objects.get(unit=unit)
    assert state.pack.pack_serial == "P2"
    # The first record's page and report show nothing new; the second shows the removal.
    assert [str(r) for r in second.pack_removals.all()] == ["pack P1 removed on 2026-03-01"]


def test_a_removal_of_a_pack_from_a_closed_record_is_its_own_entry(
    as_technician, unit, technician, workshop
):
    bench_visit(
        unit, technician, _pack("P1", dt.date(2026, 1, 5)), close_at=T0 + dt.timedelta(hours=4)
    )
    url = reverse("record-new", args=[unit.serial])
    data = {
        "opened_at": "2026-03-02T09:00",
        "technician": technician.pk,
        "place": workshop.pk,
        "summary": "Pack out for storage",
        "remove_pack_on": "2026-03-02",
        "removed_pack_ocv_v": "30.1",
    }
    from fleet.models.records import entry_kinds

    for kind in entry_kinds():
        data[f"{kind.bench_prefix}-TOTAL_FORMS"] = "0"
        data[f"{kind.bench_prefix}-INITIAL_FORMS"] = "0"
    response = as_technician.post(url, data)
    assert response.status_code == 302
    removal = PackRemoval.objects.get()
    assert removal.record.summary == "Pack out for storage"
    assert (removal.removed_on, removal.ocv_removal_v) == (dt.date(2026, 3, 2), 30.1)
    assert UnitState.objects.get(unit=unit).pack is None
    page = as_technician.get(removal.record.get_absolute_url()).content.decode()
    flat = page.replace("\n", "").replace("      ", "")
    assert '<td class="nowrap">2026-03-02</td><td>30.1 V</td>' in flat


# --- amendments: supervisors only; a certificate behind one is not valid ---------------------


def test_a_technician_cannot_amend_a_closed_record(closed, technician, as_technician):
    record, reading = closed
    with pytest.raises(PermissionDenied):
        amendment_create(
            record=record,
            target=reading,
            field_name="mass_g",
            corrected_value="300",
            reason="x",
            by=technician,
        )
    assert as_technician.get(reverse("record-amend", args=[record.pk])).status_code == 403
    page = as_technician.get(record.get_absolute_url()).content.decode()
    assert "Correct a value" not in page


@pytest.mark.parametrize("target", ["test", "record"])
def test_amending_a_certified_test_or_its_record_makes_the_certificate_not_valid(
    target, client, unit, technician, supervisor, as_supervisor
):
    record = bench_visit(unit, technician, release_test(), close_at=CLOSED_AT, closer=supervisor)
    test = record.release_tests.get()
    certificate = certificate_issue(release_test=test, by=supervisor, at=AT)
    verify = reverse("certificate-verify", args=[certificate.verification_code])
    before = client.get(verify).content.decode()
    assert "Pass" in before and "NOT VALID" not in before

    amendment = amendment_create(
        record=record,
        target=test if target == "test" else record,
        field_name="seconds_to_release" if target == "test" else "summary",
        corrected_value="14.0" if target == "test" else "Release retimed",
        reason="Stopwatch log read again",
        by=supervisor,
    )
    certificate.refresh_from_db()
    assert certificate.status == ReleaseCertificate.Status.NOT_VALID
    assert certificate.invalidated_by == amendment
    on = certificate.status_changed_at.date()
    body = client.get(verify).content.decode()
    assert "NOT VALID" in body and f"amended on {on:%Y-%m-%d}" in body
    assert "Pass" not in body

    # A new certificate supersedes it; the old code then says so.
    new = certificate_issue(release_test=test, by=supervisor, at=AT + dt.timedelta(hours=1))
    certificate.refresh_from_db()
    assert (certificate.status, certificate.superseded_by) == ("superseded", new)
    assert "SUPERSEDED" in client.get(verify).content.decode()


def test_a_not_valid_certificate_can_be_withdrawn(unit, technician, supervisor, as_supervisor):
    record = bench_visit(unit, technician, release_test(), close_at=CLOSED_AT, closer=supervisor)
    test = record.release_tests.get()
    certificate = certificate_issue(release_test=test, by=supervisor, at=AT)
    amendment_create(
        record=record,
        target=test,
        field_name="motor_current_a",
        corrected_value="1.9",
        reason="Meter log",
        by=supervisor,
    )
    response = as_supervisor.post(
        reverse("certificate-withdraw", args=[certificate.number]), {"reason": "Test amended"}
    )
    assert response.status_code == 302
    certificate.refresh_from_db()
    assert certificate.status == ReleaseCertificate.Status.WITHDRAWN


# --- a unit's variant stays with its history -------------------------------------------------


def test_a_unit_with_history_cannot_change_variant(closed, unit):
    other = make_variant(name="Other variant")
    unit.variant = other
    with pytest.raises(ValidationError) as refused:
        unit.full_clean()
    assert "no tool that maps" in refused.value.message_dict["variant"][0]
    with pytest.raises(ValidationError):
        unit_save(unit=unit)
    unit.refresh_from_db()
    assert unit.variant != other


def test_a_unit_without_history_can_change_variant(unit):
    other = make_variant(name="Other variant")
    unit.variant = other
    unit_save(unit=unit)
    unit.refresh_from_db()
    assert unit.variant == other


def _triggers_on(table: str) -> set[str]:
    with connection.cursor() as cursor:
        if connection.vendor == "sqlite":
            cursor.execute(
                "SELECT name FROM sqlite_master WHERE type = 'trigger' AND tbl_name = %s", [table]
            )
        else:
            cursor.execute(
                "SELECT tgname FROM pg_trigger WHERE tgrelid = %s::regclass AND NOT tgisinternal",
                [table],
            )
        return {name for (name,) in cursor.fetchall()}


def test_every_entry_kind_and_the_record_table_keep_their_guard_after_every_migration():
    # SQLite rebuilds a table to add a constraint and drops its triggers with it: a later
    # migration that touched a guarded table must guard it again.
    from fleet.models.records import entry_kinds

    tables = [ServiceRecord._meta.db_table, *(k._meta.db_table for k in entry_kinds())]
    unguarded = [t for t in tables if not _triggers_on(t)]
    assert unguarded == []


def test_the_database_refuses_changing_the_identity_of_a_closed_record_or_its_entry(closed):
    # uid and origin are how a kit's rows are recognised on the merge: frozen once closed,
    # even through the amending door.
    import uuid

    from fleet.integrity import amending

    record, reading = closed
    for model, pk in ((ServiceRecord, record.pk), (AnodeReading, reading.pk)):
        _refused(lambda model=model, pk=pk: model.objects.filter(pk=pk).update(uid=uuid.uuid4()))
        _refused(lambda model=model, pk=pk: model.objects.filter(pk=pk).update(origin="K0009"))

        def through_the_door(model=model, pk=pk) -> None:
            with amending():
                model.objects.filter(pk=pk).update(uid=uuid.uuid4())

        _refused(through_the_door)
    record.refresh_from_db()
    assert record.origin == ""
    assert record.uid is not None
