"""One derivation: every stored due row equals a rebuild, on any later day and after any
write, whichever input changed (records, deployments, sites, variants)."""

import datetime as dt

import pytest
from django.core.management import call_command
from django.core.management.base import CommandError
from django.db import transaction
from django.urls import reverse
from django.utils import timezone
from hypothesis import HealthCheck, given, settings
from hypothesis import strategies as st

from fleet.due.snapshot import differences, state_snapshot
from fleet.due.store import derived_snapshot, due_rows_snapshot, rebuild_all
from fleet.models import (
    AnodeReading,
    BatteryInstall,
    DueRow,
    HousingOpening,
    SealChange,
)
from fleet.services.records import amendment_create
from fleet.services.reference import site_save
from tests.builders import make_unit, pressure_test
from tests.due.test_engine import deploy, t, visit

pytestmark = pytest.mark.django_db


def _pack(day: dt.date, serial: str = "PK-1") -> BatteryInstall:
    return BatteryInstall(
        pack_serial=serial,
        chemistry="li_socl2",
        nominal_voltage_v=75.6,
        capacity_ah=38.0,
        made_on=day - dt.timedelta(days=60),
        installed_on=day,
        ocv_install_v=76.5,
    )


def _fleet(variant, site, technician, workshop):
    """Three units: one in the water, one back in store after two jobs, one never deployed."""
    anode = variant.anode_positions.first()
    deployed = make_unit(serial="TT-0001", acoustic_address="201", variant=variant, place=workshop)
    stored = make_unit(serial="TT-0002", acoustic_address="202", variant=variant, place=workshop)
    fresh = make_unit(serial="TT-0003", acoustic_address="203", variant=variant, place=workshop)
    for unit in (deployed, stored):
        visit(
            unit,
            technician,
            t(2025, 1, 5),
            AnodeReading(position=anode, mass_g=400.0),
            _pack(dt.date(2025, 1, 5), f"PK-{unit.serial}"),
            pressure_test(dt.date(2025, 1, 5)),
        )
        deploy(unit, site, technician, t(2025, 2, 1), t(2025, 6, 1))
        visit(unit, technician, t(2025, 6, 3), AnodeReading(position=anode, mass_g=380.0))
    deploy(stored, site, technician, t(2025, 7, 1), t(2025, 9, 1))
    deploy(deployed, site, technician, t(2025, 8, 1))
    visit(fresh, technician, t(2025, 3, 1), _pack(dt.date(2025, 3, 1), "PK-F"))
    return deployed, stored, fresh


def _rebuilt_at(moment: dt.datetime, monkeypatch) -> dict:
    """Everything derived, rebuilt as if the clock read ``moment``; rolled back."""
    monkeypatch.setattr(timezone, "now", lambda: moment)
    with transaction.atomic():
        rebuild_all(at=moment)
        snapshot = state_snapshot()
        transaction.set_rollback(True)
    monkeypatch.undo()
    return snapshot


@pytest.mark.parametrize("days_later", [1, 30, 400])
def test_stored_rows_stay_exact_on_later_days_with_no_write(
    variant, site, technician, workshop, monkeypatch, days_later
):
    _fleet(variant, site, technician, workshop)
    stored = state_snapshot()
    assert any(key[0] == "due" for key in stored)
    later = timezone.now() + dt.timedelta(days=days_later)
    assert differences(stored, _rebuilt_at(later, monkeypatch)) == []


def test_editing_a_site_on_its_page_refreshes_the_stored_due_rows(
    variant, site, technician, workshop, as_supervisor
):
    deployed, _stored, _fresh = _fleet(variant, site, technician, workshop)
    before = DueRow.objects.get(unit=deployed, key="battery").due_on
    data = {
        "name": site.name,
        "latitude_deg": site.latitude_deg,
        "longitude_deg": site.longitude_deg,
        "water_depth_m": site.water_depth_m,
        "bottom_temperature_c": 30.0,  # warmer water: faster self-discharge
        "practical_salinity": site.practical_salinity,
        "notes": "",
    }
    response = as_supervisor.post(reverse("site-edit", args=[site.pk]), data)
    assert response.status_code == 302
    after = DueRow.objects.get(unit=deployed, key="battery").due_on
    assert after != before
    assert differences(due_rows_snapshot(), derived_snapshot()) == []
    call_command("rebuild_state", "--check")


def test_a_site_saved_by_its_service_refreshes_units_that_worked_there(
    variant, site, technician, workshop
):
    _deployed, stored, _fresh = _fleet(variant, site, technician, workshop)
    before = DueRow.objects.get(unit=stored, key="battery").basis
    site.bottom_temperature_c = 25.0
    site_save(site=site)
    assert DueRow.objects.get(unit=stored, key="battery").basis != before
    assert differences(due_rows_snapshot(), derived_snapshot()) == []


