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
from fleet.models.session import (
    UNIT_READS,
    UNIT_WRITE_READS,
    WRITTEN_JOIN_ORDER,
    planner_settings,
    reading_one_unit,
    reading_one_unit_in_written_order,
    unit_reads,
    written_join_order,
)
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
def test_inside_a_block_that_set_them_all_nothing_is_sent():
    with transaction.atomic():
        before = _settings(UNIT_WRITE_READS)
        with planner_settings(UNIT_WRITE_READS):
            with CaptureQueriesContext(connection) as captured:
                with unit_reads(), written_join_order():
                    pass
            assert len(captured) == 0
            with CaptureQueriesContext(connection) as captured:
                with planner_settings({"random_page_cost": "2"}):
                    assert _settings(UNIT_WRITE_READS)["random_page_cost"] == "2"
            assert len(captured) == 3  # set, read, put back
            assert _settings(UNIT_WRITE_READS) == UNIT_WRITE_READS
        assert _settings(UNIT_WRITE_READS) == before


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


@on_postgresql
@pytest.mark.django_db(transaction=True)
@pytest.mark.parametrize(
    ("page_of", "values"),
    [
        (reading_one_unit, UNIT_READS),
        (reading_one_unit_in_written_order, {**UNIT_READS, **WRITTEN_JOIN_ORDER}),
    ],
)
def test_a_page_in_a_transaction_of_its_own_leaves_the_putting_back_to_its_commit(page_of, values):
    seen = []

    @page_of
    def page():
        seen.append(_settings(values))

    before = _settings(values)
    assert not connection.in_atomic_block
    with CaptureQueriesContext(connection) as captured:
        page()
    assert seen == [values]
    assert [q["sql"] for q in captured if "set_config" in q["sql"]] == [
        "SELECT " + ", ".join(f"set_config('{n}', '{v}', true)" for n, v in values.items())
    ]
    assert captured[-1]["sql"] == "COMMIT"
    assert _settings(values) == before


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
    its twelve, run with ``join_collapse_limit`` 1. A save's refresh sets it once for all its
    reads (``UNIT_WRITE_READS``): besides the wide ones, the unit with its variant and place
    by key, and reads that join two tables at most and have no subquery to pull up (the
    trap the module's note tells of)."""
    noted, spy = _spy_on_settings(
        WRITTEN_JOIN_ORDER, lambda sql: sql.startswith("SELECT") and "set_config" not in sql
    )
    record, readings = _new_visit(unit, technician)
    with transaction.atomic(), connection.execute_wrapper(spy):
        before = _settings(WRITTEN_JOIN_ORDER)
        service_record_save(record=record, entries=readings, by=technician)
        loaded = loaded_unit(unit.pk)
        assert _settings(WRITTEN_JOIN_ORDER) == before
    assert loaded.pk == unit.pk and loaded.state.as_of == record.opened_at
    seen = [(sql, settings["join_collapse_limit"]) for sql, settings in noted]
    wide = [limit for sql, limit in seen if sql.count(" JOIN ") >= 9]
    assert wide == ["1", "1"]
    written = [sql for sql, limit in seen if limit == "1"]
    assert 'JOIN "fleet_servicerecord"' in " ".join(written)  # the history reads among them
    for sql in written:
        if sql.count(" JOIN ") >= 9:
            continue
        if sql.endswith('FOR UPDATE OF "fleet_transponder"'):
            assert sql.count(" JOIN ") == 2  # the locked unit with its variant and place
            continue
        assert sql.count(" JOIN ") <= 1, sql
        assert "IN (SELECT" not in sql, sql


@on_postgresql
def test_a_read_that_joins_two_tables_is_planned_alike_in_the_written_order(unit, technician):
    """``join_collapse_limit`` fixes the order of three or more joined tables; of two,
    PostgreSQL still chooses which one drives, whichever the query names first. The same
    plan either way."""
    record, readings = _new_visit(unit, technician)
    service_record_save(record=record, entries=readings, by=technician)
    position = readings[0].position_id
    history = AnodeReading.objects.filter(record__unit=unit, position_id=position).order_by(
        "record__opened_at"
    )
    sql, params = history.query.sql_with_params()
    assert sql.index('"fleet_anodereading"') < sql.index('JOIN "fleet_servicerecord"')
    plans = []
    with transaction.atomic():
        for settings in ({"join_collapse_limit": "8"}, WRITTEN_JOIN_ORDER):
            with planner_settings(settings), connection.cursor() as cursor:
                cursor.execute("EXPLAIN (COSTS OFF) " + sql, params)
                plans.append([row[0] for row in cursor.fetchall()])
    assert plans[0] == plans[1]
