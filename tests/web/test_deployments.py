import datetime as dt

import pytest
from django.urls import reverse
from django.utils import timezone

from fleet.due.condition import Condition, condition_of
from fleet.models import Deployment, UnitHold
from tests.builders import serviced_unit

pytestmark = pytest.mark.django_db


def _ago(days: float) -> dt.datetime:
    return timezone.now() - dt.timedelta(days=days)


def _when(days: float) -> str:
    return _ago(days).strftime("%Y-%m-%dT%H:%M")


@pytest.fixture
def ready(unit, site, technician):
    """TX-0001 after a past deployment and a full bench visit ten days ago, closed."""
    serviced_unit(unit, by=technician, site=site, day=timezone.localdate() - dt.timedelta(days=10))
    return unit


def _deploy(client, unit, site, when=None, **extra):
    when = when or _when(0.1)
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


def test_a_deployment_puts_the_unit_in_the_water(as_technician, ready, site, technician):
    response = _deploy(as_technician, ready, site)
    assert response.status_code == 302
    assert condition_of(ready, timezone.localdate()) == Condition.IN_WATER
    deployment = Deployment.objects.get(recovered_at__isnull=True)
    assert deployment.created_by == technician
    assert deployment.override_reason == ""


def test_a_unit_cannot_be_in_two_places_at_once(as_technician, ready, site):
    _deploy(as_technician, ready, site)
    response = _deploy(as_technician, ready, site, when=_when(0.05))
    assert response.status_code == 400
    assert "TX-0001 is in the water now; recover it first; it cannot deploy." in (
        response.content.decode()
    )
    assert Deployment.objects.filter(recovered_at__isnull=True).count() == 1


def test_a_quarantined_unit_cannot_deploy(as_technician, ready, site):
    ready.hold, ready.hold_reason = UnitHold.QUARANTINED, "water behind the end cap"
    ready.save()
    response = _deploy(as_technician, ready, site)
    assert response.status_code == 400
    assert "quarantined and cannot deploy (hold: water behind the end cap)" in (
        response.content.decode()
    )
    assert not Deployment.objects.filter(recovered_at__isnull=True).exists()


def test_recovery_must_come_after_over_the_side(as_technician, ready, site):
    _deploy(as_technician, ready, site, when=_when(5))
    deployment = Deployment.objects.get(recovered_at__isnull=True)
    url = reverse("deployment-recover", args=[deployment.pk])
    response = as_technician.post(url, {"recovered_at": _when(6)})
    assert response.status_code == 400
    assert "Recovery must come after over the side." in response.content.decode()
    back = _ago(1).replace(second=0, microsecond=0)
    response = as_technician.post(
        url, {"recovered_at": back.strftime("%Y-%m-%dT%H:%M"), "replies_counted": "35000"}
    )
    assert response.status_code == 302
    deployment.refresh_from_db()
    assert deployment.recovered_at == back
    assert deployment.replies_counted == 35000
    # No state is set by hand: out of the water, the condition follows the records.
    assert condition_of(ready, timezone.localdate()) != Condition.IN_WATER


def test_a_future_deployment_is_refused(as_technician, unit, site):
    when = (timezone.now() + dt.timedelta(days=2)).strftime("%Y-%m-%dT%H:%M")
    response = _deploy(as_technician, unit, site, when=when)
    assert response.status_code == 400
    assert "Over the side cannot be in the future." in response.content.decode()


def test_a_viewer_cannot_recover(as_viewer, as_technician, ready, site):
    _deploy(as_technician, ready, site)
    deployment = Deployment.objects.get(recovered_at__isnull=True)
    response = as_viewer.post(
        reverse("deployment-recover", args=[deployment.pk]), {"recovered_at": _when(0)}
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
