import datetime as dt

import pytest
from django.urls import reverse
from django.utils import timezone

from fleet.models import Deployment, UnitStatus

pytestmark = pytest.mark.django_db


def _deploy(client, unit, site, when="2026-01-10T08:00", **extra):
    data = {
        "unit": unit.pk,
        "site": site.pk,
        "over_side_at": when,
        "planned_days": "90",
        "planned_interrogations_per_day": "400",
        "transmit_power_step": "1",
    }
    data.update(extra)
    return client.post(reverse("deployment-new"), data)


def test_a_deployment_puts_the_unit_in_the_water(as_technician, unit, site, technician):
    response = _deploy(as_technician, unit, site)
    assert response.status_code == 302
    unit.refresh_from_db()
    assert unit.status == UnitStatus.DEPLOYED
    assert Deployment.objects.get().created_by == technician


def test_a_unit_cannot_be_in_two_places_at_once(as_technician, unit, site):
    _deploy(as_technician, unit, site)
    unit.status = UnitStatus.IN_STORE
    unit.save()
    response = _deploy(as_technician, unit, site, when="2026-02-01T08:00")
    assert response.status_code == 400
    assert "overlapping" in response.content.decode()
    assert Deployment.objects.count() == 1


def test_a_quarantined_unit_cannot_deploy(as_technician, unit, site):
    unit.status = UnitStatus.QUARANTINED
    unit.save()
    response = _deploy(as_technician, unit, site)
    assert response.status_code == 400
    assert "quarantined and cannot deploy" in response.content.decode()


def test_recovery_must_come_after_over_the_side(as_technician, unit, site):
    _deploy(as_technician, unit, site)
    deployment = Deployment.objects.get()
    url = reverse("deployment-recover", args=[deployment.pk])
    response = as_technician.post(url, {"recovered_at": "2026-01-01T08:00"})
    assert response.status_code == 400
    assert "Recovery must come after over the side." in response.content.decode()
    response = as_technician.post(
        url, {"recovered_at": "2026-03-01T08:00", "replies_counted": "35000"}
    )
    assert response.status_code == 302
    deployment.refresh_from_db()
    assert deployment.recovered_at == dt.datetime(2026, 3, 1, 8, 0, tzinfo=dt.UTC)
    assert deployment.replies_counted == 35000
    unit.refresh_from_db()
    assert unit.status == UnitStatus.IN_WORKSHOP


def test_a_future_deployment_is_refused(as_technician, unit, site):
    when = (timezone.now() + dt.timedelta(days=2)).strftime("%Y-%m-%dT%H:%M")
    response = _deploy(as_technician, unit, site, when=when)
    assert response.status_code == 400
    assert "Over the side cannot be in the future." in response.content.decode()


def test_a_viewer_cannot_recover(as_viewer, as_technician, unit, site):
    _deploy(as_technician, unit, site)
    deployment = Deployment.objects.get()
    response = as_viewer.post(
        reverse("deployment-recover", args=[deployment.pk]), {"recovered_at": "2026-03-01T08:00"}
    )
    assert response.status_code == 403


def test_site_validation_names_the_allowed_range(as_supervisor):
    response = as_supervisor.post(
        reverse("site-new"),
        {
            "name": "Deep",
            "latitude_deg": "95",
            "longitude_deg": "10",
            "water_depth_m": "12000",
            "bottom_temperature_c": "3",
            "practical_salinity": "35",
        },
    )
    assert response.status_code == 400
    body = response.content.decode()
    assert "less than or equal to 90.0" in body
    assert "less than or equal to 11000.0" in body


def test_a_power_step_the_variant_does_not_have_is_refused(as_technician, unit, site):
    response = _deploy(as_technician, unit, site, transmit_power_step="4")
    assert response.status_code == 400
    assert "has transmit power steps 1." in response.content.decode()
    assert not Deployment.objects.exists()
