"""The search box, the recall page, the bench-visit list and the fleet list's next-due column,
as each persona: status, key content, bad input answered with a message, query counts."""

import datetime as dt

import pytest
from django.db import connection
from django.db.models import Min
from django.test.utils import CaptureQueriesContext
from django.urls import reverse
from django.utils import timezone

from fleet.models import DueRow
from tests.builders import make_site, make_unit, make_user, serviced_unit
from tests.due.test_engine import t, visit
from tests.test_recall import pack, seal

pytestmark = pytest.mark.django_db


def _recently(days: int = 10) -> dt.date:
    return timezone.localdate() - dt.timedelta(days=days)


def queries_for(client, url, params=None) -> int:
    with CaptureQueriesContext(connection) as captured:
        assert client.get(url, params or {}).status_code == 200
    return len(captured)


# The search box


@pytest.mark.parametrize("persona", ["as_viewer", "as_technician", "as_supervisor"])
def test_every_role_searches(request, persona, unit):
    response = request.getfixturevalue(persona).get("/search/", {"q": "tx-0001"})
    assert response.status_code == 200
    assert f'href="{unit.get_absolute_url()}"'.encode() in response.content


def test_a_user_with_no_role_cannot_search(as_outsider, unit):
    assert as_outsider.get("/search/", {"q": "TX"}).status_code == 403


def test_the_search_box_is_in_the_navigation(as_viewer):
    body = as_viewer.get("/units/").content.decode()
    assert f'action="{reverse("search")}"' in body and 'name="q"' in body


def test_search_results_link_to_the_unit_the_visit_and_the_site(as_viewer, unit, technician):
    seal1, _ = unit.variant.seal_positions.order_by("name")
    record = visit(
        unit, technician, t(2026, 1, 5, 9), seal(seal1, "QX-12"), pack("QX-99", dt.date(2026, 1, 5))
    )
    site = make_site(name="Shelf QX")
    body = as_viewer.get("/search/", {"q": "qx"}).content.decode()
    assert "Battery packs by serial" in body and "Seals by lot" in body and "Sites" in body
    assert f'href="{record.get_absolute_url()}"' in body
    assert f'href="{site.get_absolute_url()}"' in body
    assert f'href="{unit.get_absolute_url()}"' in body
    assert "?part=seal_lot&amp;value=QX-12" in body and "?part=pack_serial&amp;value=QX-99" in body


def test_a_technician_found_by_name_links_to_their_bench_visits(as_viewer, unit):
    person = make_user("rmarsh", "technician", first_name="Robin", last_name="Marsh")
    seal1, _ = unit.variant.seal_positions.order_by("name")
    record = visit(unit, person, t(2026, 1, 5, 9), seal(seal1, "L-1"))
    body = as_viewer.get("/search/", {"q": "Robin Marsh"}).content.decode()
    link = f"{reverse('record-list')}?technician={person.pk}"
    assert link in body
    assert f'href="{record.get_absolute_url()}"' in as_viewer.get(link).content.decode()


def test_people_who_never_worked_a_bench_visit_are_not_listed(as_viewer):
    make_user("rmarsh", "technician", first_name="Robin", last_name="Marsh")
    assert "Nothing matches" in as_viewer.get("/search/", {"q": "Robin"}).content.decode()


def test_a_long_list_says_there_are_more(as_viewer, variant, workshop):
    for i in range(21):
        make_unit(
            serial=f"MR-{i:03d}", acoustic_address=str(600 + i), variant=variant, place=workshop
        )
    body = as_viewer.get("/search/", {"q": "MR-"}).content.decode()
    assert "MR-019" in body and "MR-020" not in body
    assert "More than 20 match" in body


@pytest.mark.parametrize(
    ("q", "message"),
    [
        ("", "Type a serial"),
        ("x" * 61, "at most 60 characters"),
        ("x" * 5000, "at most 60 characters"),
        ("TX\x00", "letters, digits"),
    ],
)
def test_bad_search_text_gets_a_message(as_viewer, q, message):
    response = as_viewer.get("/search/", {"q": q})
    assert response.status_code == 200
    assert message in response.content.decode()


def test_nothing_found_says_so(as_viewer, unit):
    assert "Nothing matches" in as_viewer.get("/search/", {"q": "ZZZ"}).content.decode()


