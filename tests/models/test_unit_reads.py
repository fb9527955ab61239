"""``unit_reads``: inside, PostgreSQL plans for a few rows by key; outside, its settings are
what they were, after a normal exit and after an error. On SQLite it does nothing."""

import datetime as dt

import pytest
from django.db import connection, transaction
from django.test.utils import CaptureQueriesContext
from django.utils import timezone

from fleet.models import AnodeReading, ServiceRecord
from fleet.models.session import UNIT_READS, unit_reads
from fleet.services.records import service_record_save

pytestmark = pytest.mark.django_db

on_postgresql = pytest.mark.skipif(
    connection.vendor != "postgresql", reason="planner settings are PostgreSQL's"
)


def _settings() -> dict[str, str]:
    names = list(UNIT_READS)
    with connection.cursor() as cursor:
        cursor.execute("SELECT " + ", ".join("current_setting(%s)" for _ in names), names)
        return dict(zip(names, cursor.fetchone(), strict=True))


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
    seen: list[str] = []
    busy = False

    def spy(execute, sql, params, many, context):
        nonlocal busy
        if not busy and sql.startswith('SELECT "fleet_unitstate"') and sql.count(" JOIN ") >= 9:
            busy = True
            try:
                seen.append(_settings()["random_page_cost"])
            finally:
                busy = False
        return execute(sql, params, many, context)

    record = ServiceRecord(
        unit=unit, opened_at=timezone.now() - dt.timedelta(hours=1), technician=technician,
        place=unit.place,
    )  # fmt: skip
    readings = [AnodeReading(position=p, mass_g=300.0) for p in unit.variant.anode_positions.all()]
    with transaction.atomic():
        before = _settings()
        with connection.execute_wrapper(spy):
            service_record_save(record=record, entries=readings, by=technician)
        assert _settings() == before
    assert seen == ["1.1"]
