"""The benchmark command keeps working (timings are measured by running it, not here)."""

import io

import pytest
from django.core.management import call_command
from django.core.management.base import CommandError

from fleet.models import AnodeReading, AnodeState, Transponder

pytestmark = pytest.mark.django_db


def test_it_builds_a_small_fleet_and_reports_the_ratio(settings):
    settings.ALLOWED_HOSTS = ["localhost"]
    out = io.StringIO()
    call_command("benchmark_dashboard", units=3, readings=36, repeat=1, stdout=out)
    report = out.getvalue()
    assert Transponder.objects.count() == 3
    assert AnodeReading.objects.count() == 36  # 3 units x 3 anodes x 4 visits
    assert AnodeState.objects.filter(n=4).count() == 9
    assert "x raw" in report and "overview page" in report


def test_it_refuses_a_database_that_already_holds_units(unit):
    with pytest.raises(CommandError, match="empty scratch database"):
        call_command("benchmark_dashboard", units=1, readings=3, repeat=1)