def test_the_search_page_makes_the_same_queries_for_one_match_or_many(
    as_viewer, variant, workshop, technician
):
    make_unit(serial="SQ-000", acoustic_address="700", variant=variant, place=workshop)
    # Expect: session, user, groups (role check), the six capped searches.
    assert queries_for(as_viewer, "/search/", {"q": "SQ"}) == 9
    for i in range(1, 30):
        u = make_unit(
            serial=f"SQ-{i:03d}", acoustic_address=str(700 + i), variant=variant, place=workshop
        )
        seal1, _ = variant.seal_positions.order_by("name")
        visit(
            u,
            technician,
            t(2026, 1, 5, 9),
            seal(seal1, f"SQ-L{i}"),
            pack(f"SQ-P{i}", dt.date(2026, 1, 5)),
        )
    assert queries_for(as_viewer, "/search/", {"q": "SQ"}) == 9


# Recall


@pytest.fixture
def recalled(unit, technician):
    """Lot L-7 on both seals in January; seal 1 changed to L-8 in May."""
    seal1, seal2 = unit.variant.seal_positions.order_by("name")
    january = visit(unit, technician, t(2026, 1, 5, 9), seal(seal1, "L-7"), seal(seal2, "L-7"))
    may = visit(unit, technician, t(2026, 5, 5, 9), seal(seal1, "L-8"))
    return january, may


@pytest.mark.parametrize("persona", ["as_viewer", "as_technician", "as_supervisor"])
def test_every_role_runs_a_recall(request, persona, recalled):
    response = request.getfixturevalue(persona).get(
        "/recall/", {"part": "seal_lot", "value": "L-7"}
    )
    assert response.status_code == 200
    body = response.content.decode()
    assert "1 unit, 1 fitted now" in body
    assert "Seal 2" in body and "Seal 1" not in body


def test_a_user_with_no_role_cannot_run_a_recall(as_outsider):
    assert as_outsider.get("/recall/", {"part": "seal_lot", "value": "L-7"}).status_code == 403


def test_a_recall_since_a_date_shows_the_replaced_seal_and_its_visit(as_viewer, recalled):
    _, may = recalled
    body = as_viewer.get(
        "/recall/", {"part": "seal_lot", "value": "L-7", "since": "2026-01-01"}
    ).content.decode()
    assert "Seal 1" in body and "Seal 2" in body
    assert f'href="{may.get_absolute_url()}"' in body
    assert "vent it" in body  # the caution before opening a housing


def test_the_recall_downloads_as_csv(as_viewer, recalled, unit):
    january, may = recalled
    response = as_viewer.get(
        "/recall/", {"part": "seal_lot", "value": "L-7", "since": "2026-01-01", "export": "csv"}
    )
    assert response["Content-Type"] == "text/csv; charset=utf-8"
    lines = response.content.decode("utf-8-sig").splitlines()
    assert lines == [
        "unit,position,part,fitted_on,fitted_by_visit,still_fitted,taken_out_on,taken_out_by_visit",
        f"{unit.serial},Seal 1,L-7,2026-01-05,{january.pk},false,2026-05-05,{may.pk}",
        f"{unit.serial},Seal 2,L-7,2026-01-05,{january.pk},true,,",
    ]


@pytest.mark.parametrize(
    ("params", "message"),
    [
        ({"part": "seal_lot", "value": ""}, "Give the lot or the pack serial."),
        ({"part": "seal_lot", "value": "x" * 41}, "at most 40 characters"),
        ({"part": "anode", "value": "L-7"}, "Select a valid choice."),
        ({"part": "seal_lot", "value": "L-7", "since": "2026-02-30"}, "Enter a valid date."),
        ({"part": "seal_lot", "value": "L-7", "since": "1900-01-01"}, "1980"),
        ({"part": "seal_lot", "value": "L-7", "since": "2999-01-01"}, "check the year"),
        ({"part": "seal_lot", "value": "L-7", "since": "tomorrow"}, "in the future"),
        ({"part": "seal_lot", "value": "L\x00-7"}, "Null characters are not allowed."),
    ],
)
def test_a_bad_recall_gets_a_message_and_no_list(as_viewer, recalled, params, message):
    if params.get("since") == "tomorrow":
        params = {**params, "since": (timezone.localdate() + dt.timedelta(days=1)).isoformat()}
    response = as_viewer.get("/recall/", {**params, "export": "csv"})
    assert response.status_code == 200
    assert response["Content-Type"].startswith("text/html")
    body = response.content.decode()
    assert message in body
    assert "Still fitted" not in body


