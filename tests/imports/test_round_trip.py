"""An exported history imports back to the same derived state and due rows, and an import
equals the same history typed in through the services."""

import pytest
from django.utils import timezone

from fleet.due.snapshot import rebuild_differences
from fleet.imports.export import export_csv
from fleet.models import ImportBatch, ImportedRow, ServiceRecord
from fleet.services.imports import import_commit
from tests.imports.history import build_history, named_state, wipe_fleet

pytestmark = pytest.mark.django_db

ORDER = ("units", "sites", "deployments", "visits")


def _import_all(files: dict[str, str], by) -> None:
    for kind in ORDER:
        outcome = import_commit(
            kind=kind, data=files[kind].encode(), file_name=f"{kind}.csv", by=by
        )
        assert outcome.ok, outcome.problems


def test_it_imports_an_exported_history_back_to_the_same_derived_state(
    variant, workshop, supervisor
):
    build_history(variant=variant, workshop=workshop, by=supervisor)
    typed = named_state()
    assert len(typed) > 20  # units, anodes, seals and due rows of both units
    files = {kind: export_csv(kind) for kind in ORDER}
    records = ServiceRecord.objects.count()
    wipe_fleet()
    assert named_state() == {}

    _import_all(files, supervisor)

    assert named_state() == typed
    assert ServiceRecord.objects.count() == records
    assert not ServiceRecord.objects.filter(closed_at__isnull=True).exists()
    differences, compared = rebuild_differences(at=timezone.now())
    assert differences == [] and compared > 0
    # A second export of the imported history is the same file.
    assert {kind: export_csv(kind) for kind in ORDER} == files


def test_it_keeps_the_file_and_row_each_imported_record_came_from(variant, workshop, supervisor):
    build_history(variant=variant, workshop=workshop, by=supervisor)
    files = {kind: export_csv(kind) for kind in ORDER}
    wipe_fleet()
    _import_all(files, supervisor)

    batch = ImportBatch.objects.get(kind="visits")
    assert batch.file_name == "visits.csv" and batch.imported_by == supervisor
    record = ServiceRecord.objects.order_by("unit__serial", "opened_at").first()
    link = ImportedRow.objects.get(
        batch=batch, target_id=record.pk, target_type__model="servicerecord"
    )
    assert link.row == 2  # the first data row of the file
    assert record.created_by == supervisor and record.closed_by == supervisor
