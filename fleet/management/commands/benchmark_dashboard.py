"""Measure the overview against a raw read of one row per maintenance item.

Builds a synthetic fleet in an EMPTY scratch database (point DATABASE_URL at one), with the
given number of units and anode readings, derives the state from the records, then times:

- raw: one SQL query reading every stored due item with its unit's serial (one row per
  maintenance item);
- engine: ``fleet.due.engine.evaluate_fleet`` + ``due_items``, the live computation a unit
  page does, run over the whole fleet (what ``rebuild_state`` costs, less the writes);
- page: the overview page through Django's test client, signed in as a viewer.

Example: DATABASE_URL=sqlite:////tmp/bench.sqlite3 python manage.py migrate &&
DATABASE_URL=sqlite:////tmp/bench.sqlite3 python manage.py benchmark_dashboard --units 5000
--readings 1000000
"""

import datetime as dt
import random
import statistics
import time
from collections.abc import Callable
from typing import Any

from django.contrib.auth import get_user_model
from django.contrib.auth.models import Group
from django.core.management.base import BaseCommand, CommandError, CommandParser
from django.db import connection, transaction
from django.db.models import Model
from django.test import Client
from django.utils import timezone

from fleet import roles
from fleet.due.engine import due_items, evaluate_fleet
from fleet.due.store import rebuild_all
from fleet.models import (
    AnodePosition,
    AnodeReading,
    BatteryInstall,
    Deployment,
    Place,
    PressureTest,
    ReleaseTest,
    ReplyChargeStep,
    SealChange,
    SealPosition,
    SensorCheck,
    ServiceRecord,
    Site,
    Transponder,
    Variant,
)

# One row per maintenance item, with the unit it belongs to: the least any fleet-wide due
# list has to read.
RAW_SQL = (
    "SELECT r.unit_id, u.serial, r.kind, r.item, r.due_on, r.basis, r.flags "
    "FROM fleet_duerow r JOIN fleet_transponder u ON u.id = r.unit_id",
)


def _median_seconds(fn: Callable[[], object], repeat: int) -> float:
    times = []
    for _ in range(repeat):
        start = time.perf_counter()
        fn()
        times.append(time.perf_counter() - start)
    return statistics.median(times)


