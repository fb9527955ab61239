"""The fleet management pages: supervisors only (technicians and viewers get 403, never 500),
bad input gets a message on the page and nothing half-saved."""

import pytest
from django.urls import reverse

from fleet.models import AnodePosition, HoldChange, SealPosition, Transponder, UnitHold, Variant
from tests.builders import make_place, make_record, make_variant

pytestmark = pytest.mark.django_db

VARIANT = {
    "name": "Page variant 2000",
    "depth_rating_m": "2000",
    "housing_alloy": "al6061",
    "allowed_chemistries": ["li_socl2"],
    "cells_in_series": "21",
    "parallel_strings": "1",
    "listen_current_a": "0.0002",
    "release_charge_as": "0",
    "release_fitted": "on",
    "has_temperature_sensor": "on",
    "has_pressure_sensor": "on",
}
# Worked example, reference notes 2.2: AS568-240 in a 101.60 mm bore, groove 95.96 x 4.75 mm.
GOOD_SEAL = {
    "name": "End cap",
    "as568_dash": "240",
    "material": "NBR",
    "count": "2",
    "interval_months": "12",
    "max_openings": "4",
    "gland_kind": "radial",
    "bore_diameter_mm": "101.60",
    "groove_diameter_mm": "95.96",
    "groove_width_mm": "4.75",
}
ANODE = {
    "name": "Collar",
    "alloy": "al_zn_in",
    "new_net_mass_g": "600",
    "utilisation_factor": "0.8",
    "replace_at_remaining_percent": "50",
}
STEP = {"step": "1", "charge_per_reply_as": "0.004"}


def _rows(prefix, rows, initial=0):
    data = {f"{prefix}-TOTAL_FORMS": str(len(rows)), f"{prefix}-INITIAL_FORMS": str(initial)}
    for i, row in enumerate(rows):
        data.update({f"{prefix}-{i}-{name}": value for name, value in row.items()})
    return data


def _new_variant_post(*, seal=GOOD_SEAL, **extra):
    return {
        **VARIANT,
        **_rows("anodes", [ANODE]),
        **_rows("seals", [seal]),
        **_rows("steps", [STEP]),
        **extra,
    }


def _edit_post(client, variant):
    """The variant's edit page posted back unchanged."""
    page = client.get(reverse("variant-edit", args=[variant.pk]))
    form = page.context["form"]
    data = {}
    for name, field in form.fields.items():
        value = form.initial.get(name, field.initial)
        if value is None or value is False:
            continue
        data[name] = "on" if value is True else value
    for _, formset in page.context["formsets"]:
        rows = []
        for row in formset.initial_forms:
            values = {"id": row.instance.pk}
            for name in row.fields:
                value = row.initial.get(name)
                if value is None or value is False or name in ("id", "variant", "DELETE"):
                    continue
                values[name] = "on" if value is True else value
            rows.append(values)
        data.update(_rows(formset.prefix, rows, initial=len(rows)))
    return data


PAGES = [
    ("variant-list", []),
    ("variant-new", []),
    ("unit-new", []),
    ("units-new-batch", []),
]


@pytest.mark.parametrize("persona", ["as_technician", "as_viewer", "as_outsider"])
def test_only_supervisors_reach_the_fleet_pages(request, persona, unit, variant):
    client = request.getfixturevalue(persona)
    urls = [reverse(name, args=args) for name, args in PAGES] + [
        reverse("variant-detail", args=[variant.pk]),
        reverse("variant-edit", args=[variant.pk]),
        reverse("unit-edit", args=[unit.serial]),
        reverse("unit-hold", args=[unit.serial]),
    ]
    for url in urls:
        assert client.get(url).status_code == 403, url
        assert client.post(url, {}).status_code == 403, url
    assert client.post(reverse("unit-move", args=[unit.serial]), {}).status_code == 403
    # 403 before 404: a missing variant or unit tells them nothing
    assert client.get(reverse("variant-detail", args=[999999])).status_code == 403
    assert client.get(reverse("unit-edit", args=["NO-SUCH"])).status_code == 403