def test_the_recall_page_makes_the_same_queries_for_one_unit_or_many(
    as_viewer, variant, workshop, technician
):
    seal1, _ = variant.seal_positions.order_by("name")
    params = {"part": "seal_lot", "value": "L-7", "since": "2026-01-01"}

    def add(i):
        u = make_unit(
            serial=f"RC-{i:03d}", acoustic_address=str(800 + i), variant=variant, place=workshop
        )
        visit(u, technician, t(2026, 1, 5, 9), seal(seal1, "L-7"))

    add(0)
    # Expect: session, user, groups (role check), the recall.
    assert queries_for(as_viewer, "/recall/", params) == 4
    for i in range(1, 20):
        add(i)
    assert queries_for(as_viewer, "/recall/", params) == 4


# The bench-visit list


@pytest.fixture
def visits(unit, variant, workshop, technician, supervisor):
    other = make_unit(serial="TX-0002", acoustic_address="102", variant=variant, place=workshop)
    seal1, _ = variant.seal_positions.order_by("name")
    old = visit(unit, technician, t(2026, 1, 5, 9), seal(seal1, "L-1"))
    new = visit(other, supervisor, t(2026, 3, 5, 9), seal(seal1, "L-2"))
    still_open = visit(unit, technician, t(2026, 4, 5, 9), seal(seal1, "L-3"), close=False)
    return old, new, still_open


def record_links(body):
    return [pk for pk in range(1, 100) if f'href="/records/{pk}/"' in body]


@pytest.mark.parametrize("persona", ["as_viewer", "as_technician", "as_supervisor"])
def test_every_role_lists_bench_visits_newest_first(request, persona, visits):
    old, new, still_open = visits
    body = request.getfixturevalue(persona).get("/records/").content.decode()
    assert body.index(f'/records/{still_open.pk}/"') < body.index(f'/records/{new.pk}/"')
    assert body.index(f'/records/{new.pk}/"') < body.index(f'/records/{old.pk}/"')


def test_a_user_with_no_role_cannot_list_bench_visits(as_outsider):
    assert as_outsider.get("/records/").status_code == 403


@pytest.mark.parametrize(
    ("params", "expected"),
    [
        ({"unit": "tx-0001"}, {"old", "still_open"}),
        ({"status": "open"}, {"still_open"}),
        ({"status": "closed"}, {"old", "new"}),
        ({"opened_from": "2026-03-01", "opened_to": "2026-03-31"}, {"new"}),
        ({"opened_from": "2026-03-05"}, {"new", "still_open"}),
        ({"opened_to": "2026-01-05"}, {"old"}),
    ],
)
def test_the_bench_visit_list_filters(as_viewer, visits, params, expected):
    by_name = dict(zip(("old", "new", "still_open"), visits, strict=True))
    body = as_viewer.get("/records/", params).content.decode()
    shown = {name for name, r in by_name.items() if f'href="/records/{r.pk}/"' in body}
    assert shown == expected


def test_the_bench_visit_list_filters_by_technician(as_viewer, visits, supervisor):
    _, new, _ = visits
    body = as_viewer.get("/records/", {"technician": supervisor.pk}).content.decode()
    assert f'href="/records/{new.pk}/"' in body
    assert body.count('href="/records/') - body.count('href="/records/"') == 1


@pytest.mark.parametrize(
    ("params", "message"),
    [
        ({"opened_from": "2026-05-01", "opened_to": "2026-04-01"}, "Choose a day on or after"),
        ({"opened_from": "yesterday"}, "Enter a valid date."),
        ({"technician": "999999"}, "Select a valid choice."),
        ({"status": "half"}, "Select a valid choice."),
        ({"unit": "x" * 40}, "at most 31 characters"),
    ],
)
def test_a_bad_filter_gets_a_message_and_no_list(as_viewer, visits, params, message):
    response = as_viewer.get("/records/", params)
    assert response.status_code == 200
    body = response.content.decode()
    assert message in body and "Correct the filter" in body
    assert not any(f'href="/records/{r.pk}/"' in body for r in visits)


@pytest.mark.parametrize("page", ["99", "abc", "-1"])
def test_a_page_past_the_end_or_not_a_number_shows_a_page(as_viewer, visits, page):
    assert as_viewer.get("/records/", {"page": page}).status_code == 200


