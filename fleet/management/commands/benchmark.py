"""Time what the workshop waits for, on a synthetic fleet, against the goals.

Builds a deterministic fleet in an EMPTY scratch database (point DATABASE_URL at one and
migrate it first) with bulk inserts: ``--units`` units, each with a bench visit (a reading at
each of three anodes) after every deployment over ``--years`` years, the last visit a full
service; plus one unit per ``--sizes`` entry with about that many anode readings. Then it
derives the state and times, in interleaved rounds (so a noisy neighbour spreads over every
row): the overview and the planner (each beside a plain SQL read of what it shows or uses),
a bench-visit save, the unit page and the anode chart at each size, the readiness page and
the checklist PDF; then ``rebuild_state`` and its ``--check`` once, the peak memory of the
planner and of a whole-fleet evaluation, an import of ``--import-rows`` anode readings
(rolled back) and the peak memory of a photo upload (a camera JPEG and the worst-case PNG,
each in a fresh process). Prints medians, min–max, query counts and each goal (``BUILD_S``
and the constants beside it); ``--check`` exits non-zero on a miss.

Example: DATABASE_URL=sqlite:////tmp/bench.sqlite3 python manage.py migrate &&
DATABASE_URL=sqlite:////tmp/bench.sqlite3 python manage.py benchmark --quick
"""

import datetime as dt
import json
import os
import platform
import random
import re
import statistics
import subprocess
import sys
import tempfile
import time
import tracemalloc
from collections.abc import Callable
from dataclasses import dataclass, field
from pathlib import Path
from typing import Any

from django.conf import settings
from django.contrib.auth import get_user_model
from django.contrib.auth.models import Group
from django.core.management import call_command
from django.core.management.base import BaseCommand, CommandError, CommandParser
from django.core.management.color import no_style
from django.db import connection, transaction
from django.db.models import Max, Model
from django.test import Client
from django.test.utils import CaptureQueriesContext, override_settings
from django.urls import reverse
from django.utils import timezone

from fleet import roles
from fleet.due.condition import annotate_condition
from fleet.due.engine import INACTIVE
from fleet.due.facts import UNIT_COLUMNS
from fleet.due.planned import PlannedDeployment
from fleet.due.readiness import PLAN_CHUNK, chunk_rows, plan_campaign
from fleet.due.store import derived_rows, due_queryset, due_summary, rebuild_all
from fleet.management.commands import benchmark_import, benchmark_upload
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
from fleet.models.bulk import copy_prepared
from fleet.models.functions import plain_columns
from fleet.services.imports import import_commit
from fleet.services.records import service_record_save

MIB = 1024 * 1024


@dataclass
class Timing:
    seconds: list[float] = field(default_factory=list)
    queries: int = 0

    @property
    def median(self) -> float:
        return statistics.median(self.seconds)


class _Counter:
    """Counts the statements run (``connection.execute_wrapper``; an ``executemany`` counts
    once), without the query log: logging formats every statement with its parameters (on
    SQLite by asking the database to quote each one), a cost production does not pay."""

    def __init__(self) -> None:
        self.count = 0

    def __call__(
        self, execute: Callable[..., Any], sql: str, params: Any, many: bool, context: Any
    ) -> Any:
        self.count += 1
        return execute(sql, params, many, context)


def _timed(fn: Callable[[], object], timing: Timing) -> None:
    counter = _Counter()
    with connection.execute_wrapper(counter):
        start = time.perf_counter()
        fn()
        timing.seconds.append(time.perf_counter() - start)
    timing.queries = counter.count