def test_supervisors_open_every_fleet_page(as_supervisor, unit, variant):
    for name, args in PAGES:
        assert as_supervisor.get(reverse(name, args=args)).status_code == 200, name
    for url in (
        reverse("variant-detail", args=[variant.pk]),
        reverse("variant-edit", args=[variant.pk]),
        reverse("unit-edit", args=[unit.serial]),
        reverse("unit-hold", args=[unit.serial]),
    ):
        assert as_supervisor.get(url).status_code == 200, url
    assert as_supervisor.get(reverse("variant-detail", args=[999999])).status_code == 404


def test_the_fleet_link_shows_for_supervisors_only(as_supervisor, as_technician):
    link = f'href="{reverse("variant-list")}"'
    assert link in as_supervisor.get("/").content.decode()
    assert link not in as_technician.get("/").content.decode()


def test_the_variant_list_costs_a_fixed_number_of_queries(
    as_supervisor, django_assert_max_num_queries
):
    for i in range(8):
        make_variant(name=f"Variant {i}")
    # Expect: session, user, groups (role check), variants with their counts.
    with django_assert_max_num_queries(4):
        response = as_supervisor.get(reverse("variant-list"))
    assert response.status_code == 200 and "Variant 7" in response.content.decode()


def test_a_supervisor_creates_a_variant_and_sees_its_gland_figures(as_supervisor):
    response = as_supervisor.post(reverse("variant-new"), _new_variant_post())
    variant = Variant.objects.get(name="Page variant 2000")
    assert response.status_code == 302
    assert response["Location"] == reverse("variant-detail", args=[variant.pk])
    assert variant.anode_positions.count() == 1 and variant.reply_steps.count() == 1
    body = as_supervisor.get(response["Location"]).content.decode()
    seal = variant.seal_positions.get()
    row = body[body.index(f'id="seal-{seal.pk}"') :]
    row = row[: row.index("</tr>")]
    # Reference notes 2.2 worked example (geometry definitions, ring from SAE AS568 Table 1):
    # squeeze 20.1 %, stretch 1.18 %, fill 73.1 %.
    assert "20.1 %" in row and "1.18 %" in row and "73.1 %" in row
    # Ranges: common practice, no published source, as fleet/calc/seals.py says.
    assert "15–30 % (preferred up to 25 %)" in row and "up to 85 %" in row
    assert "Pass" in row
    assert "Ring sizes: SAE AS568 Table 1." in body
    assert "common practice from seal-design guides, no published source" in body


def test_a_gland_outside_the_ranges_needs_confirming_and_saves_nothing_until_then(as_supervisor):
    # groove 96.80 mm: depth 2.40 mm, squeeze 32 % (above 30 %, common practice)
    seal = {**GOOD_SEAL, "groove_diameter_mm": "96.80", "groove_width_mm": "5.20"}
    response = as_supervisor.post(reverse("variant-new"), _new_variant_post(seal=seal))
    assert response.status_code == 400
    formset = dict(response.context["formsets"])["Seal positions"]
    errors = formset.forms[0].errors
    assert errors["groove_diameter_mm"] == [
        "Squeeze 32.0 % with AS568-240, ID 94.84 mm × CS 3.53 mm; the usual range is "
        "15–30 % (preferred up to 25 %) (common practice, no published source)."
    ]
    assert "tick this box" in errors["confirm_gland"][0]
    assert not Variant.objects.exists() and not SealPosition.objects.exists()
    confirmed = {**seal, "confirm_gland": "on"}
    response = as_supervisor.post(reverse("variant-new"), _new_variant_post(seal=confirmed))
    assert response.status_code == 302
    variant = Variant.objects.get()
    body = as_supervisor.get(response["Location"]).content.decode()
    assert "32.0 %" in body and "squeeze 32.0 % is above the maximum 30 %" in body
    assert variant.seal_positions.get().groove_diameter_mm == 96.80


def test_an_impossible_gland_is_refused_on_its_field(as_supervisor):
    seal = {**GOOD_SEAL, "groove_diameter_mm": "105"}
    response = as_supervisor.post(reverse("variant-new"), _new_variant_post(seal=seal))
    assert response.status_code == 400
    assert "The groove diameter must be smaller than the bore." in response.content.decode()
    assert not Variant.objects.exists()


