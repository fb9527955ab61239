"""``Instant`` and ``AsStored`` (``fleet/models/functions.py``) read a whole history's columns
with less conversion per row than Django's: the values must be those Django reads."""

import datetime as dt
import random

import pytest
from django.db.models import F

from fleet.models import AnodeReading, Deployment, ServiceRecord, Transponder
from fleet.models.functions import AsStored, Instant
from tests.due.test_bulk_rebuild import _random_fleet
from tests.due.test_engine import deploy

pytestmark = pytest.mark.django_db


def test_instant_reads_each_date_time_exactly_as_django_does(variant, site, technician, workshop):
    _random_fleet(random.Random(41), variant, site, technician, workshop, units=4)
    # The unit with no records yet goes over on a whole second, back with microseconds, and
    # over again (still in the water).
    first = Transponder.objects.order_by("pk").first()
    start = dt.datetime(2015, 5, 6, 7, 8, 9, tzinfo=dt.UTC)
    back = start + dt.timedelta(days=3, microseconds=654321)
    deploy(first, site, technician, start, back)
    deploy(first, site, technician, back + dt.timedelta(days=9))
    plain = list(Deployment.objects.order_by("pk").values_list("over_side_at", "recovered_at"))
    fast = list(
        Deployment.objects.order_by("pk").values_list(
            Instant("over_side_at"), Instant("recovered_at")
        )
    )
    assert fast == plain
    assert any(back is None for _, back in plain)  # the one still in the water reads None
    assert [v.tzinfo for row in fast for v in row if v is not None] == [
        v.tzinfo for row in plain for v in row if v is not None
    ]
    visits = ServiceRecord.objects.order_by("pk")
    opened = list(visits.values_list("opened_at", flat=True))
    assert list(visits.values_list(Instant("opened_at"), flat=True)) == opened
    # Moments on a whole second (stored with no fraction) and moments with microseconds.
    moments = [v for row in plain for v in row if v is not None] + opened
    assert any(v.microsecond == 0 for v in moments) and any(v.microsecond for v in moments)


def test_as_stored_reads_a_flag_that_tests_as_django_reads_it(variant, site, technician, workshop):
    _random_fleet(random.Random(43), variant, site, technician, workshop, units=8)
    readings = AnodeReading.objects.order_by("pk")
    flags = list(readings.values_list("replaced", flat=True))
    stored = list(readings.values_list(AsStored("replaced"), flat=True))
    assert True in flags and False in flags
    assert [bool(v) for v in stored] == flags
    # An expression over the column reads as Django reads it.
    assert list(readings.values_list(AsStored(F("mass_g")), flat=True)) == list(
        readings.values_list("mass_g", flat=True)
    )
