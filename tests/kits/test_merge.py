"""Merging a kit back ashore: what the vessel did comes in, what both sides did to one unit is
compared, nothing is lost or added twice, and the derived state equals a rebuild."""

import datetime as dt

import pytest
from django.core.exceptions import ValidationError
from django.utils import timezone

from fleet.due.snapshot import rebuild_differences
from fleet.kits.merge import MergeRefusedError, plan_merge
from fleet.models import (
    Amendment,
    AnodeReading,
    Deployment,
    HoldChange,
    Kit,
    KitConflict,
    KitMerge,
    ReleaseCertificate,
    ReleaseTest,
    ServiceRecord,
    Transponder,
    UnitHold,
)
from fleet.services.certificates import certificate_issue
from fleet.services.deployments import deployment_recover, deployment_start
from fleet.services.fleet import unit_hold_set
from fleet.services.kit_merge import CertificateClashError, conflict_resolve, merge_apply_from
from fleet.services.records import amendment_create, service_record_close, service_record_save
from tests.builders import make_site, make_unit, serviced_unit
from tests.documents.conftest import bench_visit, release_test
from tests.kits.merge_helpers import exported_kit, on_board

pytestmark = pytest.mark.django_db

SHA = "a" * 64
SHA2 = "b" * 64


@pytest.fixture
def three(technician, supervisor, variant, workshop, site):
    day = timezone.localdate() - dt.timedelta(days=30)
    units = []
    for n in range(1, 4):
        unit = make_unit(
            serial=f"KM-000{n}", acoustic_address=f"20{n}", variant=variant, place=workshop
        )
        serviced_unit(unit, by=technician, site=site, day=day)
        units.append(unit)
    return units


def _deploy(unit, site, by, over, back=None, replies=None):
    deployment = deployment_start(
        deployment=Deployment(
            unit=unit,
            site=site,
            over_side_at=over,
            planned_days=30,
            planned_interrogations_per_day=100,
            transmit_power_step=1,
        ),
        by=by,
        check_readiness=False,
    )
    if back is not None:
        deployment_recover(
            deployment=deployment, recovered_at=back, replies_counted=replies, place=None, by=by
        )
    return deployment


def _clean_rebuild():
    lines, compared = rebuild_differences(at=timezone.now())
    assert lines == []
    assert compared > 0


def test_the_vessel_s_deployment_recovery_and_release_test_come_in_beside_the_shore_s_bench_visit(
    three, technician, supervisor, site, tmp_path
):
    a, b, _ = three
    now = timezone.now()
    with exported_kit(
        three, by=supervisor, users=[technician, supervisor], sites=[site], directory=tmp_path
    ) as (kit, alias):
        with on_board(alias):
            _deploy(
                a, site, technician, now - dt.timedelta(hours=5), now - dt.timedelta(hours=3), 412
            )
            bench_visit(
                a,
                technician,
                release_test(tested_on=timezone.localdate()),
                when=now - dt.timedelta(hours=2),
                close_at=now - dt.timedelta(hours=1),
                closer=supervisor,
            )
        position = b.variant.anode_positions.first()
        bench_visit(
            b,
            technician,
            AnodeReading(position=position, mass_g=300.0),
            when=now - dt.timedelta(hours=2),
            close_at=now - dt.timedelta(hours=1),
            closer=supervisor,
        )
        plan = plan_merge(alias, code="K0001", file_sha256=SHA)
        assert plan.counts() == {"bench visits": 1, "entries": 1, "deployments": 1}
        assert plan.conflicts == []
        records_before = ServiceRecord.objects.count()
        merge = merge_apply_from(alias, code="K0001", file_sha256=SHA, by=supervisor)
        assert merge.counts == {"bench visits": 1, "entries": 1, "deployments": 1}
        assert ServiceRecord.objects.count() == records_before + 1
        came = Deployment.objects.get(origin="K0001")
        assert came.unit_id == a.pk and came.replies_counted == 412
        test = ReleaseTest.objects.get(origin="K0001")
        assert test.record.unit_id == a.pk and test.record.closed_at is not None
        _clean_rebuild()
        # The same file again: nothing changes.
        again = merge_apply_from(alias, code="K0001", file_sha256=SHA, by=supervisor)
        assert again.pk == merge.pk
        assert ServiceRecord.objects.count() == records_before + 1
        # The same kit's rows in another file (a later return): already merged, nothing new.
        later = merge_apply_from(alias, code="K0001", file_sha256=SHA2, by=supervisor)
        assert later.pk != merge.pk and later.rows_added == 0 and later.rows_changed == 0
        assert Deployment.objects.filter(origin="K0001").count() == 1
        assert KitMerge.objects.count() == 2


