"""``insert_new`` (the bulk import's INSERT, written once) stores the same rows as Django's
``bulk_create`` with the same batch size, in as many statements, and refuses what it refuses.
On PostgreSQL the statement counted for a batch is its key query: the ``COPY`` that sends its
rows goes to the driver's cursor, which Django does not log."""

import datetime as dt

import pytest
from django.db import connection
from django.test.utils import CaptureQueriesContext

from fleet.models import BatteryInstall, ServiceRecord
from fleet.models.records import entry_kinds
from fleet.services.bulk import insert_new
from tests.builders import T0, full_service_entries, make_record

pytestmark = pytest.mark.django_db

SKIP = {"id", "uid", "record", "record_id", "unit_id", "created_at", "updated_at"}


def _entries(record: ServiceRecord) -> list:
    entries = full_service_entries(record.unit, dt.date(2026, 3, 2))
    for entry in entries:
        entry.record = record
        if isinstance(entry, BatteryInstall):
            entry.unit = record.unit
    return entries


def _stored(record: ServiceRecord) -> list[tuple[str, list[dict]]]:
    rows = []
    for kind in entry_kinds():
        values = kind._default_manager.filter(record=record).order_by("pk").values()
        rows.append(
            (kind.__name__, [{k: v for k, v in r.items() if k not in SKIP} for r in values])
        )
    return rows


def _by_kind(entries: list) -> dict[type, list]:
    kinds: dict[type, list] = {}
    for entry in entries:
        kinds.setdefault(type(entry), []).append(entry)
    return kinds


def test_it_stores_what_bulk_create_stores_in_as_many_statements(unit, technician):
    django_record = make_record(unit=unit, by=technician, closed_at=T0, closed_by=technician)
    own_record = make_record(unit=unit, by=technician, closed_at=T0, closed_by=technician)
    django_counts, own_counts = [], []
    for kind, rows in _by_kind(_entries(django_record)).items():
        with CaptureQueriesContext(connection) as queries:
            kind._default_manager.bulk_create(rows, batch_size=1)
        django_counts.append(len(queries))
    for kind, rows in _by_kind(_entries(own_record)).items():
        with CaptureQueriesContext(connection) as queries:
            insert_new(rows, batch_size=1)
        own_counts.append(len(queries))
        assert all(row.pk is not None and not row._state.adding for row in rows)
        assert sorted(r.pk for r in rows) == list(
            kind._default_manager.filter(record=own_record)
            .order_by("pk")
            .values_list("pk", flat=True)
        )

    assert _stored(own_record) == _stored(django_record)
    assert any(rows for _, rows in _stored(own_record))
    assert own_counts == django_counts


def test_records_get_their_keys_and_stamps_in_few_statements(unit, technician, workshop):
    records = [
        ServiceRecord(
            unit=unit,
            opened_at=T0 + dt.timedelta(days=n),
            closed_at=T0 + dt.timedelta(days=n),
            technician=technician,
            place=workshop,
            created_by=technician,
            closed_by=technician,
            summary=f"visit {n}",
        )
        for n in range(7)
    ]
    with CaptureQueriesContext(connection) as queries:
        insert_new(records, batch_size=3)
    assert len(queries) == 3
    stored = {r.pk: r for r in ServiceRecord.objects.filter(unit=unit)}
    assert sorted(stored) == sorted(r.pk for r in records)
    for record in records:
        again = stored[record.pk]
        assert (again.summary, again.opened_at) == (record.summary, record.opened_at)
        assert again.created_at is not None and again.created_at == record.created_at
        assert again.updated_at == record.updated_at


def test_an_unsaved_related_object_is_refused_as_bulk_create_refuses_it(unit, technician):
    record = make_record(unit=unit, by=technician)
    unsaved = ServiceRecord(unit=unit, opened_at=T0, technician=technician)
    entries = _entries(record)
    entries[0].record = unsaved
    with pytest.raises(ValueError, match="unsaved related object 'record'"):
        insert_new([entries[0]], batch_size=10)
    assert not type(entries[0])._default_manager.filter(record=record).exists()


