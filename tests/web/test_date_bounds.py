"""Every date a person types is held to 1 January 1980 … today + the planning horizon, with a
message, in every form and view that takes one, whatever the workshop's time zone: year 1 and
year 9999 never reach a time-zone shift, a query or date arithmetic that would overflow.

The far time zones are chosen for their offsets: +14 h, and -11 h with a local mean time of
+12:37 before 1892 (so 0001-01-01 00:00 there is a day before year 1 in UTC).
"""

import datetime as dt

import pytest
from django import forms
from django.urls import reverse
from django.utils import timezone

from fleet.forms import DeploymentForm, RecoveryForm, ServiceRecordForm, entry_forms
from fleet.models import BatteryInstall, Deployment, ServiceRecord
from fleet.models.records import entry_kinds
from fleet.models.validators import DATE_VALIDATORS, PLANNING_HORIZON_DAYS, latest_entry_date
from tests.builders import make_record
from tests.web.entry_rows import good_rows
from tests.web.test_records import record_post

pytestmark = pytest.mark.django_db

TIME_ZONES = ["UTC", "Pacific/Kiritimati", "Pacific/Pago_Pago"]
FAR_DATES = {"0001-01-01": "before 1 January 1980", "9999-12-31": "check the year"}


def _as_input(field: forms.Field, day: str) -> str:
    return f"{day}T00:00" if isinstance(field, forms.DateTimeField) else day


def _date_fields(form: forms.BaseForm) -> dict[str, forms.Field]:
    return {
        name: field
        for name, field in form.fields.items()
        if isinstance(field, forms.DateField | forms.DateTimeField)
    }


def test_every_date_field_of_every_form_carries_both_bounds(unit, technician):
    record = make_record(unit=unit, by=technician)
    BatteryInstall.objects.create(
        record=record,
        unit=unit,
        pack_serial="P0",
        chemistry="alkaline",
        nominal_voltage_v=31.5,
        capacity_ah=17,
        made_on=dt.date(2025, 1, 1),
        installed_on=dt.date(2025, 2, 1),
        ocv_install_v=32.0,
    )  # so the record form offers the fitted pack's removal date too
    built = [
        ServiceRecordForm(unit=unit),
        DeploymentForm(),
        RecoveryForm(),
        *(entry_forms()[kind](record=record) for kind in entry_kinds()),
    ]
    seen = 0
    for form in built:
        for name, field in _date_fields(form).items():
            seen += 1
            for check in DATE_VALIDATORS:
                assert check in field.validators, f"{type(form).__name__}.{name}"
    assert seen >= 13  # opened_at, remove_pack_on, over_side_at, recovered_at and the entries'


def test_the_latest_date_is_the_planning_horizon_ahead():
    assert latest_entry_date() == timezone.localdate() + dt.timedelta(days=PLANNING_HORIZON_DAYS)


@pytest.mark.parametrize("tz", TIME_ZONES)
@pytest.mark.parametrize("day", FAR_DATES)
def test_every_date_on_the_bench_visit_page_gets_a_message_for_year_1_and_9999(
    as_technician, unit, workshop, technician, settings, tz, day
):
    settings.TIME_ZONE = tz
    url = reverse("record-new", args=[unit.serial])
    data = record_post(unit, workshop, technician)
    data["opened_at"] = f"{day}T00:00"
    response = as_technician.post(url, data)
    assert response.status_code == 400
    assert FAR_DATES[day] in response.content.decode()
    rows = good_rows(unit)  # fits a pack at an earlier visit, for the pack-removal row
    before = ServiceRecord.objects.count()
    record = ServiceRecord(unit=unit)
    for kind in entry_kinds():
        form = entry_forms()[kind](record=record)
        for name, field in _date_fields(form).items():
            row = {**rows[kind.bench_prefix], name: _as_input(field, day)}
            data = record_post(unit, workshop, technician, **{kind.bench_prefix: [row]})
            response = as_technician.post(url, data)
            assert response.status_code == 400, f"{kind.__name__}.{name}"
            assert FAR_DATES[day] in response.content.decode(), f"{kind.__name__}.{name}"
    assert ServiceRecord.objects.count() == before


@pytest.mark.parametrize("tz", TIME_ZONES)
@pytest.mark.parametrize("day", FAR_DATES)
def test_the_fitted_pack_removal_date_gets_a_message_for_year_1_and_9999(
    as_technician, unit, workshop, technician, settings, tz, day
):
    settings.TIME_ZONE = tz
    earlier = make_record(unit=unit, by=technician, closed_at=timezone.now())
    BatteryInstall.objects.create(
        record=earlier,
        unit=unit,
        pack_serial="P0",
        chemistry="alkaline",
        nominal_voltage_v=31.5,
        capacity_ah=17,
        made_on=dt.date(2025, 1, 1),
        installed_on=dt.date(2025, 2, 1),
        ocv_install_v=32.0,
    )
    data = record_post(unit, workshop, technician)
    data["remove_pack_on"] = day
    response = as_technician.post(reverse("record-new", args=[unit.serial]), data)
    assert response.status_code == 400
    assert FAR_DATES[day] in response.content.decode()
    assert BatteryInstall.objects.get().removed_on is None


@pytest.mark.parametrize("tz", TIME_ZONES)
@pytest.mark.parametrize("day", FAR_DATES)
def test_deploying_and_recovering_get_a_message_for_year_1_and_9999(
    as_technician, unit, site, settings, tz, day
):
    settings.TIME_ZONE = tz
    data = {
        "unit": unit.pk,
        "site": site.pk,
        "over_side_at": f"{day}T00:00",
        "planned_days": "90",
        "planned_interrogations_per_day": "400",
        "transmit_power_step": "1",
    }
    response = as_technician.post(reverse("deployment-new"), data)
    assert response.status_code == 400
    assert FAR_DATES[day] in response.content.decode()
    assert not Deployment.objects.exists()

    deployment = Deployment.objects.create(
        unit=unit,
        site=site,
        over_side_at=timezone.now() - dt.timedelta(days=3),
        planned_days=10,
        planned_interrogations_per_day=1,
        transmit_power_step=1,
    )
    url = reverse("deployment-recover", args=[deployment.pk])
    response = as_technician.post(url, {"recovered_at": f"{day}T00:00"})
    assert response.status_code == 400
    assert FAR_DATES[day] in response.content.decode()
    deployment.refresh_from_db()
    assert deployment.recovered_at is None


@pytest.mark.parametrize("tz", TIME_ZONES)
@pytest.mark.parametrize("day", FAR_DATES)
def test_the_planning_pages_answer_year_1_and_9999_with_a_message(
    as_technician, unit, site, settings, tz, day
):
    settings.TIME_ZONE = tz
    query = {"site": site.pk, "start": day, "days": "90"}
    for url in (
        reverse("unit-readiness", args=[unit.serial]),
        reverse("plan"),
        reverse("unit-checklist-pdf", args=[unit.serial]),
    ):
        response = as_technician.get(url, {**query, "wanted": "2"})
        assert response.status_code == 400, url
        assert "The start must be" in response.content.decode(), url
