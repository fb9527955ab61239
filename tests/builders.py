"""Small named builders for test records. Fixed values; override what a test cares about."""

import datetime as dt
from typing import Any

from django.contrib.auth import get_user_model
from django.contrib.auth.models import Group

from fleet import roles
from fleet.models import (
    AnodePosition,
    Place,
    PressureTest,
    ReplyChargeStep,
    SealPosition,
    ServiceRecord,
    Site,
    Transponder,
    Variant,
)
from fleet.services.reference import site_save, unit_save

T0 = dt.datetime(2026, 3, 2, 9, 0, tzinfo=dt.UTC)


def make_user(username: str, role: str | None = None, **kwargs: Any):
    user = get_user_model().objects.create_user(
        username=username, password="pw-for-tests-only", **kwargs
    )
    if role:
        roles.ensure_groups()
        user.groups.add(Group.objects.get(name=role))
    return user


def make_place(**kwargs: Any) -> Place:
    kwargs.setdefault("name", "Bench workshop")
    kwargs.setdefault("kind", Place.Kind.WORKSHOP)
    return Place.objects.create(**kwargs)


def make_site(**kwargs: Any) -> Site:
    kwargs.setdefault("name", "Test site A")
    kwargs.setdefault("latitude_deg", 45.0)
    kwargs.setdefault("longitude_deg", -20.0)
    kwargs.setdefault("water_depth_m", 1350.0)
    kwargs.setdefault("bottom_temperature_c", 4.0)
    kwargs.setdefault("practical_salinity", 35.0)
    return site_save(site=Site(**kwargs))


def make_variant(*, anodes: int = 2, seals: int = 2, **kwargs: Any) -> Variant:
    kwargs.setdefault("name", "Test variant 1500")
    kwargs.setdefault("depth_rating_m", 1500.0)
    kwargs.setdefault("housing_alloy", "al6061")
    kwargs.setdefault("release_fitted", True)
    kwargs.setdefault("allowed_chemistries", ["alkaline", "li_socl2"])
    kwargs.setdefault("cells_in_series", 21)
    kwargs.setdefault("parallel_strings", 1)
    kwargs.setdefault("listen_current_a", 0.0002)
    kwargs.setdefault("mass_in_air_kg", 45.0)
    kwargs.setdefault("displaced_volume_m3", 0.060)
    variant = Variant(**kwargs)
    variant.full_clean()
    variant.save()
    for i in range(anodes):
        AnodePosition.objects.create(
            variant=variant, name=f"Anode {i + 1}", new_net_mass_g=400.0, design_current_a=0.005
        )
    for i in range(seals):
        SealPosition.objects.create(
            variant=variant,
            name=f"Seal {i + 1}",
            as568_dash="240",
            interval_months=12,
            max_openings=6,
        )
    ReplyChargeStep.objects.create(variant=variant, step=1, charge_per_reply_as=0.005)
    return variant


def make_unit(**kwargs: Any) -> Transponder:
    if "variant" not in kwargs:
        kwargs["variant"] = Variant.objects.first() or make_variant()
    kwargs.setdefault("serial", "TX-0001")
    kwargs.setdefault("acoustic_address", "101")
    kwargs.setdefault("turnaround_delay_ms", 12.5)
    return unit_save(unit=Transponder(**kwargs))


def make_record(*, unit: Transponder, by, **kwargs: Any) -> ServiceRecord:
    kwargs.setdefault("opened_at", T0)
    kwargs.setdefault("technician", by)
    if "place" not in kwargs:
        kwargs["place"] = Place.objects.first() or make_place()
    kwargs.setdefault("created_by", by)
    return ServiceRecord.objects.create(unit=unit, **kwargs)


def pressure_test(day: dt.date, **kwargs: Any) -> PressureTest:
    """A held, dry hydrostatic test at 1900 dbar (1.25 x the 1500 m test variant's rating)."""
    kwargs.setdefault("test_pressure_dbar", 1900)
    kwargs.setdefault("start_pressure_dbar", 1900)
    kwargs.setdefault("end_pressure_dbar", 1898)
    kwargs.setdefault("hold_minutes", 60)
    kwargs.setdefault("water_temperature_start_c", 12)
    kwargs.setdefault("water_temperature_end_c", 12.2)
    kwargs.setdefault("facility", "Tank")
    kwargs.setdefault("hold_ended_at", dt.time(16, 0))
    return PressureTest(tested_on=day, **kwargs)


def full_service_entries(unit: Transponder, day: dt.date, **release: Any) -> list:
    """Every entry the readiness checks read, dated ``day`` and good; ``release`` overrides the
    release test's fields (``limit_switch_ok=False`` makes it fail)."""
    from fleet.models import (
        AnodeReading,
        BatteryInstall,
        ReleaseTest,
        SealChange,
        SensorCheck,
    )

    variant = unit.variant
    release.setdefault("limit_switch_ok", True)
    return [
        *(
            AnodeReading(position=p, mass_g=p.new_net_mass_g * 0.9)
            for p in variant.anode_positions.all()
        ),
        *(
            SealChange(
                position=s,
                material="NBR",
                cure_date=day - dt.timedelta(days=300),
                reason="interval",
            )
            for s in variant.seal_positions.all()
        ),
        BatteryInstall(
            pack_serial=f"P-{unit.serial}",
            chemistry="li_socl2",
            nominal_voltage_v=75.6,
            capacity_ah=38.0,
            made_on=day - dt.timedelta(days=60),
            installed_on=day,
            ocv_install_v=76.5,
        ),
        pressure_test(day),
        ReleaseTest(
            tested_on=day,
            kind="load",
            load_kg=200,
            seconds_to_release=5,
            motor_current_a=1.1,
            acoustic_command_ok=True,
            **release,
        ),
        SensorCheck(
            checked_on=day,
            sensor="temperature",
            reference_value=10.0,
            unit_reading=10.02,
            raw_resistance_ohm=103.903,
        ),
        SensorCheck(checked_on=day, sensor="pressure", reference_value=1000.0, unit_reading=1000.3),
    ]


def serviced_unit(unit: Transponder, *, by, site: Site, day: dt.date, **release: Any):
    """``unit`` after one past deployment at ``site`` (so its anodes have a wear rate) and a full
    bench visit on ``day``, closed: the record-built "ready" unit, on that day's records."""
    from fleet.models import Deployment
    from fleet.services.deployments import deployment_recover, deployment_start
    from fleet.services.records import service_record_close, service_record_save

    over = dt.datetime.combine(day - dt.timedelta(days=200), dt.time(8), tzinfo=dt.UTC)
    deployment = deployment_start(
        deployment=Deployment(
            unit=unit,
            site=site,
            over_side_at=over,
            planned_days=180,
            planned_interrogations_per_day=200,
            transmit_power_step=1,
        ),
        by=by,
        check_readiness=False,  # a past deployment, built as history
    )
    deployment_recover(
        deployment=deployment,
        recovered_at=over + dt.timedelta(days=180),
        replies_counted=None,
        place=None,
        by=by,
    )
    opened = dt.datetime.combine(day, dt.time(8), tzinfo=dt.UTC)
    record = service_record_save(
        record=ServiceRecord(
            unit=unit,
            opened_at=opened,
            technician=by,
            place=unit.place or Place.objects.first() or make_place(),
        ),
        entries=full_service_entries(unit, day, **release),
        by=by,
    )
    service_record_close(record=record, by=by, at=opened + dt.timedelta(hours=4))
    return record
