"""The fleet-wide reads cost the same number of queries for 20 units and for 2,000: the
overview, the planner (its page and ``plan_campaign``), the fleet list, the whole-fleet
derivation of due rows and ``rebuild_state``'s reads. The fleet is the benchmark's synthetic
one (``manage.py benchmark``), a year of history per unit, grown from 20 units to 2,000.

The planner reads its units by chunks of ``PLAN_CHUNK`` (2,000) units: one chunk at both
sizes. ``derived_rows`` and ``rebuild_all`` read by smaller chunks (their memory is a
chunk's), each chunk in the same queries: they are compared at the same number of chunks
(5 chunks of 4 units, and of 400), so that a read that grows with the units in a chunk
shows."""

import datetime as dt
import random

import pytest
from django.db import connection
from django.test import Client
from django.test.utils import CaptureQueriesContext
from django.urls import reverse
from django.utils import timezone

from fleet.due import store
from fleet.due.readiness import PLAN_CHUNK, PlannedDeployment, plan_campaign
from fleet.due.store import derived_rows, rebuild_all
from fleet.management.commands.benchmark import _Fleet
from fleet.models import Transponder

pytestmark = pytest.mark.django_db


def _counts(fleet: _Fleet, now: dt.datetime) -> dict[str, int]:
    client = Client(HTTP_HOST="127.0.0.1")
    client.force_login(fleet.viewer)
    on = timezone.localdate(now)
    start = on + dt.timedelta(days=5)
    plan_query = {"site": fleet.site.pk, "start": start.isoformat(), "days": 90, "wanted": 20}

    def page(url: str, query: dict) -> None:
        response = client.get(url, query)
        assert response.status_code == 200
        assert b"Traceback" not in response.content

    reads = {
        "overview": lambda: page(reverse("dashboard"), {"show": "all"}),
        "plan page": lambda: page(reverse("plan"), plan_query),
        "plan_campaign": lambda: plan_campaign(
            PlannedDeployment(fleet.site, start, 90), wanted=20, on=on
        ),
        "fleet list": lambda: page(reverse("unit-list"), {}),
        "derived rows": lambda: sum(1 for _ in derived_rows()),
    }
    counts = {}
    for name, read in reads.items():
        read()  # the session and any first-use caches settled before counting
        with CaptureQueriesContext(connection) as captured:
            read()
        counts[name] = len(captured)
    with CaptureQueriesContext(connection) as captured:
        rebuild_all(at=now)
    # The reads only: the writes go in batches of rows (SQLite takes 999 values at most).
    counts["rebuild reads"] = sum(
        1 for q in captured.captured_queries if q["sql"].startswith("SELECT")
    )
    return counts


def test_the_fleet_wide_reads_cost_the_same_queries_for_20_units_and_for_2000(monkeypatch):
    now = timezone.now().replace(microsecond=0)
    fleet = _Fleet(random.Random(11), now)
    fleet.build(20, 1, [])
    rebuild_all(at=now)
    for name in ("DERIVE_CHUNK", "REBUILD_CHUNK"):
        monkeypatch.setattr(store, name, 4)
    small = _counts(fleet, now)
    fleet.grow(20, 1980, 1, [])
    rebuild_all(at=now)
    assert Transponder.objects.count() == 2000 == PLAN_CHUNK  # one chunk of the planner
    for name in ("DERIVE_CHUNK", "REBUILD_CHUNK"):
        monkeypatch.setattr(store, name, 400)
    large = _counts(fleet, now)
    assert large == small
    # Pinned as well: a read added at every size shows here. The planner's 8 queries are
    # listed in ``test_the_planner_reads_a_fleet_in_the_same_number_of_queries_for_more_units``.
    assert small["plan_campaign"] == 8
