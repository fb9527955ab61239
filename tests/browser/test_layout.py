"""Every page, for every role, at the workshop tablet's width (800 px) and the desk's
(1280 px): nothing wider than the window, no serial, date or address broken over two lines,
and a title and the navigation on the error pages.

Set HOLDFAST_SCREENSHOTS to a directory to keep a full-page screenshot of each page."""

import datetime as dt
import os
from pathlib import Path

import pytest
from django.utils import timezone

from fleet.models import (
    Deployment,
    Kit,
    KitConflict,
    KitMerge,
    ServiceRecord,
    Transponder,
    UnitHold,
)
from fleet.services.deployments import deployment_start
from fleet.services.records import service_record_save
from tests.builders import make_place, make_site, make_unit, make_user, make_variant, serviced_unit

pytestmark = [pytest.mark.browser, pytest.mark.django_db(transaction=True)]

PASSWORD = "a-browser-test-password"
WIDTHS = (800, 1280)
ROLES = ("technician", "supervisor", "viewer")

# Each .nowrap element's text on one line: none of its contents' boxes starts below another.
MEASURE = """() => {
  const broken = [];
  for (const el of document.querySelectorAll('.nowrap')) {
    if (!el.getClientRects().length) continue;  // hidden at this width
    const range = document.createRange();
    range.selectNodeContents(el);
    const rects = [...range.getClientRects()].filter(r => r.width > 0 && r.height > 0);
    if (!rects.length) continue;
    // A box that starts at or below the bottom of another is on a later line.
    const firstBottom = Math.min(...rects.map(r => r.bottom));
    if (rects.some(r => r.top >= firstBottom - 1)) broken.push(el.textContent.trim());
  }
  return {
    scroll: document.documentElement.scrollWidth,
    inner: window.innerWidth,
    broken: broken,
    nowrap: document.querySelectorAll('.nowrap').length,
    title: document.title,
    nav: !!document.querySelector('nav[aria-label=Main] a'),
  };
}"""


def _fleet():
    """A small fleet: a ready unit, one in the water, one lost at sea, one on the bench."""
    people = {}
    for role in ROLES:
        user = make_user(f"{role}-layout", role, is_staff=role == "supervisor")
        user.set_password(PASSWORD)
        user.save()
        people[role] = user
    tech = people["technician"]
    variant = make_variant(name="Layout variant 1500 m")
    workshop = make_place(name="Layout bench hall")
    site = make_site(name="Layout far-offshore array")
    day = timezone.localdate() - dt.timedelta(days=20)
    ready = make_unit(serial="LY1-0001", acoustic_address="C1-01", variant=variant, place=workshop)
    serviced_unit(ready, by=tech, site=site, day=day)
    wet = make_unit(serial="LY1-0002", acoustic_address="C1-02", variant=variant, place=workshop)
    serviced_unit(wet, by=tech, site=site, day=day)
    over = timezone.now() - dt.timedelta(days=5)
    for unit in (wet,):
        deployment_start(
            deployment=Deployment(
                unit=unit,
                site=site,
                over_side_at=over,
                planned_days=60,
                planned_interrogations_per_day=200,
                transmit_power_step=1,
            ),
            by=tech,
            check_readiness=False,
        )
    lost = make_unit(serial="LY1-0003", acoustic_address="C1-03", variant=variant, place=workshop)
    serviced_unit(lost, by=tech, site=site, day=day)
    deployment_start(
        deployment=Deployment(
            unit=lost,
            site=site,
            over_side_at=over,
            planned_days=60,
            planned_interrogations_per_day=200,
            transmit_power_step=1,
        ),
        by=tech,
        check_readiness=False,
    )
    Transponder.objects.filter(pk=lost.pk).update(hold=UnitHold.LOST, hold_reason="No reply.")
    bench = make_unit(serial="LY1-0004", acoustic_address="C1-04", variant=variant, place=workshop)
    record = service_record_save(
        record=ServiceRecord(
            unit=bench,
            opened_at=timezone.now() - dt.timedelta(hours=2),
            technician=tech,
            place=workshop,
        ),
        entries=[],
        by=tech,
    )
    closed = ServiceRecord.objects.filter(unit=ready, closed_at__isnull=False).first()
    merge = _kit_merge(people["supervisor"], bench)
    return {"site": site, "record": record, "closed": closed, "variant": variant, "merge": merge}


