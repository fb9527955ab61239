"""A supervisor brings a new variant (with anode and seal positions and a power step) and ten
units into service from the workshop pages, without the admin, and finds them in the unit
list. Every fleet page fits an 800 px wide window."""

import pytest

from fleet.models import Transponder, Variant
from tests.builders import make_place, make_user

pytestmark = [pytest.mark.browser, pytest.mark.django_db(transaction=True)]

PASSWORD = "a-browser-test-password"


def _fits(page) -> bool:
    return page.evaluate("document.documentElement.scrollWidth <= window.innerWidth")


def test_a_supervisor_brings_a_variant_and_ten_units_into_service(live_server, browser):
    boss = make_user("boss5", "supervisor")
    boss.set_password(PASSWORD)
    boss.save()
    make_place(name="East store", kind="store")
    base = live_server.url
    page = browser.new_context(viewport={"width": 800, "height": 1000}).new_page()
    page.set_default_timeout(15_000)

    page.goto(f"{base}/accounts/login/")
    page.fill("#id_username", "boss5")
    page.fill("#id_password", PASSWORD)
    page.click("main button[type=submit]")
    page.wait_for_url(f"{base}/")

    page.click("header details.more summary")
    page.click("header >> text=Fleet")
    page.wait_for_url(f"{base}/fleet/variants/")
    assert _fits(page), "variant list"
    page.click("text=New variant")
    page.wait_for_url("**/fleet/variants/new/")
    assert _fits(page), "new variant form"
    page.fill("#id_name", "Shelf variant 4000")
    page.fill("#id_depth_rating_m", "4000")
    page.select_option("#id_housing_alloy", "ti_gr5")
    page.check("input[name=allowed_chemistries][value=li_socl2]")
    page.fill("#id_cells_in_series", "14")
    page.fill("#id_listen_current_a", "0.0002")
    page.fill("#id_anodes-0-name", "Collar")
    page.fill("#id_anodes-0-new_net_mass_g", "550")
    page.fill("#id_anodes-1-name", "Release arm")
    page.fill("#id_anodes-1-new_net_mass_g", "120")
    page.fill("#id_seals-0-name", "End cap")
    page.fill("#id_seals-0-as568_dash", "240")
    page.fill("#id_seals-0-interval_months", "12")
    page.fill("#id_seals-0-max_openings", "4")
    page.select_option("#id_seals-0-gland_kind", "radial")
    page.fill("#id_seals-0-bore_diameter_mm", "101.60")
    page.fill("#id_seals-0-groove_diameter_mm", "95.96")
    page.fill("#id_seals-0-groove_width_mm", "4.75")
    page.fill("#id_steps-0-step", "1")
    page.fill("#id_steps-0-charge_per_reply_as", "0.004")
    page.click("text=Save variant")
    page.wait_for_selector("text=Saved variant Shelf variant 4000")
    assert _fits(page), "variant page"
    variant = Variant.objects.get(name="Shelf variant 4000")
    assert sorted(variant.anode_positions.values_list("name", flat=True)) == [
        "Collar",
        "Release arm",
    ]
    glands = page.locator("table.seals").inner_text()
    # Reference notes 2.2 worked example: squeeze 20.1 %, stretch 1.18 %, fill 73.1 %.
    assert "20.1 %" in glands and "1.18 %" in glands and "73.1 %" in glands

    page.click("main >> text=Bring units into service")
    page.wait_for_url("**/fleet/units/new-several/**")
    assert _fits(page), "batch form"
    page.fill("#id_serials", "SV-0001..SV-0010")
    page.select_option("#id_place", label="East store")
    page.fill("#id_first_address", "401")
    page.fill("#id_turnaround_delay_ms", "12.5")
    page.click("text=Bring into service")
    page.wait_for_selector("text=Brought 10 units into service (SV-0001 to SV-0010)")
    listed = page.locator("main table").inner_text()
    for n in range(1, 11):
        assert f"SV-{n:04d}" in listed
    assert Transponder.objects.filter(variant=variant, place__name="East store").count() == 10

    page.get_by_role("link", name="SV-0003").click()
    page.wait_for_url(f"{base}/units/SV-0003/")
    page.click("text=Set hold")
    page.wait_for_url("**/units/SV-0003/hold/")
    assert _fits(page), "hold form"
    page.check("input[name=hold][value=quarantined]")
    page.fill("#id_reason", "Dropped during unpacking")
    page.click("text=Save hold")
    page.wait_for_url(f"{base}/units/SV-0003/")
    assert "Quarantined" in page.locator(".pagehead").inner_text()
    assert "Dropped during unpacking" in page.locator("main").inner_text()
    assert _fits(page), "unit page with its move form and hold history"
    page.click("text=Edit unit")
    page.wait_for_url("**/units/SV-0003/edit/")
    assert _fits(page), "unit form"