def test_a_bad_variant_value_is_a_message_not_a_500(as_supervisor):
    response = as_supervisor.post(
        reverse("variant-new"), _new_variant_post(depth_rating_m="nan", allowed_chemistries=[])
    )
    assert response.status_code == 400
    body = response.content.decode()
    assert "Tick at least one battery chemistry." in body
    assert not Variant.objects.exists() and not AnodePosition.objects.exists()


def test_editing_a_variant_refreshes_its_units_due_rows(as_supervisor, variant, unit):
    from django.utils import timezone

    from fleet.due.snapshot import rebuild_differences

    data = _edit_post(as_supervisor, variant)
    data["seals-0-interval_months"] = "6"
    data.update(
        {
            "anodes-TOTAL_FORMS": str(int(data["anodes-TOTAL_FORMS"]) + 1),
            **{f"anodes-2-{k}": v for k, v in ANODE.items()},
        }
    )
    response = as_supervisor.post(reverse("variant-edit", args=[variant.pk]), data)
    assert response.status_code == 302, response.context and response.context["form"].errors
    assert variant.anode_positions.count() == 3
    assert sorted(variant.seal_positions.values_list("interval_months", flat=True)) == [6, 12]
    assert rebuild_differences(at=timezone.now())[0] == []


def test_a_position_in_use_by_history_cannot_be_deleted(as_supervisor, variant, unit, technician):
    from fleet.models import AnodeReading

    position = variant.anode_positions.order_by("name").first()
    record = make_record(unit=unit, by=technician)
    AnodeReading.objects.create(record=record, position=position, mass_g=390)
    data = _edit_post(as_supervisor, variant)
    data["name"] = "Renamed on the way"
    data["anodes-0-DELETE"] = "on"
    response = as_supervisor.post(reverse("variant-edit", args=[variant.pk]), data)
    assert response.status_code == 400
    assert f"Anode position {position.name} has readings" in response.content.decode()
    assert AnodePosition.objects.filter(pk=position.pk).exists()
    assert Variant.objects.get(pk=variant.pk).name == variant.name


def test_a_supervisor_registers_and_edits_a_unit(as_supervisor, variant, workshop):
    data = {
        "serial": "TX-0500",
        "variant": variant.pk,
        "place": workshop.pk,
        "acoustic_address": "501",
        "turnaround_delay_ms": "12.5",
        "transmit_power_step": "1",
    }
    response = as_supervisor.post(reverse("unit-new"), data)
    assert response.status_code == 302
    unit = Transponder.objects.get(serial="TX-0500")
    edit = {**data, "acoustic_address": "502", "notes": "Spare", "version": unit.version}
    response = as_supervisor.post(reverse("unit-edit", args=[unit.serial]), edit)
    assert response.status_code == 302
    unit.refresh_from_db()
    assert (unit.acoustic_address, unit.notes, unit.version) == ("502", "Spare", 2)
    stale = {**edit, "notes": "Late edit", "version": 1}
    response = as_supervisor.post(reverse("unit-edit", args=[unit.serial]), stale)
    assert response.status_code == 400
    assert "after you loaded it" in response.content.decode()
    assert Transponder.objects.get(pk=unit.pk).notes == "Spare"


def test_a_unit_with_history_keeps_its_variant(as_supervisor, unit, technician):
    make_record(unit=unit, by=technician)
    other = make_variant(name="Other variant")
    data = {
        "serial": unit.serial,
        "variant": other.pk,
        "place": unit.place_id,
        "acoustic_address": "101",
        "turnaround_delay_ms": "12.5",
        "transmit_power_step": "1",
        "version": unit.version,
    }
    page = as_supervisor.get(reverse("unit-edit", args=[unit.serial])).content.decode()
    assert "Fixed: the unit has bench visits or deployments" in page
    as_supervisor.post(reverse("unit-edit", args=[unit.serial]), data)
    assert Transponder.objects.get(pk=unit.pk).variant_id == unit.variant_id