@pytest.mark.parametrize("count", [1, 3])
def test_plain_rows_go_in_as_given(count, unit, technician):
    from django.contrib.contenttypes.models import ContentType
    from django.utils import timezone

    from fleet.models import ImportBatch, ImportedRow
    from fleet.services.bulk import insert_plain

    batch = ImportBatch.objects.create(
        kind="visits",
        file_name="f.csv",
        checksum="c" * 64,
        rows=count,
        imported_by=technician,
        imported_at=timezone.now(),
    )
    type_id = ContentType.objects.get_for_model(ServiceRecord).pk
    rows = [(batch.pk, n + 2, type_id, 2**40 + n) for n in range(count)]
    insert_plain(ImportedRow, ("batch", "row", "target_type", "target_id"), rows)
    stored = ImportedRow.objects.order_by("row").values_list(
        "batch_id", "row", "target_type_id", "target_id"
    )
    assert list(stored) == rows


def test_rows_given_as_values_are_stored_as_bulk_create_stores_them(unit, technician):
    from fleet.models import AnodeReading
    from fleet.services.bulk import insert_rows

    django_record = make_record(unit=unit, by=technician, closed_at=T0, closed_by=technician)
    own_record = make_record(unit=unit, by=technician, closed_at=T0, closed_by=technician)
    positions = list(unit.variant.anode_positions.order_by("pk"))
    given = [
        {"position": positions[0], "mass_g": 310.5, "bond_resistance_ohm": 0.02},
        {"position": positions[1], "remaining_percent": 40.0, "replaced": True, "note": "pitted"},
        {"position": positions[0], "mass_g": 0.0},
    ]
    AnodeReading.objects.bulk_create(
        [AnodeReading(record=django_record, **values) for values in given], batch_size=2
    )
    rows = [
        {"record_id": own_record.pk, "position_id": v["position"].pk}
        | {k: value for k, value in v.items() if k != "position"}
        for v in given
    ]
    keys = insert_rows(AnodeReading, rows, batch_size=2)

    assert keys == list(
        AnodeReading.objects.filter(record=own_record).order_by("pk").values_list("pk", flat=True)
    )
    assert _stored(own_record) == _stored(django_record)
    assert [
        r["mass_g"] for r in AnodeReading.objects.filter(pk__in=keys).order_by("pk").values()
    ] == [
        310.5,
        None,
        0.0,
    ]
    uids = set(AnodeReading.objects.filter(pk__in=keys).values_list("uid", flat=True))
    assert len(uids) == 3 and None not in uids


def test_rows_given_as_values_refuse_a_field_written_on_save(unit, technician):
    from fleet.models import AnodeReading
    from fleet.services.bulk import insert_rows

    record = make_record(unit=unit, by=technician)
    position = unit.variant.anode_positions.first()
    row = {"record_id": record.pk, "position_id": position.pk, "mass_g": 1.0, "photo": "a.jpg"}
    with pytest.raises(ValueError, match="photo is set on save"):
        insert_rows(AnodeReading, [row], batch_size=10)


@pytest.mark.skipif(connection.vendor != "postgresql", reason="keys come from RETURNING on SQLite")
def test_keys_drawn_ahead_serve_later_batches_without_asking_again(unit, technician):
    from fleet.models import AnodeReading
    from fleet.services import bulk

    record = make_record(unit=unit, by=technician)
    position = unit.variant.anode_positions.first()

    def rows(count: int) -> list[dict]:
        return [
            {"record_id": record.pk, "position_id": position.pk, "mass_g": float(n)}
            for n in range(count)
        ]

    with bulk.drawing_keys_ahead():
        with CaptureQueriesContext(connection) as first:
            keys = bulk.insert_rows(AnodeReading, rows(3), batch_size=2)
        with CaptureQueriesContext(connection) as later:
            keys += bulk.insert_rows(AnodeReading, rows(4), batch_size=10)
    outside = bulk.insert_rows(AnodeReading, rows(1), batch_size=10)

    assert [q["sql"].startswith("SELECT nextval") for q in first.captured_queries] == [True]
    assert later.captured_queries == []
    assert keys == sorted(keys) and len(set(keys)) == 7
    stored = AnodeReading.objects.filter(record=record).order_by("pk")
    assert list(stored.values_list("pk", flat=True)) == [*keys, *outside]
    assert outside[0] not in keys
    assert [r.mass_g for r in stored] == [0.0, 1.0, 2.0, 0.0, 1.0, 2.0, 3.0, 0.0]