def test_a_deployment_on_board_while_the_shore_had_the_unit_on_the_bench_is_a_conflict(
    three, technician, supervisor, site, tmp_path
):
    _, _, c = three
    now = timezone.now()
    with exported_kit(
        three, by=supervisor, users=[technician, supervisor], sites=[site], directory=tmp_path
    ) as (kit, alias):
        with on_board(alias):
            _deploy(c, site, technician, now - dt.timedelta(hours=5), now - dt.timedelta(hours=1))
        position = c.variant.anode_positions.first()
        bench_visit(
            c,
            technician,
            AnodeReading(position=position, mass_g=300.0),
            when=now - dt.timedelta(hours=3),
            close_at=now - dt.timedelta(hours=2),
            closer=supervisor,
        )
        plan = plan_merge(alias, code="K0001", file_sha256=SHA)
        assert [c.kind for c in plan.conflicts] == [KitConflict.Kind.INTERLEAVED]
        assert "in the water" in plan.conflicts[0].explanation
        assert plan.counts() == {}
        merge = merge_apply_from(alias, code="K0001", file_sha256=SHA, by=supervisor)
        assert merge.rows_added == 0
        conflict = merge.conflicts.get()
        assert conflict.vessel_version[0]["model"] == "fleet.deployment"
        assert conflict.shore_version[0]["model"] == "fleet.servicerecord"
        assert not Deployment.objects.filter(origin="K0001").exists()
        _clean_rebuild()
        with pytest.raises(ValidationError, match="cannot be added"):
            conflict_resolve(conflict=conflict, choice="add_vessel", by=supervisor)
        assert Kit.objects.get().status == Kit.Status.RETURNED_PARTLY
        conflict_resolve(
            conflict=conflict, choice="keep_shore", by=supervisor, note="deck log wrong"
        )
        assert Kit.objects.get().status == Kit.Status.MERGED
        conflict.refresh_from_db()
        assert conflict.resolution == "keep_shore" and conflict.resolved_by == supervisor
        # Merging again does not bring the conflict back, nor the vessel's row.
        merge_apply_from(alias, code="K0001", file_sha256=SHA2, by=supervisor)
        assert KitConflict.objects.count() == 1
        assert not Deployment.objects.filter(origin="K0001").exists()


def _open_visit(unit, by, when):
    position = unit.variant.anode_positions.first()
    return bench_visit(unit, by, AnodeReading(position=position, mass_g=310.0), when=when)


def test_a_visit_open_at_export_and_closed_on_board_is_closed_ashore_through_the_services(
    three, technician, supervisor, site, tmp_path
):
    a = three[0]
    now = timezone.now()
    visit = _open_visit(a, technician, now - dt.timedelta(hours=6))
    with exported_kit(
        three, by=supervisor, users=[technician, supervisor], sites=[site], directory=tmp_path
    ) as (kit, alias):
        with on_board(alias):
            record = ServiceRecord.objects.get(pk=visit.pk)
            service_record_save(
                record=record, entries=[release_test(tested_on=timezone.localdate())], by=technician
            )
            service_record_close(record=record, by=supervisor, at=now - dt.timedelta(hours=1))
        plan = plan_merge(alias, code="K0001", file_sha256=SHA)
        assert plan.conflicts == []
        assert [c.what for c in plan.changes] == ["bench visits worked on board"]
        merge = merge_apply_from(alias, code="K0001", file_sha256=SHA, by=supervisor)
        visit.refresh_from_db()
        assert visit.closed_at == now - dt.timedelta(hours=1)
        assert visit.closed_by == supervisor
        assert visit.release_tests.get().origin == "K0001"
        assert visit.anode_readings.count() == 1
        assert merge.rows_changed == 1 and merge.counts == {"entries": 1}
        _clean_rebuild()
        again = merge_apply_from(alias, code="K0001", file_sha256=SHA2, by=supervisor)
        assert again.rows_added == 0 and again.rows_changed == 0
        assert not again.conflicts.exists()


