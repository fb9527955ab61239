"""Free text has a length limit on the form and the model, with a message; a pasted file is
refused instead of stored."""

import datetime as dt

import pytest
from django.core.exceptions import ValidationError
from django.db import models
from django.urls import reverse
from django.utils import timezone

from fleet.forms import DeploymentForm, ServiceRecordForm, SiteForm
from fleet.models import Deployment, ServiceRecord, Site, Transponder, UnitHold
from fleet.models.validators import REASON_MAX_CHARS, SUMMARY_MAX_CHARS
from tests.web.test_records import record_post

pytestmark = pytest.mark.django_db

MEGABYTE = "ب" * 1_000_000  # right-to-left letters, a million of them


def test_every_free_text_field_a_person_types_has_a_limit():
    from django.apps import apps

    unlimited = [
        f"{m.__name__}.{f.name}"
        for m in apps.get_app_config("fleet").get_models()
        for f in m._meta.concrete_fields
        if isinstance(f, models.TextField)
        and f.editable
        and f.max_length is None
        # derived rows and copies of typed values, written by the services only
        and m._meta.model_name not in ("duerow",)
        and (m.__name__, f.name)
        not in {("Amendment", "original_value"), ("Amendment", "corrected_value")}
    ]
    assert unlimited == []


def test_a_megabyte_summary_is_refused_with_a_message(as_technician, unit, workshop, technician):
    data = record_post(unit, workshop, technician)
    data["summary"] = MEGABYTE
    response = as_technician.post(reverse("record-new", args=[unit.serial]), data)
    assert response.status_code == 400
    assert f"at most {SUMMARY_MAX_CHARS} characters" in response.content.decode()
    assert ServiceRecord.objects.count() == 0


def test_a_summary_at_the_limit_is_kept(as_technician, unit, workshop, technician):
    data = record_post(unit, workshop, technician)
    data["summary"] = "ש" * SUMMARY_MAX_CHARS
    response = as_technician.post(reverse("record-new", args=[unit.serial]), data)
    assert response.status_code == 302
    assert len(ServiceRecord.objects.get().summary) == SUMMARY_MAX_CHARS


def test_site_and_deployment_notes_are_limited(unit, site):
    site_form = SiteForm(
        data={
            "name": "Limit site",
            "latitude_deg": "45",
            "longitude_deg": "-20",
            "water_depth_m": "1350",
            "bottom_temperature_c": "4",
            "practical_salinity": "35",
            "notes": MEGABYTE,
        }
    )
    assert site_form.errors["notes"] == [
        f"Ensure this value has at most {SUMMARY_MAX_CHARS} characters (it has 1000000)."
    ]
    deployment_form = DeploymentForm(
        data={
            "unit": unit.pk,
            "site": site.pk,
            "over_side_at": (timezone.now() - dt.timedelta(hours=1)).strftime("%Y-%m-%dT%H:%M"),
            "planned_days": "90",
            "planned_interrogations_per_day": "400",
            "transmit_power_step": "1",
            "notes": MEGABYTE,
        }
    )
    assert "notes" in deployment_form.errors
    assert ServiceRecordForm(unit=unit).fields["summary"].max_length == SUMMARY_MAX_CHARS


def test_the_models_refuse_long_text_set_in_code(unit, site):
    unit.hold, unit.hold_reason = UnitHold.QUARANTINED, "r" * (REASON_MAX_CHARS + 1)
    with pytest.raises(ValidationError) as caught:
        unit.full_clean()
    assert "hold_reason" in caught.value.message_dict
    site.notes = "n" * (SUMMARY_MAX_CHARS + 1)
    with pytest.raises(ValidationError) as caught:
        site.full_clean()
    assert "notes" in caught.value.message_dict
    assert Transponder._meta.get_field("notes").max_length == SUMMARY_MAX_CHARS
    assert Deployment._meta.get_field("override_reason").max_length == SUMMARY_MAX_CHARS
    assert Site._meta.get_field("notes").max_length == SUMMARY_MAX_CHARS