def _machine() -> str:
    """What the figures were taken on: processor, cores, load, Python, database, and the
    time of a fixed pure-Python loop (ten million additions), so runs on different
    machines can be set side by side (no goal)."""
    model = platform.processor() or platform.machine()
    cpuinfo = Path("/proc/cpuinfo")
    if cpuinfo.exists():
        names = [ln.split(":", 1)[1].strip() for ln in cpuinfo.read_text().splitlines()
                 if ln.startswith("model name")]  # fmt: skip
        model = names[0] if names else model
    start = time.perf_counter()
    total = 0
    for i in range(10_000_000):
        total += i
    loop = time.perf_counter() - start
    load = ", ".join(f"{x:.1f}" for x in os.getloadavg()) if hasattr(os, "getloadavg") else "?"
    with connection.cursor() as cursor:
        cursor.execute(
            "SELECT sqlite_version()" if connection.vendor == "sqlite" else "SHOW server_version"
        )
        db_version = cursor.fetchone()[0]
    return (
        f"machine: {model}, {os.cpu_count()} cores, load average {load}; "
        f"Python {platform.python_version()}; {connection.vendor} {db_version}; "
        f"reference loop {loop:.2f} s"
    )


def _peak_mib(fn: Callable[[], object]) -> float:
    tracemalloc.start()
    try:
        fn()
        return tracemalloc.get_traced_memory()[1] / MIB
    finally:
        tracemalloc.stop()


# The goals (issue-level bounds; docs/benchmarks.md).
BUILD_S = 180.0  # the full fleet built in under 3 minutes
REBUILD_S = 30.0  # rebuild_state, and its --check, for the fleet
MEMORY_MIB = 100.0  # planner and whole-fleet evaluation, traced
IMPORT_S = 30.0  # 100,000 anode readings imported
IMPORT_MIB = 200.0  # the import's peak resident memory
# One photo upload's peak resident memory above the size before it: a 20 MP camera JPEG, and
# the worst case the 24 MP limit admits (a mostly transparent PNG), so that a few gunicorn
# workers uploading at once stay within a small server's memory.
PHOTO_JPEG_MIB = 100.0
PHOTO_PNG_MIB = 256.0
PAGE_S = 0.25  # readiness page and checklist PDF
CHART_S = 0.03  # the anode chart


