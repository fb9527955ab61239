"""``import_csv`` checks, then imports with --commit; ``benchmark_import`` runs on a tiny file
and leaves nothing behind."""

import io

import pytest
from django.core.management import call_command
from django.core.management.base import CommandError

from fleet.models import AnodeReading, ImportBatch, ServiceRecord, Transponder
from tests.imports.files import csv_bytes

pytestmark = pytest.mark.django_db

HEADER = ["serial", "variant", "acoustic_address", "turnaround_delay_ms"]


def test_it_checks_without_writing_then_imports_with_commit(tmp_path, variant, supervisor):
    path = tmp_path / "units.csv"
    path.write_bytes(csv_bytes([HEADER, ["TX-7", variant.name, "17", "12.5"]]))
    out = io.StringIO()

    call_command("import_csv", "units", str(path), user=supervisor.username, stdout=out)
    assert not Transponder.objects.exists()
    assert "1 transponders" in out.getvalue() and "Nothing written" in out.getvalue()

    call_command("import_csv", "units", str(path), user="super", commit=True, stdout=out)
    assert Transponder.objects.get().serial == "TX-7"
    assert ImportBatch.objects.get().imported_by == supervisor


def test_it_lists_every_problem_and_fails(tmp_path, variant, supervisor):
    path = tmp_path / "units.csv"
    path.write_bytes(
        csv_bytes([HEADER, ["TX-7", variant.name, "17", "inf"], ["TX-8", "Nope", "18", "1"]])
    )
    out = io.StringIO()

    with pytest.raises(CommandError, match="2 problem"):
        call_command("import_csv", "units", str(path), user="super", commit=True, stdout=out)

    assert "row 2, turnaround_delay_ms: 'inf' is not a finite number." in out.getvalue()
    assert "row 3, variant: No variant 'Nope' is recorded." in out.getvalue()
    assert not Transponder.objects.exists()


def test_it_benchmarks_a_tiny_import_and_rolls_it_back():
    out = io.StringIO()

    call_command("benchmark_import", rows=10, units=2, stdout=out)

    report = out.getvalue()
    assert "imported 10 readings in 3 closed visits" in report
    assert "rows/s" in report and "peak resident memory" in report and "Rolled back" in report
    assert not AnodeReading.objects.exists() and not ServiceRecord.objects.exists()
