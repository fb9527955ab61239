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