class Command(BaseCommand):
    help = "Build a synthetic fleet in an empty database and time the pages and writes."

    def add_arguments(self, parser: CommandParser) -> None:
        parser.add_argument("--quick", action="store_true", help="200 units over two years.")
        parser.add_argument("--units", type=int, default=None)
        parser.add_argument("--years", type=int, default=None)
        parser.add_argument("--sizes", default="10,1000,5000", help="Readings per timed unit.")
        parser.add_argument("--repeat", type=int, default=5)
        parser.add_argument("--seed", type=int, default=7)
        parser.add_argument(
            "--import-rows", type=int, default=None, help="100,000 (--quick: 2,000)."
        )
        parser.add_argument(
            "--photo-megapixels",
            type=float,
            default=None,
            help="20 for the JPEG and 24 for the PNG (--quick: 1 each).",
        )
        parser.add_argument("--check", action="store_true", help="Fail when a goal is missed.")

    def handle(self, *args: Any, **options: Any) -> None:
        quick = options["quick"]
        units = options["units"] or (200 if quick else 5000)
        years = options["years"] or (2 if quick else 10)
        sizes = sorted({int(s) for s in options["sizes"].split(",") if s.strip()})
        repeat = options["repeat"]
        import_rows = options["import_rows"] or (2000 if quick else 100_000)
        if units < 1 or years < 1 or repeat < 1 or not sizes or min(sizes) < 1 or import_rows < 1:
            raise CommandError("units, years, repeat, import rows and every size must be >= 1")
        if Transponder.objects.exists():
            raise CommandError(
                "This database already holds units. Point DATABASE_URL at an empty scratch "
                "database and migrate it first."
            )
        self.stdout.write(_machine())
        # As production runs: with DEBUG on (which ``manage.py`` needs without a SECRET_KEY)
        # every statement would be logged, its parameters quoted, inside every timing.
        with override_settings(DEBUG=False):
            missed = self._run(quick, units, years, sizes, repeat, import_rows, options)
        self.stdout.write(f"at the end: {_machine()}")
        if options["check"] and missed:
            raise CommandError(f"{len(missed)} goal(s) missed: {', '.join(missed)}")

    def _run(
        self,
        quick: bool,
        units: int,
        years: int,
        sizes: list[int],
        repeat: int,
        import_rows: int,
        options: dict[str, Any],
    ) -> list[str]:
        megapixels = options["photo_megapixels"]
        now = timezone.now().replace(microsecond=0)
        t0, cpu = time.perf_counter(), time.process_time()
        fleet = _Fleet(random.Random(options["seed"]), now)
        fleet.build(units, years, sizes)
        built, built_cpu = time.perf_counter() - t0, time.process_time() - cpu
        t0 = time.perf_counter()
        rebuild_all(at=now)
        derived = time.perf_counter() - t0
        self.stdout.write(
            f"fleet: {Transponder.objects.count()} units, {years} years, "
            f"{AnodeReading.objects.count()} anode readings; built in {built:.1f} s, "
            f"state derived in {derived:.1f} s; {connection.vendor}; {_settle()}"
        )
        # Plain static names: a scratch database has no collectstatic manifest behind it.
        plain = {"BACKEND": "django.contrib.staticfiles.storage.StaticFilesStorage"}
        with override_settings(STORAGES={**settings.STORAGES, "staticfiles": plain}):
            timings, other = self._measure(fleet, sizes, repeat)
        other["fleet build s"] = built
        other["fleet build cpu s"] = built_cpu
        other |= _import(import_rows)
        other |= _photos(
            megapixels or (1.0 if quick else 20.0), megapixels or (1.0 if quick else 24.0)
        )
        return self._report(timings, other, sizes, repeat)

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
            # Every item, so that a full page of 100 rows is drawn (the synthetic fleet has
            # just been serviced: few of its items need attention).
            "overview": get(reverse("dashboard"), {"show": "all"}),
            # The page's own queries, and the least SQL for its content, each replayed as
            # captured and every row fetched: database time alone, no ORM or template.
            "overview queries": _replayed(get(reverse("dashboard"), {"show": "all"})),
            "overview SQL read": _replayed(_overview_rows),
            "planner": get(reverse("plan"), {**plan_query, "wanted": 20}),
            "planner SQL read": _planner_rows,
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
        other: dict[str, float] = {}
        # What drawing the page costs beyond its queries, per row of the due table shown.
        rows_shown = 100
        other["overview render ms per row"] = (
            1000 * (timings["overview"].median - timings["overview queries"].median) / rows_shown
        )
        for label, check in (("rebuild_state", False), ("rebuild_state --check", True)):
            t0, cpu = time.perf_counter(), time.process_time()
            call_command("rebuild_state", check=check, stdout=_Null(), stderr=_Null())
            other[f"{label} s"] = time.perf_counter() - t0
            # This process's CPU alone (no waiting for a core; no database server's time).
            other[f"{label} cpu s"] = time.process_time() - cpu
            # The rebuild rewrote every state and due row: settled before what follows.
            _settle()
        on = timezone.localdate()
        planned = PlannedDeployment(fleet.site, start, 90)
        other["planner peak MiB"] = _peak_mib(lambda: plan_campaign(planned, wanted=20, on=on))
        # The whole fleet's due rows derived from the stored state, as rebuild_state and its
        # --check derive them (``evaluate_fleet``, which keeps every unit, serves tests only).
        other["fleet evaluation peak MiB"] = _peak_mib(lambda: sum(1 for _ in derived_rows()))
        return timings, other

    def _report(
        self, timings: dict[str, Timing], other: dict[str, float], sizes: list[int], repeat: int
    ) -> list[str]:
        w = self.stdout.write
        w(f"\n{'scenario':<26}{'median ms':>10}{'min–max ms':>18}{'queries':>9}  (n={repeat})")
        for name, t in timings.items():
            lo, hi = min(t.seconds) * 1000, max(t.seconds) * 1000
            w(f"{name:<26}{t.median * 1000:>10.1f}{f'{lo:.1f}–{hi:.1f}':>18}{t.queries:>9}")
        for name, value in other.items():
            w(f"{name:<26}{value:>10.1f}")
        w("\ngoals:")
        missed = []
        for name, met, detail in _goals(timings, other, sizes):
            w(f"  {'met   ' if met else 'MISSED'} {name} {detail}".rstrip())
            if not met:
                missed.append(name)
        return missed


