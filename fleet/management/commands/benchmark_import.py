"""Time a large import: ``manage.py benchmark_import [--rows 100000] [--keep]``.

Builds a variant with four anode positions, a place, a user and ``--units`` units (serials
``BENCH-…``), writes a visits file of ``--rows`` anode readings (four per visit, a unit's
visits a week apart, in date order), then imports it with ``import_commit``, the path the
import page takes, and reports the time (with this process's CPU time: on a busy machine the
difference is waiting, for the CPU or the database server), rows per second and the peak memory
of the import:
the process's peak resident size above its size before (Linux; else ``getrusage``), and with
``--tracemalloc`` Python's own peak allocation (slower: tracemalloc hooks every allocation).

Everything it creates is rolled back at the end unless ``--keep``: run it on the configured
database (SQLite or PostgreSQL via DATABASE_URL) without leaving anything behind.
"""

import csv
import datetime as dt
import io
import time
import tracemalloc
from typing import Any

from django.contrib.auth import get_user_model
from django.core.management.base import BaseCommand, CommandError, CommandParser
from django.db import transaction
from django.test.utils import override_settings

from fleet.management.commands.benchmark_upload import _peak, _start_peak
from fleet.models import (
    AnodePosition,
    AnodeReading,
    Place,
    ReplyChargeStep,
    ServiceRecord,
    Transponder,
    Variant,
)
from fleet.services.imports import ImportRefusedError, import_commit

POSITIONS = 4
NEW_MASS_G = 800.0
SERIAL_PREFIX = "BENCH-"


class _RollbackError(Exception):
    """Raised to undo the benchmark's rows at the end."""


def _reference(units: int) -> tuple[Variant, Place, list[str]]:
    variant = Variant(
        name="Benchmark variant 1500",
        depth_rating_m=1500.0,
        housing_alloy="duplex",
        release_fitted=False,
        allowed_chemistries=["li_socl2"],
        cells_in_series=10,
        parallel_strings=2,
        listen_current_a=0.0002,
        mass_in_air_kg=40.0,
        displaced_volume_m3=0.05,
    )
    variant.full_clean()
    variant.save()
    for n in range(POSITIONS):
        AnodePosition.objects.create(
            variant=variant,
            name=f"Anode {n + 1}",
            new_net_mass_g=NEW_MASS_G,
            design_current_a=0.004,
        )
    ReplyChargeStep.objects.create(variant=variant, step=1, charge_per_reply_as=0.005)
    place = Place.objects.create(name="Benchmark bench", kind=Place.Kind.WORKSHOP)
    serials = [f"{SERIAL_PREFIX}{n:05d}" for n in range(units)]
    Transponder.objects.bulk_create(
        Transponder(serial=s, variant=variant, acoustic_address=f"B{n}", turnaround_delay_ms=10.0)
        for n, s in enumerate(serials)
    )
    return variant, place, serials


def visits_file(serials: list[str], rows: int, place: str, user: str) -> bytes:
    """``rows`` anode readings, ``POSITIONS`` a visit, spread over the units in turn."""
    visits = -(-rows // POSITIONS)
    per_unit = -(-visits // len(serials))
    first = dt.date(2015, 1, 5)
    buffer = io.StringIO()
    writer = csv.writer(buffer, lineterminator="\n")
    writer.writerow(
        ["unit", "visit_opened_at", "technician", "place", "entry", "position", "mass_g"]
    )
    written = 0
    for n in range(visits):
        serial, k = serials[n // per_unit], n % per_unit
        day = (first + dt.timedelta(days=7 * k)).isoformat()
        mass = f"{NEW_MASS_G - 0.05 * k:g}"
        for p in range(min(POSITIONS, rows - written)):
            writer.writerow([serial, day, user, place, "anode_reading", f"Anode {p + 1}", mass])
            written += 1
    return buffer.getvalue().encode()


class Command(BaseCommand):
    help = "Import a generated file of anode readings and report time and peak memory."

    def add_arguments(self, parser: CommandParser) -> None:
        parser.add_argument("--rows", type=int, default=100_000)
        parser.add_argument("--units", type=int, default=250)
        parser.add_argument("--keep", action="store_true", help="keep what it imported")
        parser.add_argument("--tracemalloc", action="store_true")

    def handle(self, *args: Any, **options: Any) -> None:
        rows, units = options["rows"], options["units"]
        if rows < 1 or units < 1:
            raise CommandError("--rows and --units must be at least 1.")
        if Transponder.objects.filter(serial__startswith=SERIAL_PREFIX).exists():
            raise CommandError(f"Units {SERIAL_PREFIX}… exist already; remove them first.")
        try:
            # As production runs: no query log (DEBUG would format every statement).
            with override_settings(DEBUG=False), transaction.atomic():
                self._run(rows, min(units, -(-rows // POSITIONS)), options)
                if not options["keep"]:
                    raise _RollbackError
        except _RollbackError:
            self.stdout.write("Rolled back: nothing of the benchmark is kept.")

    def _run(self, rows: int, units: int, options: dict[str, Any]) -> None:
        user, _ = get_user_model().objects.get_or_create(username="benchmark.importer")
        _, place, serials = _reference(units)
        data = visits_file(serials, rows, place.name, user.username)
        self.stdout.write(f"{rows} anode readings for {units} units, {len(data) / 2**20:.1f} MiB")
        if options["tracemalloc"]:
            tracemalloc.start()
        base = _start_peak()
        start, cpu_start = time.perf_counter(), time.process_time()
        try:
            outcome = import_commit(kind="visits", data=data, file_name="bench.csv", by=user)
        except ImportRefusedError as refused:
            for problem in refused.outcome.problems[:10]:
                self.stdout.write(f"row {problem.row}, {problem.column}: {problem.message}")
            raise CommandError("The generated file was refused.") from refused
        seconds = time.perf_counter() - start
        cpu_seconds = time.process_time() - cpu_start
        peak = _peak()
        written = AnodeReading.objects.filter(record__unit__serial__in=serials).count()
        visits = ServiceRecord.objects.filter(unit__serial__in=serials).count()
        self.stdout.write(
            f"imported {written} readings in {visits} closed visits in {seconds:.1f} s "
            f"({written / seconds:,.0f} rows/s; {cpu_seconds:.1f} s of CPU in this process)"
        )
        self.stdout.write(
            f"peak resident memory {peak / 2**20:.0f} MiB, "
            f"{(peak - base) / 2**20:.0f} MiB above the {base / 2**20:.0f} MiB before"
        )
        if options["tracemalloc"]:
            _, traced = tracemalloc.get_traced_memory()
            tracemalloc.stop()
            self.stdout.write(f"tracemalloc peak {traced / 2**20:.0f} MiB")
        if written != rows or outcome.counts.get("anode readings") != rows:
            raise CommandError(f"Expected {rows} readings, found {written}.")
