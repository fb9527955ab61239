"""Time what the workshop waits for, on a synthetic fleet, against the goals.

Builds a deterministic fleet in an EMPTY scratch database (point DATABASE_URL at one and
migrate it first) with bulk inserts: ``--units`` units, each with a bench visit (a reading at
each of three anodes) after every deployment over ``--years`` years, the last visit a full
service; plus one unit per ``--sizes`` entry with about that many anode readings. Then it
derives the state and times, in interleaved rounds (so a noisy neighbour spreads over every
row): the overview, the planner, a bench-visit save, the unit page and the anode chart at
each size, the readiness page and the checklist PDF; then ``rebuild_state`` and its
``--check`` once, and the peak memory of the planner and of a whole-fleet evaluation.
Prints medians, min–max, query counts and each goal; ``--check`` exits non-zero on a miss.

Example: DATABASE_URL=sqlite:////tmp/bench.sqlite3 python manage.py migrate &&
DATABASE_URL=sqlite:////tmp/bench.sqlite3 python manage.py benchmark --quick
"""

import datetime as dt
import random
import statistics
import time
import tracemalloc
from collections.abc import Callable
from dataclasses import dataclass, field
from typing import Any

from django.conf import settings
from django.contrib.auth import get_user_model
from django.contrib.auth.models import Group
from django.core.management import call_command
from django.core.management.base import BaseCommand, CommandError, CommandParser
from django.db import connection, transaction
from django.db.models import Model
from django.test import Client
from django.test.utils import CaptureQueriesContext, override_settings
from django.urls import reverse
from django.utils import timezone

from fleet import roles
from fleet.due.engine import evaluate_fleet
from fleet.due.planned import PlannedDeployment
from fleet.due.readiness import plan_campaign
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
from fleet.services.records import service_record_save

MIB = 1024 * 1024


@dataclass
class Timing:
    seconds: list[float] = field(default_factory=list)
    queries: int = 0

    @property
    def median(self) -> float:
        return statistics.median(self.seconds)


def _timed(fn: Callable[[], object], timing: Timing) -> None:
    connection.queries_log.clear()  # the log holds at most 9,000: start each count empty
    with CaptureQueriesContext(connection) as captured:
        start = time.perf_counter()
        fn()
        timing.seconds.append(time.perf_counter() - start)
    timing.queries = len(captured)


def _peak_mib(fn: Callable[[], object]) -> float:
    tracemalloc.start()
    try:
        fn()
        return tracemalloc.get_traced_memory()[1] / MIB
    finally:
        tracemalloc.stop()


