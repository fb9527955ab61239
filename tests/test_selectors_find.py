"""The selectors the fleet list, the bench-visit list and the label sheets read through
(fleet/selectors.py): what each returns and how many queries it makes."""

import pytest
from django.utils import timezone

from fleet.models import DueRow, Transponder, UnitHold
from fleet.selectors import label_units, service_records_list, with_next_due
from tests.builders import make_unit
from tests.due.test_engine import t, visit
from tests.test_recall import seal

pytestmark = pytest.mark.django_db


@pytest.fixture
def three(variant, workshop):
    return [
        make_unit(
            serial=f"TX-{i:04d}", acoustic_address=str(100 + i), variant=variant, place=workshop
        )
        for i in range(1, 4)
    ]


def test_next_due_is_the_earliest_dated_row_in_one_query(three, django_assert_num_queries):
    first, second, third = three
    DueRow.objects.filter(unit=first).delete()
    DueRow.objects.filter(unit=second).delete()
    DueRow.objects.filter(unit=third).delete()
    DueRow.objects.bulk_create(
        [
            DueRow(unit=first, kind="seal", key="a", item="Seal 1", due_on=None, basis="-"),
            DueRow(
                unit=first,
                kind="seal",
                key="b",
                item="Seal 2",
                due_on=t(2026, 9, 1).date(),
                basis="-",
            ),
            DueRow(
                unit=first,
                kind="anode",
                key="c",
                item="Anode 1",
                due_on=t(2026, 7, 1).date(),
                basis="-",
            ),
            # Two on one day: the unit page's order decides.
            DueRow(
                unit=second,
                kind="seal",
                key="a",
                item="B item",
                due_on=t(2026, 8, 1).date(),
                basis="-",
                position=2,
            ),
            DueRow(
                unit=second,
                kind="seal",
                key="b",
                item="A item",
                due_on=t(2026, 8, 1).date(),
                basis="-",
                position=1,
            ),
        ]
    )
    with django_assert_num_queries(1):
        rows = list(
            with_next_due(Transponder.objects.order_by("serial")).values_list(
                "serial", "next_due_on", "next_due_item"
            )
        )
    assert rows == [
        ("TX-0001", t(2026, 7, 1).date(), "Anode 1"),
        ("TX-0002", t(2026, 8, 1).date(), "A item"),
        ("TX-0003", None, None),  # no dated row
    ]


def test_the_bench_visit_list_reads_a_page_in_one_query(
    three, technician, django_assert_num_queries
):
    seal1, _ = three[0].variant.seal_positions.order_by("name")
    for i, u in enumerate(three):
        visit(u, technician, t(2026, 1, 5 + i, 9), seal(seal1, "L-1"))
    with django_assert_num_queries(1):
        page = list(service_records_list()[:50])
        lines = [(r.unit.serial, r.technician.username, r.place.name) for r in page]
    assert [serial for serial, _, _ in lines] == ["TX-0003", "TX-0002", "TX-0001"]
    assert timezone.localdate(page[0].opened_at) > timezone.localdate(page[-1].opened_at)


def test_a_label_selection_is_one_query_and_names_what_it_left_out(
    three, django_assert_num_queries
):
    Transponder.objects.filter(serial="TX-0002").update(hold=UnitHold.LOST, hold_reason="adrift")
    with django_assert_num_queries(1):
        chosen = label_units(
            serials=["TX-0001", "TX-0002", "TX-0404"], variant_id=None, include_held=False
        )
        names = [(u.serial, u.variant.name) for u in chosen.units]
    assert names == [("TX-0001", "Test variant 1500")]
    assert (chosen.left_out, chosen.unknown) == (["TX-0002"], ["TX-0404"])
    every = label_units(serials=None, variant_id=None, include_held=True)
    assert [u.serial for u in every.units] == ["TX-0001", "TX-0002", "TX-0003"]
    assert every.left_out == every.unknown == []
