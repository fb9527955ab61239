"""The variant admin's seal positions: a ring needs an AS568 dash number or both ISO 3601
sizes, and the page says so instead of failing."""

import pytest
from django.urls import reverse

from fleet.models import SealPosition

pytestmark = pytest.mark.django_db


def _change_post(client, variant):
    """The variant's change page posted back unchanged, inlines included."""
    url = reverse("admin:fleet_variant_change", args=[variant.pk])
    page = client.get(url)
    form = page.context["adminform"].form
    data = {}
    for name in form.fields:
        value = form.initial.get(name)
        if value is None or value is False:
            continue
        data[name] = "on" if value is True else value
    data["allowed_chemistries"] = '["alkaline", "li_socl2"]'
    for inline in page.context["inline_admin_formsets"]:
        formset = inline.formset
        data[f"{formset.prefix}-TOTAL_FORMS"] = str(len(formset.forms))
        data[f"{formset.prefix}-INITIAL_FORMS"] = str(formset.initial_form_count())
        for i, row in enumerate(formset.forms):
            data[f"{formset.prefix}-{i}-id"] = row.instance.pk
            for name in row.fields:
                value = row.initial.get(name)
                if value is None or value is False:
                    continue
                data[f"{formset.prefix}-{i}-{name}"] = "on" if value is True else value
    seals = next(
        i.formset for i in page.context["inline_admin_formsets"] if "seal" in i.formset.prefix
    )
    return url, data, seals.prefix


def test_a_seal_position_left_with_no_size_gets_a_message(client, supervisor, variant):
    supervisor.is_superuser = True
    supervisor.save()
    client.force_login(supervisor)
    url, data, prefix = _change_post(client, variant)
    data[f"{prefix}-0-as568_dash"] = ""
    response = client.post(url, data)
    assert response.status_code == 200
    assert "Give an AS568 dash number, or both ISO 3601 d1 and d2." in response.content.decode()
    assert SealPosition.objects.filter(variant=variant, as568_dash="240").count() == 2


def test_a_seal_position_without_sizes_reads_as_such():
    assert SealPosition(name="Endcap").size_label == "size not given"
    assert str(SealPosition(name="Endcap", iso_inner_diameter_mm=50.0)) == "Endcap (size not given)"
    ring = SealPosition(name="Endcap", iso_inner_diameter_mm=50.0, iso_cross_section_mm=3.0)
    assert ring.size_label == "50 × 3 mm"
