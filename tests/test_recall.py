"""Recall by seal lot or battery pack serial (fleet/recall.py), on hand-built histories: a seal
stays fitted until a later change at its position, a pack until a visit removes it."""

import datetime as dt

import pytest

from fleet.models import BatteryInstall, PackRemoval, SealChange
from fleet.recall import (
    RECALL_CSV_HEADER,
    MadeWithin,
    RecallPart,
    RecallRow,
    recall,
    recall_csv_rows,
)
from tests.builders import make_unit
from tests.due.test_engine import t, visit

pytestmark = pytest.mark.django_db


def seal(position, lot):
    return SealChange(
        position=position,
        material="NBR",
        cure_date=dt.date(2025, 10, 1),
        lot=lot,
        reason="interval",
    )


def pack(serial, installed_on):
    return BatteryInstall(
        pack_serial=serial,
        chemistry="alkaline",
        nominal_voltage_v=31.5,
        capacity_ah=17.0,
        made_on=dt.date(2025, 12, 1),
        installed_on=installed_on,
        ocv_install_v=33.1,
    )


@pytest.fixture
def seals(unit, technician):
    """Lot L-7 goes on both seal positions in January; in May seal 1 is changed to lot L-8."""
    seal1, seal2 = unit.variant.seal_positions.order_by("name")
    january = visit(unit, technician, t(2026, 1, 5, 9), seal(seal1, "L-7"), seal(seal2, "L-7"))
    may = visit(unit, technician, t(2026, 5, 5, 9), seal(seal1, "L-8"))
    return january, may


def test_it_lists_only_the_seal_still_fitted_when_one_was_replaced(unit, seals):
    january, _ = seals
    result = recall(part=RecallPart.SEAL_LOT, value="L-7")
    assert result.rows == (
        RecallRow(
            serial=unit.serial,
            position="Seal 2",
            part="L-7",
            fitted_on=dt.date(2026, 1, 5),
            fitted_record_id=january.pk,
            still_fitted=True,
            ended_on=None,
            ended_record_id=None,
        ),
    )
    assert result.fitted_now == 1 and result.units == 1


def test_it_lists_the_replaced_seal_too_when_asked_since_a_day_before_its_change(unit, seals):
    january, may = seals
    result = recall(part=RecallPart.SEAL_LOT, value="l-7", since=dt.date(2026, 5, 5))
    assert [(r.position, r.still_fitted, r.ended_on, r.ended_record_id) for r in result.rows] == [
        ("Seal 1", False, dt.date(2026, 5, 5), may.pk),
        ("Seal 2", True, None, None),
    ]
    # Taken out the day before the date asked: not fitted at any time since.
    later = recall(part=RecallPart.SEAL_LOT, value="L-7", since=dt.date(2026, 5, 6))
    assert [r.position for r in later.rows] == ["Seal 2"]


def test_a_replacement_from_the_same_lot_is_fitted_and_the_old_seal_is_not(unit, technician):
    seal1, _ = unit.variant.seal_positions.order_by("name")
    first = visit(unit, technician, t(2026, 1, 5, 9), seal(seal1, "L-7"))
    second = visit(unit, technician, t(2026, 3, 5, 9), seal(seal1, "L-7"))
    rows = recall(part=RecallPart.SEAL_LOT, value="L-7", since=dt.date(2026, 1, 1)).rows
    assert [(r.fitted_record_id, r.still_fitted, r.ended_record_id) for r in rows] == [
        (first.pk, False, second.pk),
        (second.pk, True, None),
    ]


def test_a_seal_changed_on_another_unit_does_not_end_this_units_seal(unit, variant, technician):
    other = make_unit(serial="TX-0002", acoustic_address="102", variant=variant, place=unit.place)
    seal1, _ = variant.seal_positions.order_by("name")
    visit(unit, technician, t(2026, 1, 5, 9), seal(seal1, "L-7"))
    visit(other, technician, t(2026, 2, 5, 9), seal(seal1, "L-9"))
    rows = recall(part=RecallPart.SEAL_LOT, value="L-7").rows
    assert [(r.serial, r.still_fitted) for r in rows] == [(unit.serial, True)]


def test_a_pack_replaced_by_another_is_no_longer_fitted(unit, technician):
    january = visit(unit, technician, t(2026, 1, 5, 9), pack("PK-1", dt.date(2026, 1, 5)))
    may = visit(unit, technician, t(2026, 5, 5, 9), pack("PK-2", dt.date(2026, 5, 5)))
    assert recall(part=RecallPart.PACK_SERIAL, value="PK-1").rows == ()
    since = recall(part=RecallPart.PACK_SERIAL, value="pk-1", since=dt.date(2026, 2, 1)).rows
    assert since == (
        RecallRow(
            serial=unit.serial,
            position="battery bay",
            part="PK-1",
            fitted_on=dt.date(2026, 1, 5),
            fitted_record_id=january.pk,
            still_fitted=False,
            ended_on=dt.date(2026, 5, 5),
            ended_record_id=may.pk,
        ),
    )
    assert [r.still_fitted for r in recall(part=RecallPart.PACK_SERIAL, value="PK-2").rows] == [
        True
    ]