class Command(BaseCommand):
    help = "Build a synthetic fleet in an empty database and time the pages and writes."

    def add_arguments(self, parser: CommandParser) -> None:
        parser.add_argument("--quick", action="store_true", help="200 units over two years.")
        parser.add_argument("--units", type=int, default=None)
        parser.add_argument("--years", type=int, default=None)
        parser.add_argument("--sizes", default="10,1000,5000", help="Readings per timed unit.")
        parser.add_argument("--repeat", type=int, default=5)
        parser.add_argument("--seed", type=int, default=7)
        parser.add_argument("--check", action="store_true", help="Fail when a goal is missed.")

    def handle(self, *args: Any, **options: Any) -> None:
        quick = options["quick"]
        units = options["units"] or (200 if quick else 5000)
        years = options["years"] or (2 if quick else 10)
        sizes = sorted({int(s) for s in options["sizes"].split(",") if s.strip()})
        repeat = options["repeat"]
        if units < 1 or years < 1 or repeat < 1 or not sizes or min(sizes) < 1:
            raise CommandError("units, years, repeat and every size must be at least 1")
        if Transponder.objects.exists():
            raise CommandError(
                "This database already holds units. Point DATABASE_URL at an empty scratch "
                "database and migrate it first."
            )
        now = timezone.now().replace(microsecond=0)
        t0 = time.perf_counter()
        fleet = _Fleet(random.Random(options["seed"]), now)
        fleet.build(units, years, sizes)
        built = time.perf_counter() - t0
        t0 = time.perf_counter()
        rebuild_all(at=now)
        derived = time.perf_counter() - t0
        self.stdout.write(
            f"fleet: {Transponder.objects.count()} units, {years} years, "
            f"{AnodeReading.objects.count()} anode readings; built in {built:.1f} s, "
            f"state derived in {derived:.1f} s; {connection.vendor}"
        )
        # Plain static names: a scratch database has no collectstatic manifest behind it.
        plain = {"BACKEND": "django.contrib.staticfiles.storage.StaticFilesStorage"}
        with override_settings(STORAGES={**settings.STORAGES, "staticfiles": plain}):
            timings, rebuild = self._measure(fleet, sizes, repeat)
        missed = self._report(timings, rebuild, sizes, repeat)
        if options["check"] and missed:
            raise CommandError(f"{len(missed)} goal(s) missed: {', '.join(missed)}")

    def _measure(
        self, fleet: "_Fleet", sizes: list[int], repeat: int
    ) -> tuple[dict[str, Timing], dict[str, float]]:
        client = Client(HTTP_HOST="localhost")
        client.force_login(fleet.viewer)
        start = timezone.localdate() + dt.timedelta(days=5)
        plan_query = {"site": fleet.site.pk, "start": start.isoformat(), "days": 90}

        def get(url: str, query: dict[str, Any] | None = None) -> Callable[[], None]:
            def fn() -> None:
                response = client.get(url, query or {})
                if response.status_code != 200:
                    raise CommandError(f"{url} answered {response.status_code}")
                b"".join(getattr(response, "streaming_content", [response.content]))

            return fn

        scenarios: dict[str, Callable[[], None]] = {
            "overview": get(reverse("dashboard")),
            "planner": get(reverse("plan"), {**plan_query, "wanted": 20}),
        }
        for size in sizes:
            unit = fleet.sized[size]
            position = fleet.anodes[0].pk
            scenarios[f"save @{size}"] = fleet.save_visit(unit)
            scenarios[f"unit page @{size}"] = get(reverse("unit-detail", args=[unit.serial]))
            scenarios[f"anode chart @{size}"] = get(
                reverse("unit-anode-chart", args=[unit.serial, position])
            )
        serial = fleet.sized[sizes[0]].serial
        scenarios["readiness page"] = get(reverse("unit-readiness", args=[serial]), plan_query)
        scenarios["checklist PDF"] = get(reverse("unit-checklist-pdf", args=[serial]), plan_query)
        timings = {name: Timing() for name in scenarios}
        for _ in range(repeat):  # interleaved: one of each per round
            for name, fn in scenarios.items():
                _timed(fn, timings[name])
        rebuild: dict[str, float] = {}
        for label, check in (("rebuild_state", False), ("rebuild_state --check", True)):
            t0 = time.perf_counter()
            call_command("rebuild_state", check=check, stdout=_Null(), stderr=_Null())
            rebuild[label] = time.perf_counter() - t0
        on = timezone.localdate()
        planned = PlannedDeployment(fleet.site, start, 90)
        rebuild["planner peak MiB"] = _peak_mib(lambda: plan_campaign(planned, wanted=20, on=on))
        rebuild["fleet evaluation peak MiB"] = _peak_mib(lambda: evaluate_fleet(on=on))
        return timings, rebuild

    def _report(
        self, timings: dict[str, Timing], other: dict[str, float], sizes: list[int], repeat: int
    ) -> list[str]:
        w = self.stdout.write
        w(f"\n{'scenario':<24}{'median ms':>10}{'min–max ms':>18}{'queries':>9}  (n={repeat})")
        for name, t in timings.items():
            lo, hi = min(t.seconds) * 1000, max(t.seconds) * 1000
            w(f"{name:<24}{t.median * 1000:>10.1f}{f'{lo:.1f}–{hi:.1f}':>18}{t.queries:>9}")
        for name, value in other.items():
            unit = "MiB" if "MiB" in name else "s"
            w(f"{name:<24}{value:>10.1f} {unit}")
        small, large = sizes[0], sizes[-1]
        save_ratio = timings[f"save @{large}"].median / timings[f"save @{small}"].median
        page_ratio = timings[f"unit page @{large}"].median / timings[f"unit page @{small}"].median
        goals = [
            (f"save @{large} within 1.5x of @{small}", save_ratio <= 1.5, f"{save_ratio:.2f}x"),
            (
                f"save @{large} under 100 ms",
                timings[f"save @{large}"].median < 0.1,
                f"{timings[f'save @{large}'].median * 1000:.0f} ms",
            ),
            ("planner under 1 s", timings["planner"].median < 1.0, ""),
            ("planner peak under 100 MiB", other["planner peak MiB"] < 100, ""),
            (
                f"unit page @{large} within 1.5x of @{small}",
                page_ratio <= 1.5,
                f"{page_ratio:.2f}x",
            ),
            (
                "unit page queries constant in history",
                timings[f"unit page @{large}"].queries == timings[f"unit page @{small}"].queries,
                "",
            ),
            (
                "save queries constant in history",
                timings[f"save @{large}"].queries == timings[f"save @{small}"].queries,
                "",
            ),
        ]
        w("\ngoals:")
        missed = []
        for name, met, detail in goals:
            w(f"  {'met   ' if met else 'MISSED'} {name} {detail}".rstrip())
            if not met:
                missed.append(name)
        return missed