def test_a_supervisor_brings_a_range_of_units_into_service(as_supervisor, variant, workshop):
    data = {
        "serials": "NB-0098..NB-0107",
        "variant": variant.pk,
        "place": workshop.pk,
        "first_address": "0301",
        "turnaround_delay_ms": "12.5",
        "transmit_power_step": "1",
    }
    response = as_supervisor.post(reverse("units-new-batch"), data)
    assert response.status_code == 302
    units = list(Transponder.objects.filter(serial__startswith="NB-").order_by("serial"))
    assert [u.serial for u in units] == [f"NB-{n:04d}" for n in range(98, 108)]
    assert [u.acoustic_address for u in units] == [f"{n:04d}" for n in range(301, 311)]
    listed = as_supervisor.get(response["Location"]).content.decode()
    assert "NB-0098" in listed and "NB-0107" in listed


def test_a_batch_with_bad_serials_names_each_and_saves_none(as_supervisor, variant, workshop, unit):
    data = {
        "serials": f"NB-0001, {unit.serial}\nnb/2\nNB-0001",
        "variant": variant.pk,
        "place": workshop.pk,
        "first_address": "301",
        "turnaround_delay_ms": "12.5",
        "transmit_power_step": "1",
    }
    response = as_supervisor.post(reverse("units-new-batch"), data)
    assert response.status_code == 400
    body = response.content.decode()
    assert f"{unit.serial}: Transponder with this Serial already exists." in body
    assert "NB/2: Use 2 to 31 capital letters" in body
    assert "NB-0001: listed twice." in body
    assert not Transponder.objects.filter(serial__startswith="NB").exists()
    response = as_supervisor.post(reverse("units-new-batch"), {**data, "serials": "A-9..A-1"})
    assert response.status_code == 400
    assert "A-9..A-1: the range ends before it starts." in response.content.decode()


def test_a_supervisor_moves_a_unit_from_its_page(as_supervisor, unit):
    store = make_place(name="Store C", kind="store")
    page = as_supervisor.get(unit.get_absolute_url()).content.decode()
    assert reverse("unit-move", args=[unit.serial]) in page
    url = reverse("unit-move", args=[unit.serial])
    response = as_supervisor.post(url, {"place": store.pk, "version": unit.version}, follow=True)
    assert "TX-0001 is now at Store C." in response.content.decode()
    assert Transponder.objects.get(pk=unit.pk).place == store
    response = as_supervisor.post(url, {"place": "nonsense", "version": "x"}, follow=True)
    assert response.status_code == 200 and "Not moved:" in response.content.decode()


def test_a_supervisor_sets_and_clears_a_hold_with_history(as_supervisor, supervisor, unit):
    url = reverse("unit-hold", args=[unit.serial])
    response = as_supervisor.post(url, {"hold": "lost", "reason": ""})
    assert response.status_code == 400 and "This field is required." in response.content.decode()
    assert not HoldChange.objects.exists()
    response = as_supervisor.post(url, {"hold": "lost", "reason": "Left on the quay"})
    assert response.status_code == 302
    response = as_supervisor.post(url, {"hold": "none", "reason": "Found in the store"})
    assert response.status_code == 302
    unit.refresh_from_db()
    assert unit.hold == UnitHold.NONE and unit.hold_set_by == supervisor
    page = as_supervisor.get(unit.get_absolute_url()).content.decode()
    assert "Hold history" in page and "Left on the quay" in page and "Found in the store" in page


def test_an_impossible_hold_is_a_message(as_supervisor, unit, technician):
    make_record(unit=unit, by=technician)
    url = reverse("unit-hold", args=[unit.serial])
    response = as_supervisor.post(url, {"hold": "retired", "reason": "Worn out"})
    assert response.status_code == 400
    assert "has an open bench visit" in response.content.decode()
    assert Transponder.objects.get(pk=unit.pk).hold == UnitHold.NONE
    response = as_supervisor.post(url, {"hold": "none", "reason": "x"})  # not offered: no hold now
    assert response.status_code == 400
    assert not HoldChange.objects.exists()