def test_a_visit_closed_on_both_sides_is_a_conflict_and_the_vessel_s_entries_can_stand_beside(
    three, technician, supervisor, site, tmp_path
):
    a = three[0]
    now = timezone.now()
    visit = _open_visit(a, technician, now - dt.timedelta(hours=6))
    with exported_kit(
        three, by=supervisor, users=[technician, supervisor], sites=[site], directory=tmp_path
    ) as (kit, alias):
        with on_board(alias):
            record = ServiceRecord.objects.get(pk=visit.pk)
            service_record_save(
                record=record, entries=[release_test(tested_on=timezone.localdate())], by=technician
            )
            service_record_close(record=record, by=supervisor, at=now - dt.timedelta(hours=1))
        service_record_close(record=visit, by=supervisor, at=now - dt.timedelta(hours=2))
        plan = plan_merge(alias, code="K0001", file_sha256=SHA)
        assert [c.kind for c in plan.conflicts] == [KitConflict.Kind.CLOSED_TWICE]
        merge = merge_apply_from(alias, code="K0001", file_sha256=SHA, by=supervisor)
        assert merge.rows_added == 0
        assert not ReleaseTest.objects.filter(origin="K0001").exists()
        conflict = merge.conflicts.get()
        conflict_resolve(conflict=conflict, choice="add_vessel", by=supervisor, note="both real")
        test = ReleaseTest.objects.get(origin="K0001")
        assert test.record != visit and test.record.closed_at is not None
        assert "kit K0001" in test.record.summary
        _clean_rebuild()
        with pytest.raises(ValidationError, match="resolved already"):
            conflict_resolve(conflict=conflict, choice="keep_shore", by=supervisor)


def test_a_deployment_in_the_water_at_export_recovered_on_board_is_recovered_ashore(
    three, technician, supervisor, site, tmp_path
):
    a = three[0]
    now = timezone.now()
    deployment = _deploy(a, site, technician, now - dt.timedelta(days=2))
    with exported_kit(
        three, by=supervisor, users=[technician, supervisor], sites=[site], directory=tmp_path
    ) as (kit, alias):
        with on_board(alias):
            deployment_recover(
                deployment=Deployment.objects.get(pk=deployment.pk),
                recovered_at=now - dt.timedelta(hours=1),
                replies_counted=77,
                place=None,
                by=technician,
            )
        plan = plan_merge(alias, code="K0001", file_sha256=SHA)
        assert [c.what for c in plan.changes] == ["recoveries"]
        merge_apply_from(alias, code="K0001", file_sha256=SHA, by=supervisor)
        deployment.refresh_from_db()
        assert deployment.recovered_at == now - dt.timedelta(hours=1)
        assert deployment.replies_counted == 77
        _clean_rebuild()


def test_both_sides_deploying_one_unit_at_once_is_a_unit_in_two_places(
    three, technician, supervisor, site, tmp_path
):
    b = three[1]
    now = timezone.now()
    with exported_kit(
        three, by=supervisor, users=[technician, supervisor], sites=[site], directory=tmp_path
    ) as (kit, alias):
        with on_board(alias):
            _deploy(b, site, technician, now - dt.timedelta(hours=8), now - dt.timedelta(hours=2))
        _deploy(b, site, technician, now - dt.timedelta(hours=5))
        plan = plan_merge(alias, code="K0001", file_sha256=SHA)
        assert [c.kind for c in plan.conflicts] == [KitConflict.Kind.TWO_PLACES]
        merge = merge_apply_from(alias, code="K0001", file_sha256=SHA, by=supervisor)
        assert merge.conflicts.count() == 1
        assert Deployment.objects.filter(unit=b, origin="K0001").count() == 0
        _clean_rebuild()


def _closed_visit(unit, technician, supervisor, when):
    return bench_visit(
        unit,
        technician,
        release_test(tested_on=timezone.localdate(when)),
        when=when,
        close_at=when + dt.timedelta(hours=1),
        closer=supervisor,
    )


def test_an_amendment_made_on_board_is_made_ashore_and_keeps_its_identity(
    three, technician, supervisor, site, tmp_path
):
    a = three[0]
    now = timezone.now()
    visit = _closed_visit(a, technician, supervisor, now - dt.timedelta(hours=9))
    test = visit.release_tests.get()
    with exported_kit(
        three, by=supervisor, users=[technician, supervisor], sites=[site], directory=tmp_path
    ) as (kit, alias):
        with on_board(alias):
            made = amendment_create(
                record=ServiceRecord.objects.get(pk=visit.pk),
                target=ReleaseTest.objects.get(pk=test.pk),
                field_name="seconds_to_release",
                corrected_value="14.5",
                reason="Stopwatch read again",
                by=supervisor,
            )
        merge = merge_apply_from(alias, code="K0001", file_sha256=SHA, by=supervisor)
        assert merge.counts == {"amendments": 1}
        test.refresh_from_db()
        assert test.seconds_to_release == 14.5
        ashore = Amendment.objects.get(origin="K0001")
        assert ashore.uid == made.uid and ashore.reason == "Stopwatch read again"
        _clean_rebuild()


