"""The benchmark command keeps working (timings are measured by running it, not here)."""

import io

import pytest
from django.core.management import call_command
from django.core.management.base import CommandError
from django.db import connection

from fleet.models import AnodeReading, AnodeState, Transponder

pytestmark = pytest.mark.django_db


def test_it_builds_a_tiny_fleet_and_reports_every_scenario_against_the_goals(settings):
    settings.ALLOWED_HOSTS = ["localhost"]
    out = io.StringIO()
    call_command(
        "benchmark",
        quick=True,
        units=3,
        years=1,
        sizes="10,60",
        repeat=1,
        import_rows=40,
        photo_megapixels=0.3,
        stdout=out,
    )
    report = out.getvalue()
    assert Transponder.objects.count() == 5  # three of the fleet, one per size
    # The sized units: 10 readings -> 4 visits x 3 anodes; 60 -> 20 visits x 3 anodes.
    assert AnodeReading.objects.filter(record__unit__serial="H-000060").count() == 60
    assert AnodeState.objects.filter(unit__serial="H-000060", n=20).count() == 3
    for line in (
        "overview",
        "planner",
        "save @60",
        "unit page @60",
        "anode chart @10",
        "readiness page",
        "checklist PDF",
        "rebuild_state --check",
        "planner peak MiB",
        "overview SQL read",
        "overview queries",
        "overview render ms per row",
        "planner SQL read",
        "fleet build s",
        "import s",
        "photo PNG peak MiB",
        "goals:",
        "planner under 1 s",
        "rebuild_state s under 30 s",
        "fleet evaluation peak MiB under 100 MiB",
        "import peak MiB under 200 MiB",
        "photo JPEG peak MiB under 100 MiB",
        "anode chart @60 under 30 ms",
    ):
        assert line in report
    # What it ran on, at the start and at the end.
    assert report.startswith("machine: ")
    assert "at the end: machine: " in report
    assert report.count("reference loop ") == 2
    # PostgreSQL is vacuumed after the fleet is built, except inside the test's transaction.
    settled = {"postgresql": "not settled: inside a transaction", "sqlite": "no settling needed"}
    assert settled[connection.vendor] in report
    # Everything the import wrote was rolled back.
    assert not Transponder.objects.filter(serial__startswith="BENCH-").exists()


def test_it_refuses_a_database_that_already_holds_units(unit):
    with pytest.raises(CommandError, match="empty scratch database"):
        call_command("benchmark", units=1, sizes="10", repeat=1)


def test_the_fleet_builders_plain_rows_take_a_fresh_default_per_row_where_it_is_a_function():
    # A unique token (here a calendar feed's; on records, a row's uid) must differ per row.
    from django.contrib.auth import get_user_model

    from fleet.management.commands.benchmark import _RawRows
    from fleet.models.feeds import CalendarFeed

    users = [get_user_model().objects.create_user(f"raw-{n}") for n in range(3)]
    raw = _RawRows(CalendarFeed(user=users[0]), ("user_id",))
    for user in users:
        raw.add(user.pk)
    raw.flush()
    tokens = set(CalendarFeed.objects.values_list("token", flat=True))
    assert len(tokens) == 3
    assert CalendarFeed.objects.filter(created_at__isnull=False).count() == 3
