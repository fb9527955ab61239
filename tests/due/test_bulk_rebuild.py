"""``rebuild_state`` reads the inputs of a chunk of units at once and derives each unit with the
derivation a write runs: the rows it writes equal, field for field and float for float, the
rows the per-unit refresh writes for each unit alone, on random fleets; and it reads in a
number of queries that does not grow with the units or their histories."""

import datetime as dt
import random

import pytest
from django.db import connection, transaction
from django.test.utils import CaptureQueriesContext
from django.utils import timezone

from fleet.due import store
from fleet.due.store import rebuild_all
from fleet.models import (
    AnodeReading,
    DueRow,
    HousingOpening,
    ReleaseTest,
    SealChange,
    SensorCheck,
    Transponder,
)
from tests.builders import full_service_entries, make_unit, pressure_test
from tests.due.test_engine import deploy, t, visit
from tests.due.test_one_derivation import _pack
from tests.due.test_state_forward import _exact

pytestmark = pytest.mark.django_db


def _entries(rng: random.Random, unit, day: dt.date) -> list:
    variant = unit.variant
    anodes = list(variant.anode_positions.all())
    kind = rng.choice(["anode", "replace", "seal", "open", "test", "pack", "full", "checks"])
    if kind == "full":
        return full_service_entries(unit, day, limit_switch_ok=rng.random() < 0.8)
    reading = AnodeReading(
        position=rng.choice(anodes),
        mass_g=round(rng.uniform(150.0, 400.0), 1),
        bond_resistance_ohm=rng.choice([None, 0.01, 0.4]),
    )
    reading.replaced = kind == "replace"
    entries: list = [reading]
    if kind == "seal":
        seal = rng.choice(list(variant.seal_positions.all()))
        entries.append(SealChange(position=seal, material="NBR", cure_date=day, reason="wear"))
    elif kind == "open":
        moment = timezone.make_aware(dt.datetime.combine(day, dt.time(rng.choice([9, 17]))))
        entries.append(
            HousingOpening(
                opened_at=moment,
                closed_at=moment + dt.timedelta(hours=1),
                vented_before_opening=True,
                reason="look",
            )
        )
    elif kind == "test":
        entries.append(pressure_test(day, hold_ended_at=rng.choice([None, dt.time(12)])))
    elif kind == "pack":
        entries.append(_pack(day, f"PK-{unit.serial}-{day.isoformat()}"))
    elif kind == "checks":
        entries.append(
            ReleaseTest(tested_on=day, kind="bench", seconds_to_release=5, motor_current_a=1.0,
                        limit_switch_ok=True, acoustic_command_ok=rng.random() < 0.8)
        )  # fmt: skip
        entries.append(
            SensorCheck(checked_on=day, sensor="pressure", reference_value=1000.0,
                        unit_reading=1000.0 + rng.uniform(-3, 3))
        )  # fmt: skip
    return entries


def _random_fleet(
    rng: random.Random, variant, site, technician, workshop, units: int, first: int = 0
) -> None:
    """``units`` units, each with its own random run of deployments and bench visits written
    through the services (some visits put back before later ones); the last may stay in the
    water, the first has no records at all."""
    for n in range(first, first + units):
        unit = make_unit(
            serial=f"RB-{n:04d}", acoustic_address=str(700 + n), variant=variant, place=workshop
        )
        if n == first:
            continue
        clock = t(2023, 1, 2) + dt.timedelta(days=rng.randrange(30))
        for _ in range(rng.randrange(2, 7)):
            if rng.random() < 0.5:
                days = rng.randrange(3, 90)
                open_end = n == first + units - 1 and rng.random() < 0.5
                end = None if open_end else clock + dt.timedelta(days=days)
                deploy(unit, site, technician, clock, end)
                if open_end:
                    break
                clock += dt.timedelta(days=days + 1)
            back = rng.choice([0, 0, 0, rng.randrange(1, 120)])
            when = clock - dt.timedelta(days=back, hours=3)
            try:
                visit(unit, technician, when, *_entries(rng, unit, when.date()))
            except Exception:  # noqa: BLE001 - a write the rules refuse is simply skipped
                continue
            clock = max(clock, when) + dt.timedelta(days=rng.randrange(1, 20))


def _exact_with_due() -> dict:
    """``_exact``, and every stored due row with every field as stored."""
    rows = _exact()
    for row in DueRow.objects.values():
        row.pop("id")
        rows[("due", row.pop("unit_id"), row.pop("key"))] = row
    return rows


def _each_alone() -> dict:
    """Every unit's rows derived again by the per-unit refresh, one unit at a time: its
    state rows, and its due rows evaluated from them as read back after their write."""
    with transaction.atomic():
        for unit in Transponder.objects.select_related("variant").order_by("pk"):
            store.refresh_unit(unit, at=timezone.now())
        rows = _exact_with_due()
        transaction.set_rollback(True)
    return rows


def _in_bulk(chunk: int, monkeypatch) -> dict:
    monkeypatch.setattr(store, "REBUILD_CHUNK", chunk)
    with transaction.atomic():
        rebuild_all(at=timezone.now())
        rows = _exact_with_due()
        transaction.set_rollback(True)
    return rows


@pytest.mark.parametrize("seed", [3, 11, 29])
def test_the_bulk_rebuild_writes_exactly_the_rows_of_each_unit_refreshed_alone(
    variant, site, technician, workshop, monkeypatch, seed
):
    rng = random.Random(seed)
    _random_fleet(rng, variant, site, technician, workshop, units=7)
    alone = _each_alone()
    assert sum(1 for key in alone if key[0] == "unit") == 7
    assert sum(1 for key in alone if key[0] == "due") >= 7 * 5
    # Chunks of 3 split the fleet unevenly; one chunk holds every unit. The rebuild
    # evaluates each unit's due rows from its state rows as derived, not read back.
    assert _in_bulk(3, monkeypatch) == alone
    assert _in_bulk(250, monkeypatch) == alone
    # And the rows the writes left (some brought forward at a save) equal them too.
    assert _exact_with_due() == alone


def test_the_rebuild_reads_in_the_same_number_of_queries_for_more_units_and_longer_histories(
    variant, site, technician, workshop
):
    def queries() -> int:
        """The reads (the writes go in batches of rows: SQLite takes 999 values at most)."""
        with CaptureQueriesContext(connection) as captured:
            rebuild_all(at=timezone.now())
        return sum(1 for q in captured.captured_queries if q["sql"].startswith("SELECT"))

    _random_fleet(random.Random(5), variant, site, technician, workshop, units=3)
    few = queries()
    _random_fleet(random.Random(6), variant, site, technician, workshop, units=12, first=3)
    assert Transponder.objects.count() == 15
    assert queries() == few
