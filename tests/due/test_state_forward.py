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
    HousingOpening,
    ReleaseTest,
    SealChange,
    SealState,
    SensorCheck,
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


KINDS = ["anode", "replace", "seal", "pack", "test", "release", "check", "opening",
         "test+opening", "late test", "late check", "everything"]  # fmt: skip


def _entries(variant, when: dt.datetime, kind: str, mass: float, bond: float | None) -> list:
    """A visit's entries: two readings, and what ``kind`` names. "late": dated 40 days
    before the visit, so older than tests or checks already stored; "everything": a seal, a
    pressure and a release test, two sensor checks and an opening after the test's hold."""
    day = when.date()
    anodes = list(variant.anode_positions.all())
    reading = AnodeReading(position=anodes[0], mass_g=mass, bond_resistance_ohm=bond)
    reading.replaced = kind == "replace"
    entries: list = [reading, AnodeReading(position=anodes[-1], remaining_percent=mass / 5)]
    late = day - dt.timedelta(days=40)
    if kind in ("seal", "everything"):
        seal = variant.seal_positions.first()
        entries.append(SealChange(position=seal, material="NBR", cure_date=day, reason="interval"))
    if kind == "pack":
        entries.append(_pack(day, f"PK-{day.isoformat()}"))
    if kind in ("test", "test+opening", "everything"):
        entries.append(pressure_test(day, hold_ended_at=dt.time(0, 30)))
    if kind == "late test":
        entries.append(pressure_test(late))
    if kind in ("release", "everything"):
        entries.append(_release(day))
    if kind in ("check", "everything"):
        entries += [_check(day, "temperature"), _check(day, "pressure")]
    if kind == "late check":
        entries.append(_check(late, "pressure"))
    if kind in ("opening", "test+opening", "everything"):
        opened = when + dt.timedelta(hours=1)
        entries.append(
            HousingOpening(opened_at=opened, closed_at=opened + dt.timedelta(hours=1), reason="o")
        )
    return entries


def _release(day: dt.date) -> ReleaseTest:
    return ReleaseTest(
        tested_on=day, kind="load", load_kg=200, seconds_to_release=5, motor_current_a=1.1,
        limit_switch_ok=True, acoustic_command_ok=True,
    )  # fmt: skip


def _check(day: dt.date, sensor: str) -> SensorCheck:
    extra = {"raw_resistance_ohm": 103.903} if sensor == "temperature" else {}
    reference = 10.0 if sensor == "temperature" else 1000.0
    return SensorCheck(
        checked_on=day, sensor=sensor, reference_value=reference, unit_reading=reference, **extra
    )


def _write_visit(unit, technician, when: dt.datetime, op: tuple) -> None:
    """A visit with readings; if ``edit``, saved again with one reading's mass changed and
    one more reading, then closed."""
    _, _, kind, mass, bond, edit = op
    record = service_record_save(
        record=_record(unit, technician, when),
        entries=_entries(unit.variant, when, kind, mass, bond),
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
        kind = draw(st.sampled_from(KINDS))
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


def test_a_new_visit_brings_seals_tests_checks_and_openings_forward_from_the_stored_rows(
    variant, site, technician, workshop, monkeypatch
):
    """Each new visit below is brought forward from the stored rows and its own entries, not
    read against the unit's history of seals, tests, checks and openings; and each leaves
    exactly the rebuilt state: a seal's openings counted on, a stored test voided by a later
    opening, tests and checks dated before the stored ones, a test of the visit's own."""
    unit = make_unit(serial="FW-0003", acoustic_address="503", variant=variant, place=workshop)
    from_history = []
    original = state_module._latest_in_history
    monkeypatch.setattr(
        state_module,
        "_latest_in_history",
        lambda unit: from_history.append(1) or original(unit),
    )
    seal = variant.seal_positions.first()
    day = t(2024, 1, 2)
    kinds = ["everything", "opening", "opening", "late test", "late check", "test", "check",
             "seal", "release", "test+opening", "anode"]  # fmt: skip
    for n, kind in enumerate(kinds):
        _write_visit(unit, technician, day, ("visit", None, kind, 300.0 - n, None, False))
        assert _exact() == _rebuilt(), kind
        day += dt.timedelta(days=7)
        if kind in ("late test", "late check"):  # older than the first visit's: still that one
            first_day = t(2024, 1, 2).date()
            state = UnitState.objects.get(unit=unit)
            assert state.last_pressure_test.tested_on == first_day
            assert state.last_pressure_check.checked_on == first_day
        if kind == "opening" and n == 2:
            assert SealState.objects.get(unit=unit, position=seal).openings_since_fit == 2
            assert UnitState.objects.get(unit=unit).test_voided_by_opening
    assert from_history == []
    state = UnitState.objects.get(unit=unit)
    assert state.last_pressure_test.tested_on == (day - dt.timedelta(days=14)).date()
    # Its own visit's opening came after its hold ended (the hold ended at 00:30).
    assert state.test_voided_by_opening is True