def test_one_value_amended_on_both_sides_is_a_conflict_the_supervisor_settles(
    three, technician, supervisor, site, tmp_path
):
    a = three[0]
    now = timezone.now()
    visit = _closed_visit(a, technician, supervisor, now - dt.timedelta(hours=9))
    test = visit.release_tests.get()
    with exported_kit(
        three, by=supervisor, users=[technician, supervisor], sites=[site], directory=tmp_path
    ) as (kit, alias):
        with on_board(alias):
            amendment_create(
                record=ServiceRecord.objects.get(pk=visit.pk),
                target=ReleaseTest.objects.get(pk=test.pk),
                field_name="seconds_to_release",
                corrected_value="14.5",
                reason="Stopwatch read again on board",
                by=supervisor,
            )
        amendment_create(
            record=ServiceRecord.objects.get(pk=visit.pk),
            target=test,
            field_name="seconds_to_release",
            corrected_value="13",
            reason="Video checked ashore",
            by=supervisor,
        )
        plan = plan_merge(alias, code="K0001", file_sha256=SHA)
        assert [c.kind for c in plan.conflicts] == [KitConflict.Kind.AMENDED_TWICE]
        merge = merge_apply_from(alias, code="K0001", file_sha256=SHA, by=supervisor)
        test.refresh_from_db()
        assert test.seconds_to_release == 13
        conflict = merge.conflicts.get()
        assert conflict.vessel_version[0]["fields"]["corrected_value"] == "14.5"
        assert conflict.shore_version[0]["fields"]["corrected_value"] == "13.0"
        conflict_resolve(conflict=conflict, choice="take_vessel", by=supervisor)
        test.refresh_from_db()
        assert test.seconds_to_release == 14.5
        assert Amendment.objects.filter(record=visit).count() == 2
        _clean_rebuild()


def test_a_hold_set_on_board_is_set_ashore_and_a_hold_changed_on_both_sides_is_a_conflict(
    three, technician, supervisor, site, tmp_path
):
    a, b, _ = three
    with exported_kit(
        three, by=supervisor, users=[technician, supervisor], sites=[site], directory=tmp_path
    ) as (kit, alias):
        with on_board(alias):
            for unit in (a, b):
                unit_hold_set(
                    unit=Transponder.objects.get(pk=unit.pk),
                    hold=UnitHold.QUARANTINED,
                    reason="Flood alarm on deck",
                    by=supervisor,
                    at=timezone.now(),
                )
        unit_hold_set(
            unit=b, hold=UnitHold.RETIRED, reason="End of life", by=supervisor, at=timezone.now()
        )
        merge = merge_apply_from(alias, code="K0001", file_sha256=SHA, by=supervisor)
        a.refresh_from_db()
        b.refresh_from_db()
        assert a.hold == UnitHold.QUARANTINED and a.hold_reason == "Flood alarm on deck"
        assert HoldChange.objects.filter(unit=a, origin="K0001").count() == 1
        assert b.hold == UnitHold.RETIRED
        assert [c.kind for c in merge.conflicts.all()] == [KitConflict.Kind.HOLD_TWICE]
        _clean_rebuild()


def test_a_certificate_issued_on_board_comes_in_with_its_number_from_the_kit_s_range(
    three, technician, supervisor, site, tmp_path
):
    a = three[0]
    now = timezone.now()
    with exported_kit(
        three, by=supervisor, users=[technician, supervisor], sites=[site], directory=tmp_path
    ) as (kit, alias):
        with on_board(alias):
            visit = _closed_visit(a, technician, supervisor, now - dt.timedelta(hours=5))
            issued = certificate_issue(
                release_test=visit.release_tests.get(), by=supervisor, at=timezone.now()
            )
        merge = merge_apply_from(alias, code="K0001", file_sha256=SHA, by=supervisor)
        assert merge.counts == {"bench visits": 1, "entries": 1, "release certificates": 1}
        ashore = ReleaseCertificate.objects.get(number=issued.number)
        assert ashore.uid == issued.uid and ashore.release_test.record.unit_id == a.pk
        assert ashore.verification_code == issued.verification_code
        _clean_rebuild()


