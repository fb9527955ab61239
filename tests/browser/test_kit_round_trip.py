"""A vessel kit's round trip in a real browser: a supervisor makes a kit for three units on the
Kits page; on the kit a technician deploys and recovers one and records a release test on
another, which the shore meanwhile had on its own bench; the supervisor uploads the return
file on the merge page, reads the preview (the additions and the one conflict, explained),
merges, and resolves the conflict; everything from the vessel is then ashore and the derived
state equals a rebuild.

The shore's pages are driven in the browser. The work on board goes through the services on
the kit's database (opened beside the test database and made the default while the vessel
works: the kit's own server, ``kit_serve``, runs the same services on the same file; a second
live server in the test would only add a process), and the return file is written by
``kit_pack`` as the vessel's Kits page does."""

import datetime as dt
import os
from pathlib import Path

import pytest
from django.utils import timezone

from fleet.due.snapshot import rebuild_differences
from fleet.kits.db import kit_database
from fleet.kits.files import read_kit_file
from fleet.models import AnodeReading, Deployment, Kit, KitConflict, ReleaseTest, ServiceRecord
from fleet.services.deployments import deployment_recover, deployment_start
from fleet.services.kits import kit_pack
from fleet.views.kits import kit_file_path
from tests.builders import make_place, make_site, make_unit, make_user, make_variant, serviced_unit
from tests.documents.conftest import bench_visit, release_test
from tests.kits.merge_helpers import on_board

pytestmark = [pytest.mark.browser, pytest.mark.django_db(transaction=True)]

PASSWORD = "a-browser-test-password"


def _person(name, role):
    user = make_user(name, role)
    user.set_password(PASSWORD)
    user.save()
    return user


def _shore():
    tech = _person("deckhand", "technician")
    boss = _person("party-chief", "supervisor")
    variant = make_variant(name="Round trip variant")
    shed = make_place(name="Round trip shed")
    site = make_site(name="Round trip array")
    day = timezone.localdate() - dt.timedelta(days=30)
    units = []
    for n in (1, 2, 3):
        unit = make_unit(serial=f"RT-000{n}", acoustic_address=f"4{n}", variant=variant, place=shed)
        serviced_unit(unit, by=tech, site=site, day=day)
        units.append(unit)
    return units, site, tech, boss


def _shoot(page, name):
    """At the tablet's 800 px, nothing wider than the window; kept if HOLDFAST_SCREENSHOTS."""
    page.set_viewport_size({"width": 800, "height": 1000})
    assert page.evaluate("document.documentElement.scrollWidth") <= 800
    folder = os.environ.get("HOLDFAST_SCREENSHOTS")
    if folder:
        page.screenshot(path=str(Path(folder) / f"{name}-800.png"), full_page=True)


def _sign_in(page, base):
    page.goto(f"{base}/accounts/login/")
    page.fill("#id_username", "party-chief")
    page.fill("#id_password", PASSWORD)
    page.click("main button[type=submit]")
    page.wait_for_url(f"{base}/")


def _make_kit_on_the_page(page, base):
    page.goto(f"{base}/kits/new/")
    page.fill("#id_job", "Array check")
    for name in ("RT-0001", "RT-0002", "RT-0003", "Round trip array", "deckhand", "party-chief"):
        page.locator("form.narrow label", has_text=name).locator("input").check()
    page.click("text=Make the kit file")
    page.wait_for_url(f"{base}/kits/")


def _vessel_trip(tmp_path, out, units, site, tech, boss):
    """On board: a deployment and recovery of the first unit, a release test on the second;
    ashore meanwhile, a bench visit on the second that overlaps the one on board."""
    now = timezone.now()
    back = tmp_path / "array-back.holdfast-kit"
    with kit_database(read_kit_file(out, into=tmp_path / "out").db_path) as alias, on_board(alias):
        deployment = deployment_start(
            deployment=Deployment(
                unit=units[0],
                site=site,
                over_side_at=now - dt.timedelta(hours=8),
                planned_days=10,
                planned_interrogations_per_day=100,
                transmit_power_step=1,
            ),
            by=tech,
            check_readiness=False,
        )
        deployment_recover(
            deployment=deployment,
            recovered_at=now - dt.timedelta(hours=5),
            replies_counted=233,
            place=None,
            by=tech,
        )
        bench_visit(
            units[1],
            tech,
            release_test(tested_on=timezone.localdate()),
            when=now - dt.timedelta(hours=3),
            close_at=now - dt.timedelta(hours=2),
            closer=boss,
        )
        kit_pack(by=boss, out=back)
    bench_visit(
        units[1],
        tech,
        AnodeReading(position=units[1].variant.anode_positions.first(), mass_g=330.0),
        when=now - dt.timedelta(hours=2, minutes=30),
        close_at=now - dt.timedelta(minutes=30),
        closer=boss,
    )
    return back


def test_a_kit_comes_back_with_its_deployment_and_release_test_and_the_conflict_resolved(
    live_server, page, tmp_path, settings
):
    settings.IMPORT_STAGING_ROOT = tmp_path / "staging"
    settings.KIT_FILES_ROOT = tmp_path / "kit-files"
    units, site, tech, boss = _shore()
    base = live_server.url
    _sign_in(page, base)
    _make_kit_on_the_page(page, base)
    kit = Kit.objects.get()
    assert sorted(kit.units.values_list("serial", flat=True)) == ["RT-0001", "RT-0002", "RT-0003"]
    out = kit_file_path(kit.code)
    back = _vessel_trip(tmp_path, out, units, site, tech, boss)
    page.goto(f"{base}/")
    page.click("nav details.more summary")
    page.click("nav >> text=Merge kit")
    page.set_input_files("#id_file", str(back))
    page.click("text=Preview")
    _shoot(page, "kit-merge-preview")
    preview = page.locator("main").inner_text()
    assert "Kit K0001: Array check" in preview
    assert "Deployments: 1" in preview
    assert "Conflicts (1)" in preview and "RT-0002" in preview
    assert "on the bench" in preview
    assert not Deployment.objects.filter(origin="K0001").exists()  # a preview writes nothing
    page.click("text=Merge kit K0001")
    page.wait_for_url(f"{base}/kits/merge/*/")
    assert "1 to resolve" in page.locator("main").inner_text()
    conflict = KitConflict.objects.get()
    form = page.locator(f"#conflict-{conflict.pk}")
    form.get_by_label("Add the vessel's version as well").check()
    form.locator("textarea").fill("Both checks were made: ashore before sailing, then on deck.")
    form.locator("text=Resolve").click()
    page.wait_for_selector("text=Resolved: Add the vessel")
    _shoot(page, "kit-merge-resolved")
    assert "0 to resolve" in page.locator("main").inner_text()

    came = Deployment.objects.get(origin="K0001")
    assert came.unit == units[0] and came.replies_counted == 233
    test = ReleaseTest.objects.get(origin="K0001")
    assert test.record.unit == units[1] and test.record.closed_at is not None
    assert ServiceRecord.objects.filter(unit=units[1], origin="").count() == 2
    conflict.refresh_from_db()
    assert conflict.resolution == "add_vessel" and conflict.resolved_by.username == "party-chief"
    lines, _ = rebuild_differences(at=timezone.now())
    assert lines == []