class _Null:
    def write(self, text: str) -> int:
        return len(text)

    def flush(self) -> None:
        return None


class _Fleet:
    """The synthetic fleet: one variant with three anodes and four seals, one site."""

    def __init__(self, rng: random.Random, now: dt.datetime) -> None:
        self.rng = rng
        self.now = now
        self.sized: dict[int, Transponder] = {}

    def save_visit(self, unit: Transponder) -> Callable[[], None]:
        """One bench visit with a reading at each anode, saved and rolled back."""

        def fn() -> None:
            with transaction.atomic():
                record = ServiceRecord(
                    unit=unit,
                    opened_at=timezone.now() - dt.timedelta(minutes=5),
                    technician=self.tech,
                    place=self.place,
                )
                readings = [AnodeReading(position=a, mass_g=300.0) for a in self.anodes]
                service_record_save(record=record, entries=readings, by=self.tech)
                transaction.set_rollback(True)

        return fn

    @transaction.atomic
    def build(self, n_units: int, years: int, sizes: list[int]) -> None:
        self._reference()
        units = Transponder.objects.bulk_create(
            Transponder(
                serial=f"B-{i:06d}",
                variant=self.variant,
                place=self.place,
                acoustic_address=str(i % 4000),
                turnaround_delay_ms=12.5,
            )
            for i in range(n_units)
        )
        sized = Transponder.objects.bulk_create(
            Transponder(
                serial=f"H-{size:06d}",
                variant=self.variant,
                place=self.place,
                acoustic_address=str(4000 + i),
                turnaround_delay_ms=12.5,
            )
            for i, size in enumerate(sizes)
        )
        self.sized = dict(zip(sizes, sized, strict=True))
        span = dt.timedelta(days=365 * years)
        plan = [(u, max(1, round(365 * years / 55))) for u in units]
        plan += [
            (u, max(1, -(-size // len(self.anodes)))) for u, size in zip(sized, sizes, strict=True)
        ]
        for unit, visits in plan:
            self._history(unit, visits, span)
        self._flush(final=True)

    def _reference(self) -> None:
        roles.ensure_groups()
        users = get_user_model()
        self.tech = users.objects.create_user("bench-technician")
        self.tech.groups.add(Group.objects.get(name=roles.TECHNICIAN))
        self.viewer = users.objects.create_user("bench-viewer")
        self.viewer.groups.add(Group.objects.get(name=roles.VIEWER))
        self.place = Place.objects.create(name="Bench workshop", kind=Place.Kind.WORKSHOP)
        self.site = Site.objects.create(
            name="Bench site",
            latitude_deg=-40.0,
            longitude_deg=-25.0,
            water_depth_m=1200.0,
            bottom_temperature_c=4.0,
            practical_salinity=34.8,
        )
        self.variant = Variant.objects.create(
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
        self.anodes = [
            AnodePosition.objects.create(
                variant=self.variant,
                name=f"Anode {i}",
                new_net_mass_g=400.0,
                design_current_a=0.005,
            )
            for i in range(3)
        ]
        self.seals = [
            SealPosition.objects.create(
                variant=self.variant,
                name=f"Seal {i}",
                as568_dash="240",
                interval_months=18,
                max_openings=6,
            )
            for i in range(4)
        ]
        ReplyChargeStep.objects.create(variant=self.variant, step=1, charge_per_reply_as=0.005)
        self.pending: dict[type[Model], list[Any]] = {}

    def _history(self, unit: Transponder, visits: int, span: dt.timedelta) -> None:
        """``visits`` deployments, each followed by a closed bench visit; the last visit, a
        few days ago, a full service."""
        end = self.now - dt.timedelta(days=3)
        step = span / visits
        rate = self.rng.uniform(0.005, 0.03)  # g per immersed day, about
        records = []
        for v in range(visits):
            visit_at = end - step * (visits - 1 - v)
            over = visit_at - step * 0.9
            self._add(
                Deployment(
                    unit=unit,
                    site=self.site,
                    over_side_at=over,
                    recovered_at=visit_at - step * 0.1,
                    planned_days=max(1, round(step.days * 0.8)),
                    planned_interrogations_per_day=500,
                    transmit_power_step=1,
                    created_by=self.tech,
                )
            )
            records.append(
                ServiceRecord(
                    unit=unit,
                    opened_at=visit_at,
                    technician=self.tech,
                    place=self.place,
                    created_by=self.tech,
                    closed_at=visit_at + dt.timedelta(hours=6),
                    closed_by=self.tech,
                )
            )
        ServiceRecord.objects.bulk_create(records)  # primary keys back on both backends
        worn = 400.0
        for record in records:
            worn = max(150.0, worn - rate * step.days * self.rng.uniform(0.8, 1.2))
            for anode in self.anodes:
                self._add(AnodeReading(record=record, position=anode, mass_g=round(worn, 1)))
        self._service(unit, records[-1])
        self._flush()

    def _service(self, unit: Transponder, record: ServiceRecord) -> None:
        day = timezone.localdate(record.opened_at)
        for seal in self.seals:
            self._add(
                SealChange(
                    record=record, position=seal, material="NBR", cure_date=day, reason="interval"
                )
            )
        self._add(
            BatteryInstall(
                record=record,
                unit=unit,
                pack_serial=f"P-{unit.serial}",
                chemistry="li_socl2",
                nominal_voltage_v=75.6,
                capacity_ah=38.0,
                made_on=day,
                installed_on=day,
                ocv_install_v=76.0,
            )
        )
        self._add(
            PressureTest(
                record=record,
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
        self._add(
            ReleaseTest(
                record=record,
                tested_on=day,
                kind="bench",
                seconds_to_release=5,
                motor_current_a=1.0,
                limit_switch_ok=True,
                acoustic_command_ok=True,
            )
        )
        for sensor, reference, reading in (("temperature", 10.0, 10.02), ("pressure", 1e3, 1e3)):
            self._add(
                SensorCheck(
                    record=record,
                    checked_on=day,
                    sensor=sensor,
                    reference_value=reference,
                    unit_reading=reading,
                )
            )

    def _add(self, row: Any) -> None:
        self.pending.setdefault(type(row), []).append(row)

    def _flush(self, *, final: bool = False) -> None:
        if not final and sum(len(rows) for rows in self.pending.values()) < 20000:
            return
        for model, rows in self.pending.items():
            model._default_manager.bulk_create(rows, batch_size=5000)
        self.pending = {}
