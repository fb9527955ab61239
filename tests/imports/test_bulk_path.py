"""The import writes a unit's visits in bulk; the derived state and due rows it leaves are
exactly those that writing the same file's visits one at a time through the bench page's
services (``service_record_save``, then ``service_record_close``) leaves."""

import pytest
from django.utils import timezone

from fleet.due.snapshot import rebuild_differences
from fleet.imports.export import export_csv
from fleet.models import ImportBatch, ImportedRow, ServiceRecord
from fleet.models.records import EntryValues
from fleet.services import imports as import_service
from fleet.services import records as record_service
from fleet.services.imports import import_commit
from fleet.services.records import service_record_close, service_record_save
from tests.imports.history import build_history, named_state, wipe_fleet

pytestmark = pytest.mark.django_db

ORDER = ("units", "sites", "deployments", "visits")


def _import_all(files: dict[str, str], by) -> None:
    for kind in ORDER:
        outcome = import_commit(
            kind=kind, data=files[kind].encode(), file_name=f"{kind}.csv", by=by
        )
        assert outcome.ok, outcome.problems


def _one_visit_at_a_time(*, unit_id, visits, by) -> None:
    """The bench page's way: save each visit with its entries, then close it."""
    for visit in visits:
        # Entries held as plain values (anode readings) become the models the page saves.
        entries = [e.instance() if isinstance(e, EntryValues) else e for e in visit.entries]
        for entry in entries:
            # A pack taken out that an earlier visit of the file fitted: saved by now.
            install = getattr(entry, "install", None)
            if install is not None and entry.install_id is None:
                entry.install_id = install.pk
        record = service_record_save(record=visit.record, entries=entries, by=by)
        service_record_close(record=record, by=by, at=visit.closed_at)
        for held, saved in zip(visit.entries, entries, strict=True):
            held.pk = saved.pk


def test_it_derives_the_same_state_in_bulk_as_through_the_services_visit_by_visit(
    variant, workshop, supervisor, monkeypatch
):
    build_history(variant=variant, workshop=workshop, by=supervisor)
    files = {kind: export_csv(kind) for kind in ORDER}
    wipe_fleet()

    # Bulk, in INSERTs of two rows, so that a unit's visits span several statements.
    monkeypatch.setattr(record_service, "IMPORT_BATCH", 2)
    _import_all(files, supervisor)
    bulk = named_state()
    bulk_export = export_csv("visits")
    records = ServiceRecord.objects.count()
    links = ImportedRow.objects.count()
    assert len(bulk) > 20 and records == 6

    wipe_fleet()
    ImportBatch.objects.all().delete()
    monkeypatch.setattr(import_service, "service_records_import", _one_visit_at_a_time)
    _import_all(files, supervisor)

    assert named_state() == bulk
    assert export_csv("visits") == bulk_export
    assert ServiceRecord.objects.count() == records
    assert ImportedRow.objects.count() == links
    differences, compared = rebuild_differences(at=timezone.now())
    assert differences == [] and compared > 0
