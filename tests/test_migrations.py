"""The hold migration: old hand-set statuses become holds (or nothing) and nothing is lost."""

import pytest
from django.db import connection
from django.db.migrations.executor import MigrationExecutor

BEFORE = [("fleet", "0011_pressure_test_hold_end_time")]
AFTER = [("fleet", "0012_unit_hold_and_gates")]


@pytest.mark.django_db(transaction=True)
def test_old_statuses_map_to_holds_with_the_reason_carried_over():
    executor = MigrationExecutor(connection)
    executor.migrate(BEFORE)
    old = executor.loader.project_state(BEFORE).apps
    variant = old.get_model("fleet", "Variant").objects.create(
        name="Old variant",
        depth_rating_m=1500.0,
        housing_alloy="al6061",
        cells_in_series=21,
        parallel_strings=1,
        listen_current_a=0.0002,
    )
    Transponder = old.get_model("fleet", "Transponder")
    statuses = [
        "in_store",
        "in_workshop",
        "ready",
        "deployed",
        "quarantined",
        "retired",
        "lost",
    ]
    for i, status in enumerate(statuses):
        Transponder.objects.create(
            serial=f"M-{i}",
            variant=variant,
            status=status,
            acoustic_address=str(i),
            turnaround_delay_ms=12.5,
        )

    executor = MigrationExecutor(connection)
    executor.loader.build_graph()
    executor.migrate(AFTER)
    new = executor.loader.project_state(AFTER).apps
    rows = {
        serial: (hold, reason, set_at is not None)
        for serial, hold, reason, set_at in new.get_model("fleet", "Transponder")
        .objects.order_by("serial")
        .values_list("serial", "hold", "hold_reason", "hold_set_at")
    }
    # Back to the latest schema for the tests that follow.
    executor = MigrationExecutor(connection)
    executor.loader.build_graph()
    executor.migrate(executor.loader.graph.leaf_nodes())
    assert rows == {
        "M-0": ("none", "", False),
        "M-1": ("none", "", False),
        "M-2": ("none", "", False),
        "M-3": ("none", "", False),
        "M-4": ("quarantined", "carried over", True),
        "M-5": ("retired", "carried over", True),
        "M-6": ("lost", "carried over", True),
    }


@pytest.mark.django_db(transaction=True)
def test_rows_older_than_kits_keep_no_uid_and_new_rows_each_get_their_own():
    # A callable default on AddField would give every existing row the same uuid: the
    # migration adds the column empty, then the default for new rows.
    before, after = [("fleet", "0021_anode_state_base_sums")], [("fleet", "0022_kit_identity")]
    executor = MigrationExecutor(connection)
    executor.migrate(before)
    old = executor.loader.project_state(before).apps
    variant = old.get_model("fleet", "Variant").objects.create(
        name="Old variant",
        depth_rating_m=1500.0,
        housing_alloy="al6061",
        cells_in_series=21,
        parallel_strings=1,
        listen_current_a=0.0002,
    )
    unit = old.get_model("fleet", "Transponder").objects.create(
        serial="M-1", variant=variant, acoustic_address="1", turnaround_delay_ms=12.5
    )
    user = old.get_model("auth", "User").objects.create(username="old-hand")
    old_change = old.get_model("fleet", "HoldChange")
    for reason in ("first", "second"):
        old_change.objects.create(
            unit=unit,
            from_hold="none",
            to_hold="quarantined",
            reason=reason,
            set_by=user,
            set_at="2026-01-05T10:00:00Z",
        )

    executor = MigrationExecutor(connection)
    executor.loader.build_graph()
    executor.migrate(after)
    new = executor.loader.project_state(after).apps
    new_change = new.get_model("fleet", "HoldChange")
    kept = list(new_change.objects.values_list("uid", "origin"))
    for reason in ("third", "fourth"):
        new_change.objects.create(
            unit_id=unit.pk,
            from_hold="none",
            to_hold="quarantined",
            reason=reason,
            set_by_id=user.pk,
            set_at="2026-01-06T10:00:00Z",
        )
    made = list(
        new_change.objects.filter(reason__in=["third", "fourth"]).values_list("uid", flat=True)
    )
    executor = MigrationExecutor(connection)
    executor.loader.build_graph()
    executor.migrate(executor.loader.graph.leaf_nodes())
    assert kept == [(None, ""), (None, "")]
    assert None not in made
    assert len(set(made)) == 2
