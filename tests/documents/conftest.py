"""A hand-built history for the documents: one closed bench visit with an entry of every kind,
written through the same services as the pages."""

import datetime as dt
import io
from types import SimpleNamespace

import pytest
from django.core.files.base import ContentFile
from PIL import Image

from fleet.models import (
    AnodeReading,
    BatteryInstall,
    HousingOpening,
    PressureTest,
    ReleaseTest,
    SealChange,
    SensorCheck,
    ServiceRecord,
)
from fleet.services.records import amendment_create, service_record_close, service_record_save
from tests.builders import T0, make_site

HOSTILE = "<b>bold</b> & <A href=x> S&P <unclosed"
ON = dt.date(2026, 4, 1)
AT = dt.datetime(2026, 4, 1, 8, 30, tzinfo=dt.UTC)
CLOSED_AT = dt.datetime(2026, 3, 2, 16, 0, tzinfo=dt.UTC)


def jpeg_bytes(width: int = 64, height: int = 48) -> bytes:
    out = io.BytesIO()
    Image.new("RGB", (width, height), (90, 120, 160)).save(out, format="JPEG", quality=80)
    return out.getvalue()


def release_test(**kwargs) -> ReleaseTest:
    kwargs.setdefault("tested_on", dt.date(2026, 3, 2))
    kwargs.setdefault("kind", ReleaseTest.Kind.LOAD)
    kwargs.setdefault("load_kg", 250.0)
    kwargs.setdefault("seconds_to_release", 12.5)
    kwargs.setdefault("motor_current_a", 1.8)
    kwargs.setdefault("limit_switch_ok", True)
    kwargs.setdefault("acoustic_command_ok", True)
    return ReleaseTest(**kwargs)


def bench_visit(
    unit, by, *entries, when=T0, summary="", close_at=None, closer=None
) -> ServiceRecord:
    record = ServiceRecord(
        unit=unit, opened_at=when, technician=by, place=unit.place, summary=summary
    )
    record = service_record_save(record=record, entries=list(entries), by=by)
    if close_at is not None:
        service_record_close(record=record, by=closer or by, at=close_at)
        record.refresh_from_db()
    return record


@pytest.fixture
def media(settings, tmp_path):
    settings.MEDIA_ROOT = tmp_path / "media"
    return settings.MEDIA_ROOT


@pytest.fixture
def history(media, unit, technician, supervisor):
    """Unit TX-0001 after one closed bench visit on 2026-03-02 with every kind of entry."""
    variant = unit.variant
    anode1, anode2 = variant.anode_positions.order_by("name")
    seal1, seal2 = variant.seal_positions.order_by("name")
    photo_reading = AnodeReading(
        position=anode2,
        mass_g=390.0,
        bond_resistance_ohm=0.02,
        note=HOSTILE,
        photo=ContentFile(jpeg_bytes(), name="anode2.jpg"),
    )
    record = bench_visit(
        unit,
        technician,
        AnodeReading(position=anode1, mass_g=380.0, bond_resistance_ohm=0.03),
        photo_reading,
        SealChange(
            position=seal1,
            material="NBR",
            cure_date=dt.date(2025, 10, 1),
            lot="L-1",
            reason="interval",
        ),
        SealChange(
            position=seal2,
            material="NBR",
            cure_date=dt.date(2025, 10, 1),
            lot="L-1",
            reason="interval",
        ),
        BatteryInstall(
            pack_serial="PK-77",
            chemistry="alkaline",
            nominal_voltage_v=31.5,
            capacity_ah=17.0,
            made_on=dt.date(2026, 1, 10),
            installed_on=dt.date(2026, 3, 2),
            ocv_install_v=33.1,
        ),
        HousingOpening(
            opened_at=dt.datetime(2026, 3, 2, 9, 15, tzinfo=dt.UTC),
            closed_at=dt.datetime(2026, 3, 2, 11, 0, tzinfo=dt.UTC),
            vented_before_opening=True,
            reason="battery change",
        ),
        PressureTest(
            tested_on=dt.date(2026, 3, 2),
            hold_ended_at=dt.time(14, 0),  # after the housing was closed at 11:00
            test_pressure_dbar=2000,
            hold_minutes=60,
            start_pressure_dbar=2000,
            end_pressure_dbar=1996,
            water_temperature_start_c=15.0,
            water_temperature_end_c=15.2,
            facility="Tank 2",
        ),
        release_test(),
        SensorCheck(
            checked_on=dt.date(2026, 3, 2),
            sensor="temperature",
            reference_value=10.0,
            unit_reading=10.04,
        ),
        SensorCheck(
            checked_on=dt.date(2026, 3, 2),
            sensor="pressure",
            reference_value=1000.0,
            unit_reading=1000.5,
        ),
        summary=f"Annual service. {HOSTILE}",
        close_at=CLOSED_AT,
        closer=supervisor,
    )
    first_reading = record.anode_readings.get(position=anode1)
    amendment_create(
        record=record,
        target=first_reading,
        field_name="mass_g",
        corrected_value="382",
        reason=f"Scale misread. {HOSTILE}",
        by=supervisor,
    )
    record.refresh_from_db()
    return SimpleNamespace(
        unit=unit,
        record=record,
        release_test=record.release_tests.get(),
        photo_reading=record.anode_readings.get(position=anode2),
        site=make_site(),
    )