def _goals(
    timings: dict[str, Timing], other: dict[str, float], sizes: list[int]
) -> list[tuple[str, bool, str]]:
    """(goal, met, the figure) for every goal of the benchmark."""
    small, large = sizes[0], sizes[-1]

    def ms(name: str) -> float:
        return timings[name].median * 1000

    def ratio(name: str, base: str) -> float:
        """The median of the rounds' own ratios, not the ratio of two medians: each round
        times both scenarios within a second or so (interleaved), so a machine that speeds
        up or slows down between rounds moves both sides of that round's ratio alike (seen
        here: one scenario's median 41 ms in one run, 53 ms in the next)."""
        a, b = timings[name].seconds, timings[base].seconds
        return statistics.median(x / y for x, y in zip(a, b, strict=True))

    def under(name: str, bound: float, unit: str) -> tuple[str, bool, str]:
        return (f"{name} under {bound:g} {unit}", other[name] < bound, f"{other[name]:.1f}")

    goals = [
        under("fleet build s", BUILD_S, "s"),
        (
            "overview queries within 1.5x of a SQL read of its rows and totals",
            ratio("overview queries", "overview SQL read") <= 1.5,
            f"{ratio('overview queries', 'overview SQL read'):.2f}x "
            f"(the whole page {ratio('overview', 'overview SQL read'):.2f}x)",
        ),
        ("planner under 1 s", ms("planner") < 1000, f"{ms('planner'):.0f} ms"),
        (
            "planner within 2x of a SQL read of the rows it uses",
            ratio("planner", "planner SQL read") <= 2,
            f"{ratio('planner', 'planner SQL read'):.2f}x",
        ),
        under("planner peak MiB", MEMORY_MIB, "MiB"),
    ]
    for size in sizes:
        goals.append(
            (
                f"save @{size} under 100 ms",
                ms(f"save @{size}") < 100,
                f"{ms(f'save @{size}'):.0f} ms",
            )
        )
    goals += [
        (
            f"save @{large} within 1.5x of @{small}",
            ratio(f"save @{large}", f"save @{small}") <= 1.5,
            f"{ratio(f'save @{large}', f'save @{small}'):.2f}x",
        ),
        (
            "save queries constant in history",
            timings[f"save @{large}"].queries == timings[f"save @{small}"].queries,
            f"{timings[f'save @{large}'].queries}",
        ),
        (
            f"unit page @{large} within 1.5x of @{small}",
            ratio(f"unit page @{large}", f"unit page @{small}") <= 1.5,
            f"{ratio(f'unit page @{large}', f'unit page @{small}'):.2f}x",
        ),
        (
            "unit page queries constant in history",
            timings[f"unit page @{large}"].queries == timings[f"unit page @{small}"].queries,
            f"{timings[f'unit page @{large}'].queries}",
        ),
    ]
    for size in sizes:
        name = f"anode chart @{size}"
        goals.append(
            (f"{name} under {CHART_S * 1000:g} ms", ms(name) < CHART_S * 1000, f"{ms(name):.0f} ms")
        )
    for name in ("readiness page", "checklist PDF"):
        goals.append(
            (f"{name} under {PAGE_S * 1000:g} ms", ms(name) < PAGE_S * 1000, f"{ms(name):.0f} ms")
        )
    goals += [
        under("rebuild_state s", REBUILD_S, "s"),
        under("rebuild_state --check s", REBUILD_S, "s"),
        under("fleet evaluation peak MiB", MEMORY_MIB, "MiB"),
        under("import s", IMPORT_S, "s"),
        under("import peak MiB", IMPORT_MIB, "MiB"),
        under("photo JPEG peak MiB", PHOTO_JPEG_MIB, "MiB"),
        under("photo PNG peak MiB", PHOTO_PNG_MIB, "MiB"),
    ]
    return goals


