"""``unit_reads`` and ``written_join_order``: inside, PostgreSQL plans as they set; outside,
its settings are what they were, after a normal exit and after an error. On SQLite they do
nothing."""

import datetime as dt

import pytest
from django.db import DatabaseError, connection, transaction
from django.test.utils import CaptureQueriesContext
from django.utils import timezone

from fleet.due.engine import loaded_unit
from fleet.models import AnodeReading, ServiceRecord
from fleet.models.session import UNIT_READS, WRITTEN_JOIN_ORDER, unit_reads, written_join_order
from fleet.services.records import service_record_save

pytestmark = pytest.mark.django_db

on_postgresql = pytest.mark.skipif(
    connection.vendor != "postgresql", reason="planner settings are PostgreSQL's"
)


def _settings(of: dict[str, str] = UNIT_READS) -> dict[str, str]:
    names = list(of)
    with connection.cursor() as cursor:
        cursor.execute("SELECT " + ", ".join("current_setting(%s)" for _ in names), names)
        return dict(zip(names, cursor.fetchone(), strict=True))


def _spy_on_settings(of: dict[str, str], wanted) -> tuple[list[tuple[str, dict[str, str]]], object]:
    """An execute wrapper noting, for each statement ``wanted(sql)`` picks, the settings
    ``of`` in force when it ran; and the list it notes them in."""
    seen: list[tuple[str, dict[str, str]]] = []
    busy = False

    def spy(execute, sql, params, many, context):
        nonlocal busy
        if not busy and wanted(sql):
            busy = True
            try:
                seen.append((sql, _settings(of)))
            finally:
                busy = False
        return execute(sql, params, many, context)

    return seen, spy


def _new_visit(unit, technician) -> tuple[ServiceRecord, list[AnodeReading]]:
    record = ServiceRecord(
        unit=unit, opened_at=timezone.now() - dt.timedelta(hours=1), technician=technician,
        place=unit.place,
    )  # fmt: skip
    readings = [AnodeReading(position=p, mass_g=300.0) for p in unit.variant.anode_positions.all()]
    return record, readings


@on_postgresql
def test_inside_the_settings_are_set_and_afterwards_put_back_as_they_were():
    with transaction.atomic():
        # A value other than the default, to see it restored rather than reset.
        with connection.cursor() as cursor:
            cursor.execute("SET LOCAL random_page_cost = 6")
        before = _settings()
        assert before["random_page_cost"] == "6"
        with unit_reads():
            assert _settings() == UNIT_READS
            with unit_reads():  # nested: the inner one puts back the outer one's values
                assert _settings() == UNIT_READS
            assert _settings() == UNIT_READS
        assert _settings() == before


@on_postgresql
def test_an_error_inside_leaves_the_settings_of_the_savepoint_it_rolled_back_to():
    with transaction.atomic():
        before = _settings()
        with pytest.raises(ZeroDivisionError), transaction.atomic():
            with unit_reads():
                assert _settings() == UNIT_READS
                raise ZeroDivisionError
        assert _settings() == before


@on_postgresql
@pytest.mark.django_db(transaction=True)
def test_outside_a_transaction_nothing_is_sent():
    assert not connection.in_atomic_block
    with CaptureQueriesContext(connection) as captured, unit_reads():
        pass
    assert len(captured) == 0


@pytest.mark.skipif(connection.vendor != "sqlite", reason="SQLite only")
def test_on_sqlite_nothing_is_sent():
    with transaction.atomic(), CaptureQueriesContext(connection) as captured, unit_reads():
        pass
    assert len(captured) == 0


@on_postgresql
def test_a_saves_refresh_reads_under_the_settings_and_the_caller_keeps_its_own(unit, technician):
    """The state read with its nine joined rows runs under the settings; the caller's
    transaction has its own settings again when the save returns."""
    seen, spy = _spy_on_settings(
        UNIT_READS,
        lambda sql: sql.startswith('SELECT "fleet_unitstate"') and sql.count(" JOIN ") >= 9,
    )
    record, readings = _new_visit(unit, technician)
    with transaction.atomic():
        before = _settings()
        with connection.execute_wrapper(spy):
            service_record_save(record=record, entries=readings, by=technician)
        assert _settings() == before
    assert [settings["random_page_cost"] for _, settings in seen] == ["1.1"]


@on_postgresql
def test_an_error_the_caller_catches_leaves_the_settings_put_back():
    """A ``DoesNotExist`` raised inside and caught in the same transaction: the settings are
    put back, not left for the rest of the transaction."""
    with transaction.atomic():
        before = _settings(WRITTEN_JOIN_ORDER)
        with pytest.raises(ServiceRecord.DoesNotExist), written_join_order():
            assert _settings(WRITTEN_JOIN_ORDER) == WRITTEN_JOIN_ORDER
            ServiceRecord.objects.get(pk=-1)
        assert _settings(WRITTEN_JOIN_ORDER) == before
        assert before != WRITTEN_JOIN_ORDER


@on_postgresql
def test_a_failed_statement_inside_leaves_the_putting_back_to_the_rollback():
    """After a statement failed, PostgreSQL takes no more in the transaction: the error that
    comes out is the statement's, and the savepoint's rollback puts the settings back."""
    with transaction.atomic():
        before = _settings(WRITTEN_JOIN_ORDER)
        with pytest.raises(DatabaseError) as raised, transaction.atomic():
            with written_join_order(), connection.cursor() as cursor:
                cursor.execute("SELECT 1 / 0")
        assert "division by zero" in str(raised.value)
        assert _settings(WRITTEN_JOIN_ORDER) == before


@on_postgresql
def test_the_wide_reads_of_one_unit_are_planned_in_the_written_order(unit, technician):
    """A save's state read with its nine joined rows, and the engine's read of one unit with
    its twelve, run with ``join_collapse_limit`` 1 (with the prefetches that go with them, of
    one table each); the reads that join to filter, such as the unit's history through its
    visits, do not."""
    noted, spy = _spy_on_settings(
        WRITTEN_JOIN_ORDER, lambda sql: sql.startswith("SELECT") and "set_config" not in sql
    )
    record, readings = _new_visit(unit, technician)
    with transaction.atomic(), connection.execute_wrapper(spy):
        service_record_save(record=record, entries=readings, by=technician)
        loaded = loaded_unit(unit.pk)
    assert loaded.pk == unit.pk and loaded.state.as_of == record.opened_at
    seen = [(sql, settings["join_collapse_limit"]) for sql, settings in noted]
    wide = [limit for sql, limit in seen if sql.count(" JOIN ") >= 9]
    assert wide == ["1", "1"]
    written = [sql for sql, limit in seen if limit == "1"]
    assert all(sql.count(" JOIN ") >= 9 or sql.count(" JOIN ") <= 1 for sql in written)
    by_visit = [limit for sql, limit in seen if 'JOIN "fleet_servicerecord"' in sql]
    assert by_visit and set(by_visit) == {"8"}
