"""The running derived state agrees with a rebuild from the records, whatever order the
writes came in (a deployment entered after the readings it covers, an amendment)."""

import pytest
from django.core.management import call_command
from django.core.management.base import CommandError
from django.db import transaction

from fleet.due.snapshot import state_snapshot
from fleet.integrity import amending
from fleet.models import AnodeReading, AnodeState, DueRow, UnitState
from fleet.services.records import amendment_create
from tests.due.test_engine import deploy, t, visit

pytestmark = pytest.mark.django_db


def test_running_state_matches_a_rebuild(unit, site, technician, supervisor):
    position = unit.variant.anode_positions.get(name="Anode 1")
    deploy(unit, site, technician, t(2025, 1, 1), t(2025, 4, 11))
    first = visit(unit, technician, t(2025, 4, 12), AnodeReading(position=position, mass_g=390))
    reading = first.anode_readings.get()
    # A deployment typed in late, between two earlier events, shifts the immersed days.
    deploy(unit, site, technician, t(2025, 5, 1), t(2025, 8, 9))
    visit(unit, technician, t(2025, 8, 10), AnodeReading(position=position, mass_g=370))
    amendment_create(
        record=first,
        target=reading,
        field_name="mass_g",
        corrected_value="385",
        reason="re-weighed",
        by=supervisor,
    )
    running = state_snapshot()
    call_command("rebuild_state")
    assert state_snapshot() == running
    row = AnodeState.objects.get(unit=unit, position=position)
    assert row.n == 2
    assert row.sum_y == pytest.approx(0.385 + 0.370)
    assert row.sum_x == pytest.approx(100.0 + 200.0)


def test_the_check_option_finds_drift(unit, technician, capsys):
    position = unit.variant.anode_positions.get(name="Anode 1")
    visit(unit, technician, t(2025, 4, 12), AnodeReading(position=position, mass_g=390))
    call_command("rebuild_state", "--check")
    assert "match a rebuild" in capsys.readouterr().out
    # Simulate a write that bypassed the services (the record is closed: through the
    # amendment door, as a correction that forgot to refresh the state would).
    with transaction.atomic(), amending():
        AnodeReading.objects.update(mass_g=300)
    with pytest.raises(CommandError, match="differ from a rebuild"):
        call_command("rebuild_state", "--check")
    # --check rolls its rebuild back, so the drift is still there to be fixed.
    assert AnodeState.objects.get(unit=unit, position=position).last_mass_kg == 0.39


def test_a_new_unit_gets_state_and_due_rows_when_it_is_created(unit):
    state = UnitState.objects.get(unit=unit)
    assert state.as_of is None  # nothing recorded yet
    keys = set(DueRow.objects.filter(unit=unit).values_list("key", flat=True))
    assert {"battery", "pressure_test", "release_test"} <= keys
