"""Merging a kit back ashore: what the vessel did comes in, what both sides did to one unit is
compared, nothing is lost or added twice, and the derived state equals a rebuild."""

import datetime as dt

import pytest
from django.core.exceptions import ValidationError
from django.utils import timezone

from fleet.due.snapshot import rebuild_differences
from fleet.kits.merge import plan_merge
from fleet.models import (
    AnodeReading,
    Deployment,
    KitConflict,
    KitMerge,
    ReleaseTest,
    ServiceRecord,
)
from fleet.services.deployments import deployment_recover, deployment_start
from fleet.services.kit_merge import conflict_resolve, merge_apply_from
from tests.builders import make_unit, serviced_unit
from tests.documents.conftest import bench_visit, release_test
from tests.kits.merge_helpers import kit_copy, make_kit, on_board

pytestmark = pytest.mark.django_db(transaction=True)

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
    kit = make_kit(code="K0001", units=three, by=supervisor)
    with kit_copy(kit, tmp_path) as alias:
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
    kit = make_kit(code="K0002", units=three, by=supervisor)
    with kit_copy(kit, tmp_path) as alias:
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
        plan = plan_merge(alias, code="K0002", file_sha256=SHA)
        assert [c.kind for c in plan.conflicts] == [KitConflict.Kind.INTERLEAVED]
        assert "in the water" in plan.conflicts[0].explanation
        assert plan.counts() == {}
        merge = merge_apply_from(alias, code="K0002", file_sha256=SHA, by=supervisor)
        assert merge.rows_added == 0
        conflict = merge.conflicts.get()
        assert conflict.vessel_version[0]["model"] == "fleet.deployment"
        assert conflict.shore_version[0]["model"] == "fleet.servicerecord"
        assert not Deployment.objects.filter(origin="K0002").exists()
        _clean_rebuild()
        with pytest.raises(ValidationError, match="cannot be added"):
            conflict_resolve(conflict=conflict, choice="add_vessel", by=supervisor)
        conflict_resolve(
            conflict=conflict, choice="keep_shore", by=supervisor, note="deck log wrong"
        )
        conflict.refresh_from_db()
        assert conflict.resolution == "keep_shore" and conflict.resolved_by == supervisor
        # Merging again does not bring the conflict back, nor the vessel's row.
        merge_apply_from(alias, code="K0002", file_sha256=SHA2, by=supervisor)
        assert KitConflict.objects.count() == 1
        assert not Deployment.objects.filter(origin="K0002").exists()
