"""A kit's round trip through its files: exported ashore, worked on board, packed, then merged
by the command and by the supervisors' page; a truncated, changed or outbound file is refused
before anything is read, with a plain message."""

import datetime as dt
import io
import os
import zipfile
from pathlib import Path

import pytest
from django.core.management import CommandError, call_command
from django.urls import reverse
from django.utils import timezone

from fleet.due.snapshot import rebuild_differences
from fleet.kits.db import kit_database
from fleet.kits.files import read_kit_file
from fleet.models import AnodeReading, Deployment, KitConflict, KitMerge, ReleaseTest
from fleet.services.deployments import deployment_recover, deployment_start
from fleet.services.kits import kit_export, kit_pack
from tests.builders import make_site, make_unit, serviced_unit
from tests.documents.conftest import bench_visit, release_test
from tests.kits.merge_helpers import on_board

pytestmark = pytest.mark.django_db


@pytest.fixture
def fleet(technician, supervisor, variant, workshop):
    site = make_site(name="Block South 3")
    day = timezone.localdate() - dt.timedelta(days=30)
    units = []
    for n in range(1, 4):
        unit = make_unit(
            serial=f"KF-000{n}", acoustic_address=f"30{n}", variant=variant, place=workshop
        )
        serviced_unit(unit, by=technician, site=site, day=day)
        units.append(unit)
    return units, site


def _deploy(unit, site, by, over, back):
    deployment = deployment_start(
        deployment=Deployment(
            unit=unit,
            site=site,
            over_side_at=over,
            planned_days=20,
            planned_interrogations_per_day=100,
            transmit_power_step=1,
        ),
        by=by,
        check_readiness=False,
    )
    deployment_recover(
        deployment=deployment, recovered_at=back, replies_counted=96, place=None, by=by
    )


def _trip(fleet, technician, supervisor, tmp_path, *, clash: bool = False) -> Path:
    """Export the three units, work on board, work ashore meanwhile; the return file."""
    units, site = fleet
    now = timezone.now()
    out = tmp_path / "out.holdfast-kit"
    kit_export(
        units=units,
        sites=[site],
        users=[technician, supervisor],
        job="South 3 survey",
        by=supervisor,
        out=out,
    )
    exported = read_kit_file(out, into=tmp_path / "out")
    back = tmp_path / "back.holdfast-kit"
    with kit_database(exported.db_path) as alias, on_board(alias):
        _deploy(
            units[0], site, technician, now - dt.timedelta(hours=6), now - dt.timedelta(hours=4)
        )
        bench_visit(
            units[0],
            technician,
            release_test(tested_on=timezone.localdate()),
            when=now - dt.timedelta(hours=3),
            close_at=now - dt.timedelta(hours=2),
            closer=supervisor,
        )
        if clash:
            _deploy(
                units[1], site, technician, now - dt.timedelta(hours=6), now - dt.timedelta(hours=1)
            )
        kit_pack(by=supervisor, out=back)
    position = units[1].variant.anode_positions.first()
    bench_visit(
        units[1],
        technician,
        AnodeReading(position=position, mass_g=320.0),
        when=now - dt.timedelta(hours=3),
        close_at=now - dt.timedelta(hours=2),
        closer=supervisor,
    )
    return back


def _run(*args) -> str:
    out = io.StringIO()
    call_command("kit_merge", *args, stdout=out)
    return out.getvalue()


def test_the_command_previews_then_merges_a_return_file_once(
    fleet, technician, supervisor, tmp_path
):
    back = _trip(fleet, technician, supervisor, tmp_path)
    preview = _run(str(back))
    assert "To add: bench visits: 1, entries: 1, deployments: 1" in preview
    assert "Conflicts: none" in preview
    assert "Nothing was written" in preview
    assert not KitMerge.objects.exists()
    merged = _run(str(back), "--apply", "--by", supervisor.username)
    assert "Merged kit K0001" in merged
    assert ReleaseTest.objects.filter(origin="K0001").count() == 1
    assert Deployment.objects.filter(origin="K0001").get().replies_counted == 96
    lines, _ = rebuild_differences(at=timezone.now())
    assert lines == []
    again = _run(str(back), "--apply", "--by", supervisor.username)
    assert "merged already" in again
    assert KitMerge.objects.count() == 1
    assert ReleaseTest.objects.filter(origin="K0001").count() == 1


def test_the_command_names_the_conflict_and_the_supervisor_s_choices(
    fleet, technician, supervisor, tmp_path
):
    back = _trip(fleet, technician, supervisor, tmp_path, clash=True)
    preview = _run(str(back))
    assert "Conflicts: 1" in preview
    assert "KF-0002" in preview and "in the water" in preview
    assert "choice keep_shore" in preview and "choice add_vessel" in preview
    with pytest.raises(CommandError, match="supervisor"):
        _run(str(back), "--apply", "--by", technician.username)
    _run(str(back), "--apply", "--by", supervisor.username)
    assert KitConflict.objects.get().unit.serial == "KF-0002"