def test_the_bench_visit_list_makes_the_same_queries_for_three_visits_or_thirty(
    as_viewer, visits, variant, workshop, technician
):
    # Expect: session, user, groups (role check), count, the page with unit, technician and
    # place, the technician choices.
    assert queries_for(as_viewer, "/records/") == 6
    seal1, _ = variant.seal_positions.order_by("name")
    for i in range(27):
        u = make_unit(
            serial=f"BV-{i:03d}", acoustic_address=str(900 + i), variant=variant, place=workshop
        )
        visit(u, make_user(f"tech{i}", "technician"), t(2026, 2, 5, 9), seal(seal1, "L-1"))
    assert queries_for(as_viewer, "/records/") == 6


# The fleet list's next-due column


def test_the_fleet_list_shows_each_units_earliest_due_date_and_item(
    as_viewer, unit, variant, workshop, site, technician
):
    other = make_unit(serial="TX-0002", acoustic_address="102", variant=variant, place=workshop)
    serviced_unit(other, by=technician, site=site, day=_recently())
    first = DueRow.objects.filter(unit=other, due_on__isnull=False).order_by("due_on", "position")[
        0
    ]
    assert first.due_on == DueRow.objects.filter(unit=other).aggregate(d=Min("due_on"))["d"]
    body = as_viewer.get("/units/").content.decode()
    assert "Next due" in body
    row = body[body.index(">TX-0002<") :].split("</tr>")[0]
    assert first.due_on.isoformat() in row and first.item in row
    csv = as_viewer.get("/units/", {"export": "csv"}).content.decode("utf-8-sig")
    assert f"{first.due_on.isoformat()},{first.item}" in csv


def test_the_fleet_list_sorts_by_next_due_with_undated_units_last(
    as_viewer, unit, variant, workshop, site, technician
):
    later = make_unit(serial="TX-0002", acoustic_address="102", variant=variant, place=workshop)
    sooner = make_unit(serial="TX-0003", acoustic_address="103", variant=variant, place=workshop)
    serviced_unit(later, by=technician, site=site, day=_recently(5))
    serviced_unit(sooner, by=technician, site=site, day=_recently(60))
    DueRow.objects.filter(unit=unit).update(due_on=None)  # nothing dated for TX-0001
    for sort, order in [
        ("next_due_on", ["TX-0003", "TX-0002", "TX-0001"]),
        ("-next_due_on", ["TX-0002", "TX-0003", "TX-0001"]),
    ]:
        body = as_viewer.get("/units/", {"sort": sort}).content.decode()
        assert sorted(order, key=lambda s: body.index(f">{s}<")) == order


@pytest.mark.parametrize(
    ("params", "message"),
    [
        ({"part": "packs_made", "made_to": "2025-12-01"}, "Give the first day of manufacture"),
        ({"part": "packs_made", "made_from": "2025-12-01"}, "Give the last day of manufacture"),
        (
            {"part": "packs_made", "made_from": "2025-12-01", "made_to": "2025-01-01"},
            "The period ends before it begins.",
        ),
        (
            {
                "part": "packs_made",
                "made_from": "2025-01-01",
                "made_to": "2025-12-01",
                "chemistry": "lead",
            },
            "Select a valid choice.",
        ),
    ],
)
def test_a_bad_period_recall_gets_a_message(as_viewer, params, message):
    body = as_viewer.get("/recall/", params).content.decode()
    assert message in body and "Still fitted" not in body


def test_the_page_recalls_packs_made_in_a_period(as_viewer, unit, technician):
    from fleet.models import BatteryInstall

    fitted = BatteryInstall(
        pack_serial="PK-9",
        chemistry="alkaline",
        nominal_voltage_v=31.5,
        capacity_ah=17.0,
        made_on=dt.date(2025, 11, 20),
        installed_on=dt.date(2026, 1, 5),
        ocv_install_v=33.1,
    )
    visit(unit, technician, t(2026, 1, 5, 9), fitted)
    params = {"part": "packs_made", "made_from": "2025-11-01", "made_to": "2025-11-30"}
    body = as_viewer.get("/recall/", params).content.decode()
    assert "Alkaline" in body and "PK-9" in body and "1 fitted now" in body
    csv = as_viewer.get("/recall/", {**params, "export": "csv"}).content.decode()
    assert "PK-9" in csv
