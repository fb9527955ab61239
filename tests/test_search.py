"""The search box's selector (fleet/search.py): what each group finds, matching without regard
to case, the cap and its "more" flag, refused text, and a query count that does not grow."""

import datetime as dt

import pytest

from fleet.search import (
    SEARCH_MAX_CHARS,
    SearchQueryError,
    clean_query,
    search_everything,
)
from tests.builders import make_site, make_unit, make_user
from tests.due.test_engine import t, visit
from tests.test_recall import pack, seal

pytestmark = pytest.mark.django_db


def titles_and_rows(results):
    return {g.title: [str(r) for r in g.rows] for g in results.groups if g.rows}


@pytest.fixture
def fleet(unit, variant, workshop, technician):
    """TX-0001 (address 101) with pack PK-AB77 and seal lot LOT-77; TX-0077 (address 7700);
    a site and a technician with a full name."""
    other = make_unit(serial="TX-0077", acoustic_address="7700", variant=variant, place=workshop)
    seal1, _ = variant.seal_positions.order_by("name")
    visit(
        unit,
        technician,
        t(2026, 1, 5, 9),
        seal(seal1, "LOT-77"),
        pack("PK-AB77", dt.date(2026, 1, 5)),
    )
    make_site(name="North ridge 77")
    robin = make_user("jdoe77", "technician", first_name="Robin", last_name="Marsh")
    visit(other, robin, t(2026, 2, 5, 9), seal(seal1, "LOT-1"))
    make_user("marsh-viewer", "viewer", first_name="Robin", last_name="Marsh")  # no visits
    return unit, other


def test_it_groups_what_matched(fleet):
    results = search_everything("77")
    assert titles_and_rows(results) == {
        "Units by serial": ["TX-0077"],
        "Units by acoustic address": ["TX-0077"],
        "Battery packs by serial": ["pack PK-AB77 (Alkaline Zn/MnO₂)"],
        "Seals by lot": ["Seal 1: NBR (nitrile), cured 2025-10-01"],
        "Sites": ["North ridge 77"],
        "Technicians": ["jdoe77"],
    }
    assert results.found == 6


@pytest.mark.parametrize(
    ("text", "group", "found"),
    [
        ("tx-0001", "Units by serial", ["TX-0001"]),
        ("pk-ab", "Battery packs by serial", ["pack PK-AB77 (Alkaline Zn/MnO₂)"]),
        ("lot-7", "Seals by lot", ["Seal 1: NBR (nitrile), cured 2025-10-01"]),
        ("NORTH RIDGE", "Sites", ["North ridge 77"]),
        ("robin marsh", "Technicians", ["jdoe77"]),  # full name
        ("MARSH", "Technicians", ["jdoe77"]),
        ("TECH", "Technicians", ["tech"]),  # user name
    ],
)
def test_it_matches_without_regard_to_case(fleet, text, group, found):
    assert titles_and_rows(search_everything(text))[group] == found


def test_percent_and_underscore_are_plain_characters(fleet):
    assert search_everything("%").found == 0
    assert search_everything("_").found == 0


def test_it_caps_each_group_and_says_there_are_more(variant, workshop, django_assert_num_queries):
    for i in range(7):
        make_unit(
            serial=f"CAP-{i:02d}", acoustic_address=str(500 + i), variant=variant, place=workshop
        )
    results = search_everything("cap-", limit=5)
    (group,) = [g for g in results.groups if g.rows]
    assert [u.serial for u in group.rows] == ["CAP-00", "CAP-01", "CAP-02", "CAP-03", "CAP-04"]
    assert group.more is True
    exact = search_everything("cap-", limit=7)
    assert [g.more for g in exact.groups if g.rows] == [False]


def test_it_makes_six_queries_however_much_matches(
    fleet, variant, workshop, technician, django_assert_num_queries
):
    with django_assert_num_queries(6):
        small = search_everything("7")
    for i in range(30):
        u = make_unit(
            serial=f"TX-7{i:03d}", acoustic_address=f"7{i}", variant=variant, place=workshop
        )
        visit(u, technician, t(2026, 2, 5, 9), pack(f"PK-7{i}", dt.date(2026, 2, 5)))
    with django_assert_num_queries(6):
        large = search_everything("7")
    assert large.found > small.found


@pytest.mark.parametrize(
    ("raw", "message"),
    [
        ("", "Type a serial"),
        ("   \t ", "Type a serial"),
        ("x" * (SEARCH_MAX_CHARS + 1), f"at most {SEARCH_MAX_CHARS} characters"),
        ("TX\x00-1", "letters, digits"),
    ],
)
def test_it_refuses_text_it_will_not_search_for(raw, message):
    with pytest.raises(SearchQueryError, match=message):
        clean_query(raw)


def test_it_folds_runs_of_spaces():
    assert clean_query("  robin   marsh ") == "robin marsh"
