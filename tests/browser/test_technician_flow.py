"""A technician signs in, finds a unit, records an anode reading and sees it on the unit page."""

import pytest

from fleet.models import AnodeReading
from tests.builders import make_place, make_unit, make_user, make_variant

pytestmark = [pytest.mark.browser, pytest.mark.django_db(transaction=True)]


def test_a_technician_records_an_anode_reading(live_server, page):
    tech = make_user("tech2", "technician")
    tech.set_password("a-browser-test-password")
    tech.save()
    variant = make_variant(name="Browser variant")
    workshop = make_place(name="North bench")
    make_unit(serial="BT-0042", variant=variant, place=workshop)

    page.goto(f"{live_server.url}/units/")
    assert "/accounts/login/" in page.url
    page.fill("#id_username", "tech2")
    page.fill("#id_password", "a-browser-test-password")
    page.click("button[type=submit]")

    page.wait_for_url(f"{live_server.url}/units/")
    page.get_by_role("link", name="BT-0042").click()
    page.wait_for_url(f"{live_server.url}/units/BT-0042/")
    assert page.locator("h1").inner_text().startswith("BT-0042")

    page.click("text=New bench visit")
    page.fill("#id_anodes-0-mass_g", "287.5")
    page.fill("#id_anodes-0-bond_resistance_ohm", "0.03")
    page.click("text=Save bench visit")

    page.wait_for_selector("text=Saved the bench visit for BT-0042")
    page.get_by_role("link", name="BT-0042").click()
    page.wait_for_url(f"{live_server.url}/units/BT-0042/")
    anodes = page.locator("section:has(h2:text('Anodes'))").inner_text()
    assert "287.5 g" in anodes
    assert "72 %" in anodes  # 287.5 g of a 400 g new anode
    assert AnodeReading.objects.get().mass_g == 287.5
