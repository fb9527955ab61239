"""Readiness gates in a real browser: an unfit unit cannot go over the side, a supervisor
can send it with a written reason that the unit page and the checklist print, and a unit
whose last release test failed reads as needing work, never Ready."""

import datetime as dt
import io

import pytest
from django.utils import timezone
from pypdf import PdfReader

from fleet.models import Deployment
from tests.builders import (
    make_place,
    make_site,
    make_unit,
    make_user,
    make_variant,
    serviced_unit,
)

pytestmark = [pytest.mark.browser, pytest.mark.django_db(transaction=True)]

PASSWORD = "a-browser-test-password"
REASON = "Client trial at this site; agreed with the operations manager."


def _person(name, role):
    user = make_user(name, role)
    user.set_password(PASSWORD)
    user.save()
    return user


def _sign_in(page, base, name):
    page.goto(f"{base}/accounts/login/")
    page.fill("#id_username", name)
    page.fill("#id_password", PASSWORD)
    page.click("main button[type=submit]")
    page.wait_for_url(f"{base}/")


def _deploy_form(page, base, serial, site):
    page.goto(f"{base}/deployments/new/")
    page.select_option("#id_unit", label=serial)
    site_value = page.locator("#id_site option", has_text=site).get_attribute("value")
    page.select_option("#id_site", value=site_value)
    page.fill("#id_planned_days", "60")
    page.fill("#id_planned_interrogations_per_day", "200")
    page.fill("#id_transmit_power_step", "1")
    page.click("text=Save deployment")


def test_an_unfit_unit_is_refused_and_a_supervisor_override_is_kept_and_printed(
    live_server, browser
):
    _person("tech3", "technician")
    boss = _person("boss3", "supervisor")
    variant = make_variant(name="Gate variant")
    shed = make_place(name="Gate shed")
    site = make_site(name="Gate site")
    make_unit(serial="GT-0001", variant=variant, place=shed)  # nothing recorded: unfit
    base = live_server.url

    technician = browser.new_context(viewport={"width": 1280, "height": 1000}).new_page()
    _sign_in(technician, base, "tech3")
    _deploy_form(technician, base, "GT-0001", "Gate site")
    failed = technician.locator("section.failed-checks").inner_text()
    assert "Pressure test" in failed and "no pressure test recorded" in failed
    assert "Only a supervisor can deploy a unit against a failed check" in failed
    assert not Deployment.objects.exists()

    supervisor = browser.new_context(viewport={"width": 1280, "height": 1000}).new_page()
    _sign_in(supervisor, base, "boss3")
    _deploy_form(supervisor, base, "GT-0001", "Gate site")
    supervisor.fill("textarea[name='override-reason']", REASON)
    supervisor.click("text=Save deployment")
    supervisor.wait_for_url(f"{base}/units/GT-0001/")
    deployment = Deployment.objects.get()
    assert (deployment.override_reason, deployment.override_by) == (REASON, boss)
    head = supervisor.locator(".pagehead").inner_text()
    assert "In the water" in head and "at Gate site" in head
    history = supervisor.locator("main").inner_text()
    assert "Deployed against a failed check" in history and REASON in history

    start = timezone.localdate().isoformat()
    pdf = supervisor.context.request.get(
        f"{base}/units/GT-0001/checklist.pdf?site={site.pk}&start={start}&days=60"
    )
    assert pdf.status == 200
    text = "\n".join(p.extract_text() for p in PdfReader(io.BytesIO(pdf.body())).pages)
    assert "Deployed against a failed check" in text
    assert "Client trial at this site" in text


def test_a_unit_whose_release_test_failed_never_reads_ready(live_server, browser):
    tech = _person("tech4", "technician")
    variant = make_variant(name="Fault variant")
    shed = make_place(name="Fault shed")
    site = make_site(name="Fault site")
    day = timezone.localdate() - dt.timedelta(days=2)
    good = make_unit(serial="RT-0001", acoustic_address="201", variant=variant, place=shed)
    bad = make_unit(serial="RT-0002", acoustic_address="202", variant=variant, place=shed)
    serviced_unit(good, by=tech, site=site, day=day)
    serviced_unit(bad, by=tech, site=site, day=day, limit_switch_ok=False)
    base = live_server.url

    page = browser.new_context(viewport={"width": 1280, "height": 1000}).new_page()
    _sign_in(page, base, "tech4")
    page.goto(f"{base}/units/")
    rows = {
        serial: page.locator("tr", has_text=serial).inner_text()
        for serial in ("RT-0001", "RT-0002")
    }
    assert "Ready" in rows["RT-0001"], rows
    assert "Ready" not in rows["RT-0002"] and "Needs work" in rows["RT-0002"], rows
    page.goto(f"{base}/units/RT-0002/")
    head = page.locator(".pagehead").inner_text()
    assert "Needs work" in head and "Ready" not in head
    assert "limit switch not confirmed" in page.locator("main").inner_text()
