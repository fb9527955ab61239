"""One good row per entry kind, as the bench-visit page posts it, and the closed record with
one entry of every kind that the amendment tests correct."""

import datetime as dt
import math

from django.contrib.auth import get_user_model
from django.db import models

from fleet.models import BatteryInstall, HousingOpening, PackRemoval, ServiceRecord, Transponder
from fleet.models.records import entry_kinds
from fleet.models.validators import within_date_bounds
from fleet.services.records import service_record_close, service_record_save
from tests.builders import full_service_entries, make_user

DAY = dt.date(2026, 3, 2)  # the bench visit's day in tests.web.test_records.record_post


def _earlier_pack(unit: Transponder) -> BatteryInstall:
    """A pack fitted at an earlier, closed visit: what a pack-removal row takes out."""
    fitted = BatteryInstall.objects.filter(unit=unit, removal__isnull=True).first()
    if fitted is not None:
        return fitted
    by = get_user_model().objects.filter(is_active=True).first() or make_user(
        "pack-fitter", "technician"
    )
    opened = dt.datetime.combine(DAY - dt.timedelta(days=90), dt.time(8), tzinfo=dt.UTC)
    pack = BatteryInstall(
        pack_serial="PK-OLD",
        chemistry="alkaline",
        nominal_voltage_v=31.5,
        capacity_ah=17.0,
        made_on=DAY - dt.timedelta(days=200),
        installed_on=opened.date(),
        ocv_install_v=32.4,
    )
    record = service_record_save(
        record=ServiceRecord(unit=unit, opened_at=opened, technician=by, place=unit.place),
        entries=[pack],
        by=by,  # type: ignore[arg-type]
    )
    service_record_close(record=record, by=by, at=opened + dt.timedelta(hours=2))  # type: ignore[arg-type]
    return pack


def good_rows(unit: Transponder) -> dict[str, dict[str, str]]:
    """By bench prefix: a row every form accepts on ``record_post``'s visit (opened 09:00)."""
    old_pack = _earlier_pack(unit)
    anode = unit.variant.anode_positions.first()
    seal = unit.variant.seal_positions.first()
    assert anode is not None and seal is not None
    return {
        "anodes": {
            "position": str(anode.pk),
            "mass_g": "350",
            "remaining_percent": "",
            "bond_resistance_ohm": "0.02",
            "replaced": "",
            "note": "Light pitting",
        },
        "seals": {
            "position": str(seal.pk),
            "material": "NBR",
            "cure_date": "2025-10-01",
            "lot": "L-12",
            "reason": "interval",
        },
        "battery": {
            "pack_serial": "PK-77",
            "chemistry": "alkaline",
            "nominal_voltage_v": "31.5",
            "capacity_ah": "17",
            "made_on": "2025-12-01",
            "installed_on": "2026-03-02",
            "ocv_install_v": "32.4",
        },
        "pressure": {
            "tested_on": "2026-03-02",
            "hold_ended_at": "16:00",
            "facility": "Tank 2",
            "test_pressure_dbar": "1900",
            "hold_minutes": "30",
            "start_pressure_dbar": "1900",
            "end_pressure_dbar": "1896",
            "water_temperature_start_c": "14",
            "water_temperature_end_c": "14.2",
            "ingress_found": "",
        },
        "release": {
            "tested_on": "2026-03-02",
            "kind": "load",
            "load_kg": "200",
            "seconds_to_release": "4",
            "motor_current_a": "1.2",
            "limit_switch_ok": "on",
            "acoustic_command_ok": "on",
        },
        "sensors": {
            "checked_on": "2026-03-02",
            "sensor": "temperature",
            "reference_value": "10",
            "unit_reading": "10.02",
            "raw_resistance_ohm": "103.9",
        },
        "packremovals": {
            "install": str(old_pack.pk),
            "removed_on": "2026-03-02",
            "ocv_removal_v": "30.1",
        },
        "openings": {
            "opened_at": "2026-03-02T09:30",
            "closed_at": "2026-03-02T10:30",
            "vented_before_opening": "on",
            "internal_pressure_found": "",
            "reason": "Battery swap",
        },
    }


def closed_record_with_every_kind(unit: Transponder, by: object) -> ServiceRecord:
    """A closed bench visit on ``DAY`` holding at least one entry of every kind."""
    opened = dt.datetime.combine(DAY, dt.time(8), tzinfo=dt.UTC)
    old_pack = _earlier_pack(unit)
    entries = [
        PackRemoval(install=old_pack, removed_on=DAY, ocv_removal_v=30.1),
        *full_service_entries(unit, DAY),
        HousingOpening(
            opened_at=opened + dt.timedelta(minutes=30),
            closed_at=opened + dt.timedelta(hours=1),
            vented_before_opening=True,
            reason="Battery swap",
        ),
    ]
    record = service_record_save(
        record=ServiceRecord(unit=unit, opened_at=opened, technician=by, place=unit.place),
        entries=entries,
        by=by,  # type: ignore[arg-type]
    )
    service_record_close(record=record, by=by, at=opened + dt.timedelta(hours=6))  # type: ignore[arg-type]
    kinds = {type(e) for e in entries}
    assert kinds == set(entry_kinds()), "add the new entry kind here"
    return record


def assert_storable(instance: models.Model) -> None:
    """What the forms would accept: model validation passes, every number is finite and every
    date lies inside the entry bounds."""
    instance.full_clean()
    for field in instance._meta.concrete_fields:
        value = getattr(instance, field.attname)
        if isinstance(field, models.FloatField) and value is not None:
            assert math.isfinite(value), f"{field.name} = {value!r}"
        if isinstance(field, models.DateField) and field.editable:
            assert within_date_bounds(value), f"{field.name} = {value!r}"