def test_a_certificate_number_taken_ashore_refuses_the_whole_merge(
    three, technician, supervisor, site, tmp_path
):
    a, b, _ = three
    now = timezone.now()
    with exported_kit(
        three, by=supervisor, users=[technician, supervisor], sites=[site], directory=tmp_path
    ) as (kit, alias):
        with on_board(alias):
            visit = _closed_visit(a, technician, supervisor, now - dt.timedelta(hours=5))
            issued = certificate_issue(
                release_test=visit.release_tests.get(), by=supervisor, at=timezone.now()
            )
        shore_visit = _closed_visit(b, technician, supervisor, now - dt.timedelta(hours=5))
        clash = certificate_issue(
            release_test=shore_visit.release_tests.get(), by=supervisor, at=timezone.now()
        )
        ReleaseCertificate.objects.filter(pk=clash.pk).update(number=issued.number)
        with pytest.raises(CertificateClashError, match="already used ashore"):
            merge_apply_from(alias, code="K0001", file_sha256=SHA, by=supervisor)
        assert not KitMerge.objects.exists()
        assert not ServiceRecord.objects.filter(origin="K0001").exists()


def test_a_later_return_file_brings_what_the_vessel_did_since_to_rows_merged_before(
    three, technician, supervisor, site, tmp_path
):
    a, b, _ = three
    now = timezone.now()
    with exported_kit(
        three, by=supervisor, users=[technician, supervisor], sites=[site], directory=tmp_path
    ) as (kit, alias):
        with on_board(alias):
            wet = _deploy(b, site, technician, now - dt.timedelta(hours=9))
            visit = _open_visit(a, technician, now - dt.timedelta(hours=8))
        first = merge_apply_from(alias, code="K0001", file_sha256=SHA, by=supervisor)
        assert first.counts == {"bench visits": 1, "entries": 1, "deployments": 1}
        ashore = ServiceRecord.objects.get(uid=visit.uid)
        assert ashore.closed_at is None
        with on_board(alias):
            record = ServiceRecord.objects.get(pk=visit.pk)
            service_record_save(
                record=record, entries=[release_test(tested_on=timezone.localdate())], by=technician
            )
            service_record_close(record=record, by=supervisor, at=now - dt.timedelta(hours=2))
            deployment_recover(
                deployment=Deployment.objects.get(pk=wet.pk),
                recovered_at=now - dt.timedelta(hours=1),
                replies_counted=12,
                place=None,
                by=technician,
            )
        second = merge_apply_from(alias, code="K0001", file_sha256=SHA2, by=supervisor)
        assert second.counts == {"entries": 1}
        assert second.rows_changed == 2
        assert not second.conflicts.exists()
        ashore.refresh_from_db()
        assert ashore.closed_at == now - dt.timedelta(hours=2)
        assert ashore.release_tests.get().origin == "K0001"
        assert Deployment.objects.get(uid=wet.uid).replies_counted == 12
        _clean_rebuild()


def test_a_resolution_given_with_the_merge_is_carried_out_and_recorded(
    three, technician, supervisor, site, tmp_path
):
    b = three[1]
    now = timezone.now()
    with exported_kit(
        three, by=supervisor, users=[technician, supervisor], sites=[site], directory=tmp_path
    ) as (kit, alias):
        with on_board(alias):
            _deploy(b, site, technician, now - dt.timedelta(hours=8), now - dt.timedelta(hours=2))
        _deploy(b, site, technician, now - dt.timedelta(hours=5))
        key = plan_merge(alias, code="K0001", file_sha256=SHA).conflicts[0].key
        merge = merge_apply_from(
            alias, code="K0001", file_sha256=SHA, by=supervisor, resolutions={key: "keep_shore"}
        )
        conflict = merge.conflicts.get()
        assert conflict.resolution == "keep_shore" and conflict.resolved_by == supervisor
        assert Kit.objects.get().status == Kit.Status.MERGED


def test_a_site_added_on_board_stops_the_merge_until_the_shore_has_it(
    three, technician, supervisor, site, tmp_path
):
    a = three[0]
    now = timezone.now()
    with exported_kit(
        three, by=supervisor, users=[technician, supervisor], sites=[site], directory=tmp_path
    ) as (kit, alias):
        with on_board(alias):
            found = make_site(name="Uncharted shoal")
            _deploy(a, found, technician, now - dt.timedelta(hours=8), now - dt.timedelta(hours=2))
        with pytest.raises(MergeRefusedError, match="'Uncharted shoal'.*Add it ashore"):
            merge_apply_from(alias, code="K0001", file_sha256=SHA, by=supervisor)
        assert not KitMerge.objects.exists()
        make_site(name="Uncharted shoal", latitude_deg=12.0)
        merge = merge_apply_from(alias, code="K0001", file_sha256=SHA, by=supervisor)
        assert merge.counts == {"deployments": 1}
        assert Deployment.objects.get(origin="K0001").site.name == "Uncharted shoal"
