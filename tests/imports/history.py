"""A small history written through the services, and a picture of the derived state that
names units, records and deployments by what they are rather than by primary key (an import
gives them new keys)."""

import datetime as dt

from fleet.due.snapshot import _ANODE_FIELDS, _DUE_FIELDS, _SEAL_FIELDS, _UNIT_FIELDS
from fleet.integrity import purging
from fleet.models import (
    AnodeReading,
    BatteryInstall,
    Deployment,
    HousingOpening,
    ImportedRow,
    PressureTest,
    ReleaseTest,
    SensorCheck,
    ServiceRecord,
    Site,
    Transponder,
)
from fleet.models.state import AnodeState, DueRow, SealState, UnitState
from fleet.services.deployments import deployment_recover, deployment_start
from fleet.services.records import service_record_close, service_record_save
from tests.builders import full_service_entries, make_site, make_unit

UTC = dt.UTC


def _deploy(unit, site, by, over: dt.datetime, days: int) -> None:
    deployment = deployment_start(
        deployment=Deployment(
            unit=unit,
            site=site,
            over_side_at=over,
            planned_days=days,
            planned_interrogations_per_day=300,
            transmit_power_step=1,
        ),
        by=by,
        check_readiness=False,  # a past deployment, built as history
    )
    deployment_recover(
        deployment=deployment,
        recovered_at=over + dt.timedelta(days=days, hours=3),
        replies_counted=days * 250,
        place=None,
        by=by,
    )


def _visit(unit, by, workshop, opened: dt.datetime, entries, closed_after_h: int = 30) -> None:
    record = service_record_save(
        record=ServiceRecord(
            unit=unit, opened_at=opened, technician=by, place=workshop, summary="Bench visit"
        ),
        entries=entries,
        by=by,
    )
    service_record_close(record=record, by=by, at=opened + dt.timedelta(hours=closed_after_h))


def build_history(*, variant, workshop, by) -> list[Transponder]:
    """Two units with a year of history each: service, deployment, anode check, service with a
    new pack and a housing opening, deployment, a short check."""
    site = make_site(name="Imported site", water_depth_m=900.0)
    make_site(name="Second site", latitude_deg=-12.5, water_depth_m=40.0, bottom_temperature_c=18)
    units = [
        make_unit(variant=variant, place=workshop, serial=f"IMP-{n}", acoustic_address=f"{n}0")
        for n in (1, 2)
    ]
    for n, unit in enumerate(units):
        start = dt.datetime(2024, 1, 8 + n, 8, 0, tzinfo=UTC)
        _visit(unit, by, workshop, start, full_service_entries(unit, start.date()))
        _deploy(unit, site, by, start + dt.timedelta(days=10), 150)
        day = (start + dt.timedelta(days=170)).date()
        readings = [
            AnodeReading(
                position=p, mass_g=p.new_net_mass_g * (0.7 - 0.05 * n), bond_resistance_ohm=0.02
            )
            for p in variant.anode_positions.all()
        ]
        _visit(unit, by, workshop, start + dt.timedelta(days=170), readings)
        day = (start + dt.timedelta(days=200)).date()
        at = start + dt.timedelta(days=200)
        second = [
            HousingOpening(
                opened_at=at + dt.timedelta(hours=1),
                closed_at=at + dt.timedelta(hours=4),
                vented_before_opening=True,
                reason="Pack change",
            ),
            BatteryInstall(
                pack_serial=f"P2-{unit.serial}",
                chemistry="li_socl2",
                nominal_voltage_v=75.6,
                capacity_ah=38.0,
                made_on=day - dt.timedelta(days=30),
                installed_on=day,
                ocv_install_v=76.4,
            ),
            PressureTest(
                tested_on=day + dt.timedelta(days=1),
                test_pressure_dbar=1900,
                start_pressure_dbar=1900,
                end_pressure_dbar=1897.5,
                hold_minutes=60,
                water_temperature_start_c=12,
                water_temperature_end_c=12.4,
                facility="Tank",
                hold_ended_at=dt.time(15, 0),
            ),
            ReleaseTest(
                tested_on=day + dt.timedelta(days=1),
                kind="wet",
                seconds_to_release=4.5,
                motor_current_a=0.9,
                limit_switch_ok=True,
                acoustic_command_ok=True,
            ),
            SensorCheck(
                checked_on=day, sensor="pressure", reference_value=500.0, unit_reading=500.4
            ),
        ]
        _visit(unit, by, workshop, at, second, closed_after_h=50)
        _deploy(unit, site, by, at + dt.timedelta(days=5), 90 + 20 * n)
    return units


def wipe_fleet() -> None:
    """Delete units, sites and their history (variants, places and users stay)."""
    ImportedRow.objects.all().delete()
    with purging():
        ServiceRecord.objects.all().delete()
    Deployment.objects.all().delete()
    Transponder.objects.all().delete()
    Site.objects.all().delete()


def _describe(model, pk):
    if pk is None:
        return None
    found = model.objects.filter(pk=pk).first()
    return str(found) if found is not None else ("missing", pk)


_UNIT_KEYS = {
    "open_deployment_id": Deployment,
    "duty_deployment_id": Deployment,
    "duty_site_id": Site,
    "pack_id": BatteryInstall,
    "last_pressure_test_id": PressureTest,
    "last_release_test_id": ReleaseTest,
    "last_temperature_check_id": SensorCheck,
    "last_pressure_check_id": SensorCheck,
    "last_tilt_check_id": SensorCheck,
}


def named_state() -> dict:
    """The derived rows (state and stored due rows) keyed by serial, keys named."""
    serial = dict(Transponder.objects.values_list("pk", "serial"))
    picture: dict = {}
    for row in UnitState.objects.values("unit_id", *_UNIT_FIELDS):
        picture[("unit", serial[row["unit_id"]])] = tuple(
            _describe(_UNIT_KEYS[f], row[f]) if f in _UNIT_KEYS else row[f] for f in _UNIT_FIELDS
        )
    for model, fields, name in (
        (AnodeState, _ANODE_FIELDS, "anode"),
        (SealState, _SEAL_FIELDS, "seal"),
    ):
        for row in model.objects.values("unit_id", "position_id", *fields):
            key = (name, serial[row["unit_id"]], row["position_id"])
            picture[key] = tuple(row[f] for f in fields)
    for row in DueRow.objects.values("unit_id", "key", *_DUE_FIELDS):
        picture[("due", serial[row["unit_id"]], row["key"])] = tuple(row[f] for f in _DUE_FIELDS)
    return picture