_DECLARED = re.compile(r'^DECLARE "[^"]+" (?:(?:NO )?SCROLL )?CURSOR (?:WITH HOLD )?FOR ')


def _replayed(fn: Callable[[], None]) -> Callable[[], None]:
    """The SQL ``fn`` runs (captured once, as the database received it), run again on a
    plain cursor with every row fetched."""
    with CaptureQueriesContext(connection) as captured:
        fn()
    # A read through a named (server-side) cursor is captured with its declaration: replay
    # the query itself.
    statements = [_DECLARED.sub("", q["sql"]) for q in captured.captured_queries]

    def replay() -> None:
        with connection.cursor() as cursor:
            for sql in statements:
                cursor.execute(sql)
                if cursor.description is not None:
                    cursor.fetchall()

    return replay


def _overview_rows() -> None:
    """The least SQL for the overview's content (every item shown): the totals with the
    count of listed rows (one pass), and the 100 rows shown, with the columns displayed, as
    plain values."""
    on = timezone.localdate()
    soon = settings.HOLDFAST["DUE_SOON_DAYS"]
    due_summary(on=on, soon_days=soon, show="all")
    columns = ("state_rank", "unit__serial", "unit__variant__name", "unit__place__name")
    list(
        due_queryset(on=on, soon_days=soon, show="all").values_list(
            *columns, "item", "due_on", "basis", "flags"
        )[:100]
    )


def _settle() -> str:
    """On PostgreSQL, ``VACUUM (ANALYZE)`` the scratch database after a large write, as
    autovacuum does in the minutes after one; what was done. Left to autovacuum, it ran
    during the first timed rounds (seen in ``pg_stat_user_tables``: the million readings
    and the visits vacuumed 10 to 15 s after the fleet was built), on one of the machine's two
    cores: a unit page's worst round took 2.1 s against a median of 0.13 s. A database in
    service has long been vacuumed. SQLite does no work in the background: nothing to do.
    Inside a transaction (the command's own test) VACUUM cannot run, and is left out."""
    if connection.vendor != "postgresql":
        return "no settling needed"
    if connection.in_atomic_block:
        return "not settled: inside a transaction"
    t0 = time.perf_counter()
    with connection.cursor() as cursor:
        cursor.execute("VACUUM (ANALYZE)")
    return f"settled (VACUUM ANALYZE) in {time.perf_counter() - t0:.1f} s"


def _planner_rows() -> None:
    """A SQL read of the rows the planner uses, as the planner reads them (plain values, by
    chunks of ``PLAN_CHUNK`` units): every active unit's columns with its state's and its
    condition (``UNIT_COLUMNS``), then the chunk's anode state rows and dated due rows."""
    active = Transponder.objects.exclude(hold__in=INACTIVE)
    units = annotate_condition(active, timezone.localdate()).order_by("pk")
    chunk: list[int] = []
    for row in units.values_list(*plain_columns(Transponder, UNIT_COLUMNS)).iterator(PLAN_CHUNK):
        chunk.append(row[0])
        if len(chunk) == PLAN_CHUNK:
            chunk_rows(chunk)
            chunk = []
    if chunk:
        chunk_rows(chunk)