def _kit_merge(boss, unit):
    """A merged kit with one conflict kept, its rows' long values as a merge writes them."""
    kit = Kit.objects.create(
        code="K0042",
        job="Layout survey of the far-offshore array, second leg",
        created_at=timezone.now() - dt.timedelta(days=3),
        created_by=boss,
        certificate_year=timezone.localdate().year,
        certificate_first=9001,
        certificate_last=9100,
    )
    merge = KitMerge.objects.create(
        kit=kit,
        file_sha256="c" * 64,
        merged_at=timezone.now(),
        merged_by=boss,
        status=KitMerge.Status.APPLIED,
        counts={"bench visits": 1, "entries": 3, "deployments": 1},
        rows_added=5,
        notes="LY1-0004 was worked on both sides since the export; the histories do not overlap.",
    )
    row = {
        "model": "fleet.deployment",
        "uid": "0b6f3c5e-8d0a-4a43-9d1f-5a7f1f0f2c11",
        "text": "deployment over the side 2026-11-29 06:40, recovered 2026-11-30 18:05",
        "fields": {
            "over_side_at": "2026-11-29T06:40:00.000000+00:00",
            "notes": "Released on the second command; slow ascent, recovered by the workboat "
            "alongside-without-the-crane-because-the-swell-was-too-high",
            "uid": "0b6f3c5e-8d0a-4a43-9d1f-5a7f1f0f2c11",
        },
        "refs": {},
    }
    KitConflict.objects.create(
        merge=merge,
        kind=KitConflict.Kind.INTERLEAVED,
        unit=unit,
        key="layout",
        explanation="LY1-0004: the vessel's deployment cannot be true together with the "
        "shore's history since the export: ashore it was on the bench meanwhile.",
        shore_version=[{"model": "fleet.servicerecord", "text": "bench visit", "fields": {}}],
        vessel_version=[row],
        choices=[KitConflict.Choice.KEEP_SHORE, KitConflict.Choice.ADD_VESSEL],
    )
    return merge


def _pages(fleet, role):
    start = (timezone.localdate() + dt.timedelta(days=7)).isoformat()
    site = fleet["site"].pk
    pages = [
        "/",
        "/?show=all",
        "/units/",
        "/units/LY1-0001/",
        "/units/LY1-0002/",
        "/units/LY1-0003/",
        "/units/LY1-0004/",
        f"/units/LY1-0001/readiness/?site={site}&start={start}&days=60",
        f"/units/LY1-0001/checklist/?site={site}&start={start}&days=60",
        "/deployments/",
        "/deployments/?open=1",
        "/sites/",
        f"/sites/{site}/",
        f"/plan/?site={site}&start={start}&days=60&wanted=1",
        "/timeline/",
        "/help/",
        "/feed/",
        f"/records/{fleet['closed'].pk}/",
        f"/records/{fleet['record'].pk}/",
        "/records/",
        "/search/?q=LY1",
        "/recall/?part=seal_lot&value=L-1",
    ]
    if role != "viewer":
        pages += ["/deployments/new/", "/units/LY1-0001/records/new/"]
    if role == "supervisor":
        pages += [
            "/sites/new/",
            "/fleet/variants/",
            f"/fleet/variants/{fleet['variant'].pk}/",
            f"/fleet/variants/{fleet['variant'].pk}/edit/",
            "/fleet/variants/new/",
            "/fleet/units/new/",
            "/fleet/units/new-several/",
            "/units/LY1-0001/edit/",
            "/units/LY1-0001/hold/",
            "/import/",
            "/labels/contact/",
            "/kits/merge/",
            f"/kits/merge/{fleet['merge'].pk}/",
            "/kits/",
            "/kits/new/",
        ]
    return pages


def _sign_in(page, base, role):
    page.goto(f"{base}/accounts/login/")
    page.fill("#id_username", f"{role}-layout")
    page.fill("#id_password", PASSWORD)
    page.click("main button[type=submit]")
    page.wait_for_url(f"{base}/")


def _shoot(page, role, width, path):
    folder = os.environ.get("HOLDFAST_SCREENSHOTS")
    if folder:
        name = path.strip("/").split("?")[0].replace("/", "_") or "overview"
        page.screenshot(path=str(Path(folder) / f"{role}-{name}-{width}.png"), full_page=True)


def test_every_page_fits_and_keeps_serials_and_dates_whole(live_server, browser):
    fleet = _fleet()
    base = live_server.url
    problems = []
    seen_nowrap = 0
    for width in WIDTHS:
        for role in ROLES:
            context = browser.new_context(viewport={"width": width, "height": 900})
            page = context.new_page()
            page.set_default_timeout(15_000)
            _sign_in(page, base, role)
            for path in _pages(fleet, role):
                response = page.goto(base + path)
                assert response is not None and response.status == 200, (role, path)
                m = page.evaluate(MEASURE)
                seen_nowrap += m["nowrap"]
                if m["scroll"] > m["inner"]:
                    problems.append(f"{role} {width} {path}: {m['scroll']} px wide")
                if m["broken"]:
                    problems.append(f"{role} {width} {path}: broken {m['broken'][:3]}")
                assert m["title"] and m["nav"], (role, path)
                _shoot(page, role, width, path)
            context.close()
    assert seen_nowrap > 100  # the check looked at something
    assert problems == [], "\n".join(problems)


@pytest.mark.parametrize("width", WIDTHS)
def test_error_pages_have_a_title_and_the_navigation(live_server, browser, width):
    _fleet()
    base = live_server.url
    context = browser.new_context(viewport={"width": width, "height": 900})
    page = context.new_page()
    _sign_in(page, base, "viewer")
    for path, status, title in (
        ("/deployments/new/", 403, "Not allowed · Holdfast"),
        ("/units/NO-SUCH-UNIT/", 404, "Not found · Holdfast"),
        ("/admin/", 403, "Not allowed · Holdfast"),
    ):
        response = page.goto(base + path)
        assert response is not None and response.status == status, path
        m = page.evaluate(MEASURE)
        assert m["title"] == title
        assert m["nav"], path
        assert m["scroll"] <= m["inner"], path
        assert page.locator("main h1").count() == 1
        _shoot(page, "viewer", width, f"error-{status}-{path}")
    context.close()