def test_a_pack_taken_out_by_a_removal_entry_is_no_longer_fitted(unit, technician):
    visit(unit, technician, t(2026, 1, 5, 9), pack("PK-1", dt.date(2026, 1, 5)))
    install = BatteryInstall.objects.get(pack_serial="PK-1")
    removed = visit(
        unit,
        technician,
        t(2026, 4, 1, 9),
        PackRemoval(install=install, removed_on=dt.date(2026, 4, 1), ocv_removal_v=30.2),
    )
    assert recall(part=RecallPart.PACK_SERIAL, value="PK-1").rows == ()
    (row,) = recall(part=RecallPart.PACK_SERIAL, value="PK-1", since=dt.date(2026, 4, 1)).rows
    assert (row.ended_on, row.ended_record_id) == (dt.date(2026, 4, 1), removed.pk)
    assert recall(part=RecallPart.PACK_SERIAL, value="PK-1", since=dt.date(2026, 4, 2)).rows == ()


def test_a_recall_is_one_query_however_many_units(
    variant, workshop, technician, django_assert_num_queries
):
    seal1, _ = variant.seal_positions.order_by("name")
    for i in range(6):
        u = make_unit(
            serial=f"TX-{i:04d}", acoustic_address=str(300 + i), variant=variant, place=workshop
        )
        visit(
            u, technician, t(2026, 1, 5, 9), seal(seal1, "L-7"), pack("PK-9", dt.date(2026, 1, 5))
        )
        visit(u, technician, t(2026, 2, 5, 9), seal(seal1, "L-7"))
    with django_assert_num_queries(1):
        seals = recall(part=RecallPart.SEAL_LOT, value="L-7", since=dt.date(2026, 1, 1))
    with django_assert_num_queries(1):
        packs = recall(part=RecallPart.PACK_SERIAL, value="PK-9")
    assert len(seals.rows) == 12 and seals.fitted_now == 6 and seals.units == 6
    assert len(packs.rows) == 6


def test_the_csv_has_iso_dates_and_one_type_per_column(unit, seals):
    january, may = seals
    rows = recall_csv_rows(recall(part=RecallPart.SEAL_LOT, value="L-7", since=dt.date(2026, 1, 1)))
    assert rows == [
        RECALL_CSV_HEADER,
        (unit.serial, "Seal 1", "L-7", "2026-01-05", january.pk, "false", "2026-05-05", may.pk),
        (unit.serial, "Seal 2", "L-7", "2026-01-05", january.pk, "true", "", ""),
    ]


@pytest.mark.parametrize("value", ["", "   ", "x" * 41])
def test_it_refuses_an_empty_or_overlong_value(value):
    with pytest.raises(ValueError, match="1 to 40 characters"):
        recall(part=RecallPart.SEAL_LOT, value=value)


def test_packs_made_in_a_period_are_recalled_by_date_of_manufacture_and_chemistry(
    unit, variant, workshop, technician
):
    # A cell maker recalls by date of manufacture (common practice, no published source).
    other = make_unit(serial="TX-0002", acoustic_address="902", variant=variant, place=workshop)
    early = pack("PK-E", dt.date(2026, 1, 5))
    early.made_on = dt.date(2025, 6, 30)
    visit(unit, technician, t(2026, 1, 5, 9), early)
    lithium = pack("PK-L", dt.date(2026, 1, 6))
    lithium.chemistry, lithium.nominal_voltage_v, lithium.ocv_install_v = "li_socl2", 36.0, 36.6
    visit(other, technician, t(2026, 1, 6, 9), lithium)  # made 2025-12-01, as PK-E's fit

    def recalled(first, last, chemistry=""):
        made = MadeWithin(first, last, chemistry)
        return [r.part for r in recall(part=RecallPart.PACKS_MADE, made=made).rows]

    assert recalled(dt.date(2025, 7, 1), dt.date(2025, 12, 1)) == ["PK-L"]
    assert recalled(dt.date(2025, 6, 30), dt.date(2025, 12, 1)) == ["PK-E", "PK-L"]
    assert recalled(dt.date(2025, 1, 1), dt.date(2025, 12, 31), "alkaline") == ["PK-E"]
    assert recalled(dt.date(2025, 12, 2), dt.date(2026, 1, 31)) == []
    result = recall(
        part=RecallPart.PACKS_MADE, made=MadeWithin(dt.date(2025, 7, 1), dt.date(2025, 12, 1))
    )
    assert result.value == "any chemistry, made 2025-07-01 to 2025-12-01"
    with pytest.raises(ValueError):
        MadeWithin(dt.date(2025, 12, 1), dt.date(2025, 7, 1))
    with pytest.raises(ValueError):
        recall(part=RecallPart.PACKS_MADE)
