"""A save at the end of a unit's history brings the stored state forward from the stored rows
(``refresh_unit_state(visit=...)``); every other write derives it again. Either way the
stored rows equal a rebuild exactly: every field, floats to the last bit, compared without
the rounding ``rebuild_state --check`` allows."""

import datetime as dt

import pytest
from django.db import transaction
from django.utils import timezone
from hypothesis import HealthCheck, given, settings
from hypothesis import strategies as st

from fleet.due import state as state_module
from fleet.due.store import rebuild_all
from fleet.models import (
    AnodeReading,
    AnodeState,
    SealChange,
    SealState,
    ServiceRecord,
    UnitState,
)
from fleet.services.records import service_record_close, service_record_save
from tests.builders import make_unit, pressure_test
from tests.due.test_engine import deploy, t
from tests.due.test_one_derivation import _pack

pytestmark = pytest.mark.django_db


def _exact() -> dict[tuple[object, ...], dict[str, object]]:
    """Every derived state row with every field as stored (no rounding)."""
    rows: dict[tuple[object, ...], dict[str, object]] = {}
    for row in UnitState.objects.values():
        rows[("unit", row.pop("unit_id"))] = row
    for model in (AnodeState, SealState):
        for row in model.objects.values():
            row.pop("id")
            rows[(model.__name__, row.pop("unit_id"), row.pop("position_id"))] = row
    for row in rows.values():
        row.pop("refreshed_at", None)
    return rows


def _rebuilt() -> dict[tuple[object, ...], dict[str, object]]:
    with transaction.atomic():
        rebuild_all(at=timezone.now())
        rebuilt = _exact()
        transaction.set_rollback(True)
    return rebuilt


def _entries(variant, day: dt.date, kind: str, mass: float, bond: float | None) -> list:
    anodes = list(variant.anode_positions.all())
    reading = AnodeReading(position=anodes[0], mass_g=mass, bond_resistance_ohm=bond)
    reading.replaced = kind == "replace"
    entries: list = [reading, AnodeReading(position=anodes[-1], remaining_percent=mass / 5)]
    if kind == "seal":
        seal = variant.seal_positions.first()
        entries.append(SealChange(position=seal, material="NBR", cure_date=day, reason="wear"))
    elif kind == "pack":
        entries.append(_pack(day, f"PK-{day.isoformat()}"))
    elif kind == "test":
        entries.append(pressure_test(day))
    return entries


def _write_visit(unit, technician, when: dt.datetime, op: tuple) -> None:
    """A visit with readings; if ``edit``, saved again with one reading's mass changed and
    one more reading, then closed."""
    _, _, kind, mass, bond, edit = op
    record = service_record_save(
        record=_record(unit, technician, when),
        entries=_entries(unit.variant, when.date(), kind, mass, bond),
        by=technician,
    )
    if edit:
        first = record.anode_readings.order_by("pk").first()
        first.mass_g = max(1.0, mass - 7.5)
        extra = AnodeReading(position=first.position, mass_g=max(1.0, mass - 9.25))
        service_record_save(record=record, entries=[first, extra], by=technician)
    service_record_close(record=record, by=technician, at=when + dt.timedelta(hours=10))


def _record(unit, technician, when):
    return ServiceRecord(unit=unit, opened_at=when, technician=technician, place=unit.place)


@st.composite
def sequences(draw):
    """Writes in time order (gaps after the last event), with, if drawn, some visits put
    back into the past (out of order)."""
    ops = []
    for _ in range(draw(st.integers(2, 6))):
        if draw(st.booleans()):
            ops.append(("deploy", draw(st.integers(2, 40))))
        kind = draw(st.sampled_from(["anode", "replace", "seal", "pack", "test"]))
        mass = draw(st.floats(120.0, 400.0))
        bond = draw(st.one_of(st.none(), st.floats(0.0, 0.5)))
        back = draw(st.none() | st.integers(1, 200)) if draw(st.booleans()) else None
        ops.append(("visit", back, kind, mass, bond, draw(st.booleans())))
    return ops


@settings(
    max_examples=15,
    deadline=None,
    suppress_health_check=[HealthCheck.function_scoped_fixture, HealthCheck.too_slow],
)
@given(ops=sequences())
def test_append_only_and_out_of_order_saves_leave_exactly_the_rebuilt_state(
    variant, site, technician, workshop, ops
):
    with transaction.atomic():
        unit = make_unit(serial="FW-0001", acoustic_address="501", variant=variant, place=workshop)
        clock = t(2024, 1, 2)
        for op in ops:
            if op[0] == "deploy":
                deploy(unit, site, technician, clock, clock + dt.timedelta(days=op[1]))
                clock += dt.timedelta(days=op[1] + 1)
                continue
            back = op[1]
            when = clock - dt.timedelta(days=back, hours=3) if back else clock
            try:
                _write_visit(unit, technician, when, op)
            except Exception:  # noqa: BLE001 - a write the rules refuse is simply skipped
                continue
            clock = max(clock, when) + dt.timedelta(days=1)
            assert _exact() == _rebuilt()
        transaction.set_rollback(True)


def test_a_save_at_the_end_of_the_history_does_not_derive_the_whole_history(
    variant, site, technician, workshop, monkeypatch
):
    unit = make_unit(serial="FW-0002", acoustic_address="502", variant=variant, place=workshop)
    deploy(unit, site, technician, t(2024, 1, 2), t(2024, 3, 1))
    _write_visit(unit, technician, t(2024, 3, 2), ("visit", None, "anode", 390.0, 0.01, False))
    deploy(unit, site, technician, t(2024, 3, 5), t(2024, 6, 1))
    whole = []
    original = state_module._refresh_whole
    monkeypatch.setattr(
        state_module, "_refresh_whole", lambda *a, **k: whole.append(1) or original(*a, **k)
    )
    # A new visit after everything, then saved again with an edit: brought forward twice.
    _write_visit(unit, technician, t(2024, 6, 2), ("visit", None, "replace", 350.0, 0.02, True))
    assert whole == []
    first = variant.anode_positions.first()
    # The new anode's mass at fitting, then the extra reading of the second save.
    assert AnodeState.objects.get(unit=unit, position=first).n == 2
    assert _exact() == _rebuilt()
    # A visit put before the last deployment is out of order: the whole history again.
    _write_visit(unit, technician, t(2024, 3, 3), ("visit", None, "anode", 380.0, None, False))
    assert whole
    assert _exact() == _rebuilt()