def _import(rows: int) -> dict[str, float]:
    """``benchmark_import``'s import of ``rows`` anode readings (four a visit, 250 units) through
    ``import_commit``, the import page's path, rolled back: its time and the process's peak
    resident memory above its size before (the import's own, whatever the process held)."""
    units = min(250, -(-rows // benchmark_import.POSITIONS))
    with transaction.atomic():
        user = get_user_model().objects.create_user("bench-importer")
        _, place, serials = benchmark_import._reference(units)
        data = benchmark_import.visits_file(serials, rows, place.name, user.username)
        base = benchmark_upload._start_peak()
        t0, cpu = time.perf_counter(), time.process_time()
        import_commit(kind="visits", data=data, file_name="bench.csv", by=user)
        seconds, cpu_seconds = time.perf_counter() - t0, time.process_time() - cpu
        peak = benchmark_upload._peak()
        written = AnodeReading.objects.filter(record__unit__serial__in=serials).count()
        transaction.set_rollback(True)
    if written != rows:
        raise CommandError(f"the import wrote {written} readings of {rows}")
    return {
        "import s": seconds,
        "import cpu s": cpu_seconds,
        "import peak MiB": (peak - base) / MIB,
    }


def _photos(jpeg_megapixels: float, png_megapixels: float) -> dict[str, float]:
    """Peak resident memory of one photo upload's check and re-encoding, each measured in a
    fresh process (``benchmark_upload``): a camera JPEG, and a mostly transparent PNG."""
    peaks = {}
    for fmt, megapixels in (("jpeg", jpeg_megapixels), ("png", png_megapixels)):
        with tempfile.TemporaryDirectory() as scratch:
            path = Path(scratch) / f"photo.{'png' if fmt == 'png' else 'jpg'}"
            path.write_bytes(benchmark_upload.build_photo(megapixels, fmt))
            child = subprocess.run(
                [sys.executable, "-m", "django", "benchmark_upload", "--measure", str(path)],
                capture_output=True,
                text=True,
                check=False,
            )
        if child.returncode != 0:
            raise CommandError(f"The photo measuring process failed:\n{child.stderr}")
        report = json.loads(child.stdout.strip().splitlines()[-1])
        peaks[f"photo {fmt.upper()} peak MiB"] = report["rss_peak_increase"] / MIB
    return peaks


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
        self.grow(0, n_units, years, sizes)

    @transaction.atomic
    def grow(self, first: int, n_units: int, years: int, sizes: list[int]) -> None:
        """``n_units`` more units numbered from ``first`` (and one per size of history),
        each with ``years`` of history, onto the reference rows ``build`` made."""
        units = Transponder.objects.bulk_create(
            Transponder(
                serial=f"B-{i:06d}",
                variant=self.variant,
                place=self.place,
                acoustic_address=str(i % 4000),
                turnaround_delay_ms=12.5,
            )
            for i in range(first, first + n_units)
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
        self.sized.update(zip(sizes, sized, strict=True))
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
        moment = self.now
        self.deployments = _RawRows(
            Deployment(
                unit_id=0,
                site=self.site,
                over_side_at=moment,
                recovered_at=moment,
                planned_days=1,
                planned_interrogations_per_day=500,
                transmit_power_step=1,
                created_by=self.tech,
            ),
            ("unit_id", "over_side_at", "recovered_at", "planned_days"),
        )
        self.records = _RawRows(
            ServiceRecord(
                unit_id=0,
                opened_at=moment,
                technician=self.tech,
                place=self.place,
                created_by=self.tech,
                closed_at=moment,
                closed_by=self.tech,
            ),
            ("id", "unit_id", "opened_at", "closed_at"),
        )
        self.next_record_id = (ServiceRecord.objects.aggregate(last=Max("pk"))["last"] or 0) + 1
        self.readings = _RawRows(
            AnodeReading(record_id=0, position=self.anodes[0], mass_g=1.0),
            ("record_id", "position_id", "mass_g"),
        )

    def _history(self, unit: Transponder, visits: int, span: dt.timedelta) -> None:
        """``visits`` deployments, each followed by a closed bench visit; the last visit, a
        few days ago, a full service. The many rows (deployments, visits, readings) go in as
        plain values (``_RawRows``), the visits with their primary keys chosen here."""
        end = self.now - dt.timedelta(days=3)
        step = span / visits
        rate = self.rng.uniform(0.005, 0.03)  # g per immersed day, about
        planned_days = max(1, round(step.days * 0.8))
        worn = 400.0
        record_id = 0
        for v in range(visits):
            visit_at = end - step * (visits - 1 - v)
            over = visit_at - step * 0.9
            self.deployments.add(unit.pk, over, visit_at - step * 0.1, planned_days)
            record_id = self.next_record_id
            self.next_record_id += 1
            self.records.add(record_id, unit.pk, visit_at, visit_at + dt.timedelta(hours=6))
            worn = max(150.0, worn - rate * step.days * self.rng.uniform(0.8, 1.2))
            for anode in self.anodes:
                self.readings.add(record_id, anode.pk, round(worn, 1))
        self._service(unit, record_id, end)
        self._flush()

    def _service(self, unit: Transponder, record_id: int, opened_at: dt.datetime) -> None:
        day = timezone.localdate(opened_at)
        record = ServiceRecord(pk=record_id)
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
        pending = sum(len(rows) for rows in self.pending.values()) + len(self.readings.rows)
        if not final and pending < 50000:
            return
        # Visits and deployments before the entries that point at them.
        for raw in (self.deployments, self.records, self.readings):
            raw.flush()
        for model, rows in self.pending.items():
            model._default_manager.bulk_create(rows, batch_size=5000)
        self.pending = {}
        if final:
            # The visits' keys were chosen here: move the sequence past them (PostgreSQL).
            with connection.cursor() as cursor:
                for sql in connection.ops.sequence_reset_sql(no_style(), [ServiceRecord]):
                    cursor.execute(sql)


def _fresh(field: Any) -> object:
    """A new default of ``field`` (a function's), prepared for the database."""
    return field.get_db_prep_save(field.get_default(), connection)


class _RawRows:
    """Rows of one model inserted as plain values through the cursor, many at a time: every
    column takes ``template``'s value, prepared for the database once, except ``varying``
    (attribute names, in the order ``add`` takes them), given per row, and a column whose
    default is a function (a unique token, a uuid), which takes a fresh default per row. A
    benchmark fleet of ten years holds a million readings: one model instance each would
    take minutes."""

    def __init__(self, template: Model, varying: tuple[str, ...]) -> None:
        meta = template._meta
        fields = [f for f in meta.concrete_fields if f.attname in varying or not f.primary_key]
        self.columns = [str(f.column) for f in fields]
        where = {name: i for i, name in enumerate(varying)}
        self.plan: list[tuple[int, object]] = [
            (where[f.attname], None)
            if f.attname in where
            else (-2, f)
            if f.has_default() and callable(f.default)
            else (-1, f.get_db_prep_save(f.pre_save(template, add=True), connection))
            for f in fields
        ]
        self.datetimes = {
            where[f.attname]
            for f in fields
            if f.attname in where and f.get_internal_type() == "DateTimeField"
        }
        self.model = type(template)
        self.table = meta.db_table
        self.rows: list[tuple[Any, ...]] = []

    def add(self, *values: Any) -> None:
        self.rows.append(values)

    def flush(self) -> None:
        if not self.rows:
            return
        adapt = connection.ops.adapt_datetimefield_value
        quote = connection.ops.quote_name
        sql = (
            f"INSERT INTO {quote(self.table)} ({', '.join(quote(c) for c in self.columns)}) "
            f"VALUES ({', '.join(['%s'] * len(self.columns))})"
        )
        full: list[tuple[Any, ...]] = []
        for row in self.rows:
            values = [adapt(v) if i in self.datetimes else v for i, v in enumerate(row)]
            full.append(
                tuple(
                    values[i] if i >= 0 else constant if i == -1 else _fresh(constant)
                    for i, constant in self.plan
                )
            )
        if connection.vendor == "postgresql":
            copy_prepared(self.model, self.columns, full)  # one stream, not a million INSERTs
        else:
            with connection.cursor() as cursor:
                for first in range(0, len(full), 10000):
                    cursor.executemany(sql, full[first : first + 10000])
        self.rows = []