def test_rebuild_check_fails_on_a_stored_due_row_that_differs(variant, site, technician, workshop):
    deployed, _stored, _fresh = _fleet(variant, site, technician, workshop)
    call_command("rebuild_state", "--check")
    DueRow.objects.filter(unit=deployed, key="battery").update(due_on=dt.date(2030, 1, 1))
    with pytest.raises(CommandError, match="differ from a rebuild"):
        call_command("rebuild_state", "--check")


# --- random histories, written out of order ------------------------------------------------

SLOTS = [(t(2024, m, 1), t(2024, m, 20)) for m in range(1, 12)]


@st.composite
def histories(draw):
    """A shuffled list of writes: bench visits on random days, closed deployments in
    disjoint slots, and amendments of a closed visit's reading."""
    ops = []
    for slot in draw(st.lists(st.sampled_from(range(len(SLOTS))), unique=True, max_size=4)):
        ops.append(("deploy", slot))
    for _ in range(draw(st.integers(1, 4))):
        day = draw(st.integers(0, 330))
        mass = draw(st.floats(150.0, 400.0))
        kind = draw(st.sampled_from(["anode", "replace", "seal", "open", "test", "pack"]))
        bond = draw(st.one_of(st.none(), st.floats(0.0, 0.5)))
        ops.append(("visit", day, kind, mass, bond))
    ops = draw(st.permutations(ops))
    # Deployments go in in time order (a back-filled deployment is refused before a later
    # one), interleaved at random with the visits, which may land before, between or after.
    slots = iter(sorted(op[1] for op in ops if op[0] == "deploy"))
    ops = [("deploy", next(slots)) if op[0] == "deploy" else op for op in ops]
    if draw(st.booleans()):
        ops.append(("amend", draw(st.floats(150.0, 400.0))))
    return ops


def _visit_entries(variant, day: dt.date, kind: str, mass: float, bond):
    anode = variant.anode_positions.first()
    seal = variant.seal_positions.first()
    if kind in ("anode", "replace"):
        reading = AnodeReading(position=anode, mass_g=mass, bond_resistance_ohm=bond)
        reading.replaced = kind == "replace"
        return [reading]
    if kind == "seal":
        return [SealChange(position=seal, material="NBR", cure_date=day, reason="interval")]
    if kind == "open":
        moment = timezone.make_aware(dt.datetime.combine(day, dt.time(10)))
        closed = moment + dt.timedelta(hours=1)
        return [
            HousingOpening(
                opened_at=moment, closed_at=closed, vented_before_opening=True, reason="look"
            )
        ]
    if kind == "pack":
        return [_pack(day, f"PK-{day.isoformat()}")]
    return [pressure_test(day)]


@settings(
    max_examples=12,
    deadline=None,
    suppress_health_check=[HealthCheck.function_scoped_fixture, HealthCheck.too_slow],
)
@given(ops=histories())
def test_random_histories_written_out_of_order_equal_a_rebuild(
    variant, site, technician, workshop, supervisor, ops
):
    with transaction.atomic():
        unit = make_unit(serial="HY-0001", acoustic_address="301", variant=variant, place=workshop)
        records = []
        for op in ops:
            if op[0] == "deploy":
                start, end = SLOTS[op[1]]
                deploy(unit, site, technician, start, end)
            elif op[0] == "visit":
                _, offset, kind, mass, bond = op
                day = dt.date(2024, 1, 1) + dt.timedelta(days=offset)
                # Visits fall between deployments: the 25th to the 31st of a month is dry.
                day = day.replace(day=min(28, max(25, day.day)))
                when = timezone.make_aware(dt.datetime.combine(day, dt.time(8)))
                entries = _visit_entries(variant, day, kind, mass, bond)
                try:
                    records.append(visit(unit, technician, when, *entries))
                except Exception:  # noqa: BLE001 - a write the rules refuse is simply skipped
                    continue
            else:
                readings = [
                    r for r in records if r.anode_readings.exclude(mass_g=round(op[1], 1)).exists()
                ]
                if readings:
                    record = readings[0]  # the visit helper closed it
                    amendment_create(
                        record=record,
                        target=record.anode_readings.first(),
                        field_name="mass_g",
                        corrected_value=f"{op[1]:.1f}",
                        reason="re-weighed",
                        by=supervisor,
                    )
        stored = state_snapshot()
        rebuild_all(at=timezone.now())
        assert differences(stored, state_snapshot()) == []
        transaction.set_rollback(True)
