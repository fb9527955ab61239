"""``fleet.models.bulk`` inserts derived rows without ``bulk_create``: what it stores must be
what ``bulk_create`` stores, value for value (date-times, dates, floats, booleans, texts,
nulls), on SQLite (``executemany``) and on PostgreSQL (``COPY``)."""

import random

import pytest
from django.db import connection, transaction

from fleet.models import AnodeState, DueRow, SealState, UnitState
from fleet.models.bulk import field_names, insert_instances, insert_values, update_instances
from tests.due.test_bulk_rebuild import _random_fleet

pytestmark = pytest.mark.django_db

MODELS = (UnitState, AnodeState, SealState, DueRow)


def _stored(model) -> list[tuple[object, ...]]:
    """Each row as read (exact Python values) and as the database keeps it (as text: on
    SQLite, a date-time's stored text, which a read would parse either way)."""
    names = field_names(model)
    qn = connection.ops.quote_name
    columns = [qn(model._meta.get_field(n.removesuffix("_id")).column) for n in names]
    texts = ", ".join(f"CAST({c} AS TEXT)" for c in columns)
    with connection.cursor() as cursor:
        cursor.execute(f"SELECT {texts} FROM {qn(model._meta.db_table)}")
        as_text = sorted(cursor.fetchall(), key=repr)
    return [*sorted(model.objects.values_list(*names), key=repr), *as_text]


def _written_again(model, write) -> list[tuple[object, ...]]:
    """The model's rows deleted and written again by ``write(instances)``, as stored."""
    names = field_names(model)
    rows = model.objects.values_list(*names)
    instances = [model(**dict(zip(names, row, strict=True))) for row in rows]
    with transaction.atomic():
        model.objects.all().delete()
        write(instances)
    return _stored(model)


@pytest.mark.parametrize("model", MODELS, ids=lambda m: m.__name__)
def test_inserted_rows_are_stored_exactly_as_bulk_create_stores_them(
    model, variant, site, technician, workshop
):
    _random_fleet(random.Random(17), variant, site, technician, workshop, units=5)
    original = _stored(model)
    assert original, "the random fleet left no rows to write again"
    by_orm = _written_again(model, model.objects.bulk_create)
    by_insert = _written_again(model, insert_instances)
    assert by_orm == original
    assert by_insert == original
    # Every kind of value went through: a null, and for a date-time its microseconds.
    assert any(v is None for row in original for v in row) or model is DueRow


def test_insert_values_takes_plain_rows_in_the_order_of_the_names(
    variant, site, technician, workshop
):
    _random_fleet(random.Random(23), variant, site, technician, workshop, units=3)
    names = ("unit_id", "position", "kind", "key", "item", "due_on", "basis", "flags", "failed")
    rows = list(DueRow.objects.values_list(*names))
    DueRow.objects.all().delete()
    assert insert_values(DueRow, names, reversed(rows)) == len(rows)
    assert sorted(DueRow.objects.values_list(*names)) == sorted(rows)
    assert insert_values(DueRow, names, []) == 0


@pytest.mark.parametrize("model", (UnitState, AnodeState, SealState), ids=lambda m: m.__name__)
def test_updated_rows_are_stored_exactly_as_bulk_update_stores_them(
    model, variant, site, technician, workshop
):
    """Every row's every field changed to another row's values (nulls, microseconds, floats
    and all), once by ``bulk_update`` and once by ``update_instances``: the same table."""
    _random_fleet(random.Random(23), variant, site, technician, workshop, units=5)
    names = [n for n in field_names(model) if n not in ("unit_id", "position_id")]
    rows = list(model.objects.order_by("pk"))
    assert len(rows) > 1
    values = [[getattr(r, n) for n in names] for r in rows]
    shifted = values[1:] + values[:1]

    def rewritten(write) -> list[tuple[object, ...]]:
        instances = list(model.objects.order_by("pk"))
        for instance, new in zip(instances, shifted, strict=True):
            for name, value in zip(names, new, strict=True):
                setattr(instance, name, value)
        with transaction.atomic():
            sid = transaction.savepoint()
            write(instances, names)
            stored = _stored(model)
            transaction.savepoint_rollback(sid)
        return stored

    by_orm = rewritten(lambda objs, fields: model.objects.bulk_update(objs, fields))
    by_update = rewritten(update_instances)
    assert by_update == by_orm
    assert by_orm != _stored(model), "the shifted values changed nothing"
    assert update_instances([], names) == 0