class Command(BaseCommand):
    help = "Build a synthetic fleet in an empty database and time the overview."

    def add_arguments(self, parser: CommandParser) -> None:
        parser.add_argument("--units", type=int, default=5000)
        parser.add_argument("--readings", type=int, default=1_000_000)
        parser.add_argument("--repeat", type=int, default=3)
        parser.add_argument("--seed", type=int, default=7)

    def handle(
        self, *args: Any, units: int, readings: int, repeat: int, seed: int, **options: Any
    ) -> None:
        if units < 1 or readings < 0 or repeat < 1:
            raise CommandError("units and repeat must be at least 1, readings at least 0")
        if Transponder.objects.exists():
            raise CommandError(
                "This database already holds units. Point DATABASE_URL at an empty scratch "
                "database and migrate it first."
            )
        now = timezone.now().replace(microsecond=0)
        t0 = time.perf_counter()
        self._build(units, readings, now, random.Random(seed))
        built = time.perf_counter() - t0
        t0 = time.perf_counter()
        rebuild_all(at=now)
        derived = time.perf_counter() - t0
        rows = sum(self._count(sql) for sql in RAW_SQL)

        def raw() -> None:
            with connection.cursor() as cursor:
                for sql in RAW_SQL:
                    cursor.execute(sql)
                    cursor.fetchall()

        on = timezone.localdate(now)

        def engine() -> None:
            due_items(evaluate_fleet(on=on))

        client = Client(HTTP_HOST="localhost")
        client.force_login(get_user_model().objects.get(username="bench-viewer"))

        def page() -> None:
            response = client.get("/")
            if response.status_code != 200:
                raise CommandError(f"the overview answered {response.status_code}")

        raw_s = _median_seconds(raw, repeat)
        engine_s = _median_seconds(engine, repeat)
        page_s = _median_seconds(page, repeat)
        self.stdout.write(
            f"fleet: {units} units, {AnodeReading.objects.count()} anode readings, "
            f"{rows} derived rows (one per maintenance item)\n"
            f"build {built:.1f} s, derive state {derived:.1f} s\n"
            f"raw read of one row per item: {raw_s * 1000:.0f} ms (median of {repeat})\n"
            f"engine (evaluate + due items): {engine_s * 1000:.0f} ms, "
            f"{engine_s / raw_s:.1f}x raw\n"
            f"overview page: {page_s * 1000:.0f} ms, {page_s / raw_s:.1f}x raw"
        )

    @staticmethod
    def _count(sql: str) -> int:
        with connection.cursor() as cursor:
            cursor.execute(f"SELECT COUNT(*) FROM ({sql}) AS t")  # noqa: S608 - fixed strings
            return int(cursor.fetchone()[0])

    @transaction.atomic
    def _build(self, n_units: int, n_readings: int, now: dt.datetime, rng: random.Random) -> None:
        roles.ensure_groups()
        user_model = get_user_model()
        tech = user_model.objects.create_user("bench-technician")
        tech.groups.add(Group.objects.get(name=roles.TECHNICIAN))
        viewer = user_model.objects.create_user("bench-viewer")
        viewer.groups.add(Group.objects.get(name=roles.VIEWER))
        place = Place.objects.create(name="Bench workshop", kind=Place.Kind.WORKSHOP)
        site = Site.objects.create(
            name="Bench site",
            latitude_deg=-40.0,
            longitude_deg=-25.0,
            water_depth_m=1200.0,
            bottom_temperature_c=4.0,
            practical_salinity=34.8,
        )
        variant = Variant.objects.create(
            name="Bench variant",
            depth_rating_m=1500.0,
            housing_alloy="al6061",
            release_fitted=True,
            allowed_chemistries=["li_socl2"],
            cells_in_series=21,
            listen_current_a=0.0002,
            mass_in_air_kg=38.0,
            displaced_volume_m3=0.044,
        )
        anodes = [
            AnodePosition.objects.create(
                variant=variant, name=f"Anode {i}", new_net_mass_g=400.0, design_current_a=0.005
            )
            for i in range(3)
        ]
        seals = [
            SealPosition.objects.create(
                variant=variant,
                name=f"Seal {i}",
                as568_dash="240",
                interval_months=18,
                max_openings=6,
            )
            for i in range(4)
        ]
        ReplyChargeStep.objects.create(variant=variant, step=1, charge_per_reply_as=0.005)
        units = Transponder.objects.bulk_create(
            Transponder(
                serial=f"B-{i:06d}",
                variant=variant,
                place=place,
                acoustic_address=str(i % 4000),
                turnaround_delay_ms=12.5,
            )
            for i in range(n_units)
        )
        visits_per_unit = max(1, round(n_readings / (n_units * len(anodes))))
        start = now - dt.timedelta(days=3 * 365)
        step = dt.timedelta(days=(3 * 365) / visits_per_unit)
        deployments, records = [], []
        for unit in units:
            for v in range(visits_per_unit):
                over = start + step * v
                deployments.append(
                    Deployment(
                        unit=unit,
                        site=site,
                        over_side_at=over,
                        recovered_at=over + step * 0.6,
                        planned_days=max(1, step.days),
                        planned_interrogations_per_day=500,
                        transmit_power_step=1,
                        created_by=tech,
                    )
                )
                records.append(
                    ServiceRecord(
                        unit=unit,
                        opened_at=over + step * 0.7,
                        technician=tech,
                        place=place,
                        created_by=tech,
                        closed_at=over + step * 0.8,
                        closed_by=tech,
                    )
                )
        Deployment.objects.bulk_create(deployments, batch_size=5000)
        ServiceRecord.objects.bulk_create(records, batch_size=5000)
        by_unit: dict[int, list[ServiceRecord]] = {}
        for record in ServiceRecord.objects.order_by("opened_at").only(
            "pk", "unit_id", "opened_at"
        ):
            by_unit.setdefault(record.unit_id, []).append(record)
        batch: list[AnodeReading] = []
        others: dict[type[Model], list[Model]] = {}
        for unit in units:
            unit_records = by_unit[unit.pk]
            rate = rng.uniform(0.05, 0.3)  # g per visit
            for v, record in enumerate(unit_records):
                for anode in anodes:
                    batch.append(
                        AnodeReading(
                            record=record,
                            position=anode,
                            mass_g=max(0.0, 400.0 - rate * v * rng.uniform(0.9, 1.1) * 10),
                            bond_resistance_ohm=0.02,
                        )
                    )
                if len(batch) >= 20000:
                    AnodeReading.objects.bulk_create(batch)
                    batch.clear()
            last = unit_records[-1]
            day = timezone.localdate(last.opened_at)
            others.setdefault(SealChange, []).extend(
                SealChange(
                    record=last, position=s, material="NBR", cure_date=day, reason="interval"
                )
                for s in seals
            )
            others.setdefault(BatteryInstall, []).append(
                BatteryInstall(
                    record=last,
                    unit=unit,
                    pack_serial=f"P-{unit.pk}",
                    chemistry="li_socl2",
                    nominal_voltage_v=75.6,
                    capacity_ah=38.0,
                    made_on=day,
                    installed_on=day,
                    ocv_install_v=76.0,
                )
            )
            others.setdefault(PressureTest, []).append(
                PressureTest(
                    record=last,
                    tested_on=day,
                    test_pressure_dbar=1900,
                    hold_minutes=60,
                    start_pressure_dbar=1900,
                    end_pressure_dbar=1899,
                    water_temperature_start_c=12,
                    water_temperature_end_c=12,
                    facility="Tank",
                )
            )
            others.setdefault(ReleaseTest, []).append(
                ReleaseTest(
                    record=last,
                    tested_on=day,
                    kind="bench",
                    seconds_to_release=5,
                    motor_current_a=1.0,
                    limit_switch_ok=True,
                    acoustic_command_ok=True,
                )
            )
            others.setdefault(SensorCheck, []).extend(
                [
                    SensorCheck(
                        record=last,
                        checked_on=day,
                        sensor="temperature",
                        reference_value=10.0,
                        unit_reading=10.02,
                    ),
                    SensorCheck(
                        record=last,
                        checked_on=day,
                        sensor="pressure",
                        reference_value=1000.0,
                        unit_reading=1000.2,
                    ),
                ]
            )
        AnodeReading.objects.bulk_create(batch)
        for model, rows in others.items():
            model._default_manager.bulk_create(rows, batch_size=5000)