def test_a_truncated_or_changed_return_file_and_an_outbound_file_are_refused(
    fleet, technician, supervisor, tmp_path
):
    back = _trip(fleet, technician, supervisor, tmp_path)
    data = back.read_bytes()
    truncated = tmp_path / "truncated.holdfast-kit"
    truncated.write_bytes(data[: len(data) // 2])
    with pytest.raises(CommandError, match="Kit merge refused: .*truncated"):
        _run(str(truncated), "--apply", "--by", supervisor.username)
    with zipfile.ZipFile(back) as z:
        members = {name: z.read(name) for name in z.namelist()}
    db = bytearray(members["kit.sqlite3"])
    db[-200] ^= 0xFF
    changed = tmp_path / "changed.holdfast-kit"
    with zipfile.ZipFile(changed, "w") as z:
        for name, value in {**members, "kit.sqlite3": bytes(db)}.items():
            z.writestr(name, value)
    with pytest.raises(CommandError, match="SHA-256"):
        _run(str(changed), "--apply", "--by", supervisor.username)
    with pytest.raises(CommandError, match="not a return file"):
        _run(str(tmp_path / "out.holdfast-kit"))
    assert not KitMerge.objects.exists()
    assert not ReleaseTest.objects.filter(origin="K0001").exists()


def test_the_merge_page_previews_merges_and_resolves_for_a_supervisor_only(
    fleet, technician, supervisor, tmp_path, as_supervisor, as_technician, settings
):
    settings.IMPORT_STAGING_ROOT = tmp_path / "staging"
    back = _trip(fleet, technician, supervisor, tmp_path, clash=True)
    assert as_technician.get(reverse("kit-merge")).status_code == 403
    page = as_supervisor.get(reverse("kit-merge"))
    assert page.status_code == 200
    with back.open("rb") as upload:
        preview = as_supervisor.post(reverse("kit-merge"), {"file": upload})
    assert preview.status_code == 200
    text = preview.content.decode()
    assert "Kit K0001" in text and "Unit changed on both sides" in text
    assert not KitMerge.objects.exists()
    checksum = preview.context["confirm"].initial["checksum"]
    done = as_supervisor.post(
        reverse("kit-merge-confirm"), {"checksum": checksum, "file_name": back.name}
    )
    merge = KitMerge.objects.get()
    assert done.status_code == 302 and done.url == reverse("kit-merge-result", args=[merge.pk])
    result = as_supervisor.get(done.url)
    assert result.status_code == 200 and "1 to resolve" in result.content.decode()
    conflict = KitConflict.objects.get()
    resolve = reverse("kit-conflict-resolve", args=[conflict.pk])
    assert as_technician.post(resolve, {f"c{conflict.pk}-choice": "keep_shore"}).status_code == 403
    as_supervisor.post(
        resolve, {f"c{conflict.pk}-choice": "keep_shore", f"c{conflict.pk}-note": "Deck log"}
    )
    conflict.refresh_from_db()
    assert conflict.resolution == "keep_shore" and conflict.note == "Deck log"
    assert "Resolved: Keep the shore" in as_supervisor.get(done.url).content.decode()


def test_the_merge_page_refuses_a_truncated_file_with_the_reason(
    fleet, technician, supervisor, tmp_path, as_supervisor, settings
):
    settings.IMPORT_STAGING_ROOT = tmp_path / "staging"
    back = _trip(fleet, technician, supervisor, tmp_path)
    truncated = tmp_path / "short.holdfast-kit"
    truncated.write_bytes(back.read_bytes()[:4000])
    with truncated.open("rb") as upload:
        response = as_supervisor.post(reverse("kit-merge"), {"file": upload})
    assert response.status_code == 400
    assert "is refused" in response.content.decode() and "truncated" in response.content.decode()
    assert not KitMerge.objects.exists()


@pytest.mark.skipif(
    not os.environ.get("DATABASE_URL", "").startswith("postgres"),
    reason="merges into PostgreSQL when DATABASE_URL names a PostgreSQL database",
)
def test_a_kit_merges_into_a_postgresql_shore(fleet, technician, supervisor, tmp_path):
    from django.db import connection

    assert connection.vendor == "postgresql"
    back = _trip(fleet, technician, supervisor, tmp_path, clash=True)
    _run(str(back), "--apply", "--by", supervisor.username)
    assert ReleaseTest.objects.filter(origin="K0001").count() == 1
    assert KitConflict.objects.count() == 1
    lines, _ = rebuild_differences(at=timezone.now())
    assert lines == []
    _run(str(back), "--apply", "--by", supervisor.username)
    assert KitMerge.objects.count() == 1
