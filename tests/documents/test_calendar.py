"""The due calendar as a document: the prepared events exactly, then the bytes parsed back with
the icalendar library (an RFC 5545 implementation outside the project)."""

import datetime as dt
import hashlib

import pytest
from django.urls import reverse
from icalendar import Calendar

from fleet.documents.calendar import (
    NAME,
    PRODID,
    CalendarDocument,
    CalendarEvent,
    prepare_calendar,
    render_calendar,
)
from fleet.due.items import DueItem, DueState, ItemKind
from fleet.models import AnodeReading, CalendarFeed
from tests.documents.conftest import AT, HOSTILE, bench_visit


def due(**kwargs) -> DueItem:
    kwargs.setdefault("unit_id", 1)
    kwargs.setdefault("serial", "TX-0001")
    kwargs.setdefault("variant", "Deep 3000")
    kwargs.setdefault("place", "Bench workshop")
    kwargs.setdefault("kind", ItemKind.SEAL)
    kwargs.setdefault("key", "seal:1")
    kwargs.setdefault("item", "Seal: End cap")
    kwargs.setdefault("due_on", dt.date(2026, 5, 1))
    kwargs.setdefault("state", DueState.CURRENT)
    kwargs.setdefault("basis", "24 months since 2024-05-01")
    return DueItem(**kwargs)


def url_for(serial: str) -> str:
    return f"https://holdfast.example/units/{serial}/"


def uid(text: str) -> str:
    # The uid is the first 128 bits of SHA-256 (FIPS 180-4) of "serial|kind|item", in hex.
    return hashlib.sha256(text.encode()).hexdigest()[:32] + "@holdfast"


ITEMS = [
    due(),
    due(
        serial="TX-0002",
        kind=ItemKind.ANODE,
        key="anode:3",
        item="Anode: Anode 1",
        due_on=dt.date(2026, 4, 1),
        state=DueState.OVERDUE,
        basis="38 % left, replace at 40 %",
        flags=("bond resistance 0.4 ohm", "reading older than a year"),
        failed=True,
    ),
    due(serial="TX-0003", kind=ItemKind.BATTERY, key="battery", item="Battery", due_on=None),
]


def test_it_prepares_one_event_per_dated_item():
    doc = prepare_calendar(ITEMS, at=AT, url_for=url_for)
    assert doc == CalendarDocument(
        prodid="-//Holdfast//due maintenance//EN",
        name="Holdfast: maintenance due",
        stamp=AT,
        events=(
            CalendarEvent(
                uid=uid("TX-0001|seal|Seal: End cap"),
                start=dt.date(2026, 5, 1),
                summary="TX-0001: Seal: End cap (current)",
                description="24 months since 2024-05-01",
                url="https://holdfast.example/units/TX-0001/",
            ),
            CalendarEvent(
                uid=uid("TX-0002|anode|Anode: Anode 1"),
                start=dt.date(2026, 4, 1),
                summary="TX-0002: Anode: Anode 1 (overdue)",
                description=(
                    "38 % left, replace at 40 %\nbond resistance 0.4 ohm\nreading older than a year"
                ),
                url="https://holdfast.example/units/TX-0002/",
            ),
        ),
    )


def test_an_items_uid_stays_the_same_when_its_date_and_state_move():
    first = prepare_calendar([ITEMS[0]], at=AT, url_for=url_for).events[0]
    moved = due(due_on=dt.date(2026, 9, 1), state=DueState.DUE_SOON, basis="other")
    later = prepare_calendar([moved], at=AT + dt.timedelta(days=30), url_for=url_for).events[0]
    assert first.uid == later.uid
    other_unit = prepare_calendar([due(serial="TX-0009")], at=AT, url_for=url_for).events[0]
    assert other_unit.uid != first.uid


def test_the_bytes_parse_back_to_the_prepared_events():
    doc = prepare_calendar(ITEMS, at=AT, url_for=url_for)
    calendar = Calendar.from_ical(render_calendar(doc))
    assert str(calendar["prodid"]) == PRODID
    assert str(calendar["version"]) == "2.0"
    assert str(calendar["x-wr-calname"]) == NAME
    events = calendar.walk("VEVENT")
    assert [str(e["uid"]) for e in events] == [e.uid for e in doc.events]
    # An all-day event: DTSTART is a DATE value, not a date-time (RFC 5545 sec. 3.3.4).
    assert [e.decoded("dtstart") for e in events] == [dt.date(2026, 5, 1), dt.date(2026, 4, 1)]
    assert all(type(e.decoded("dtstart")) is dt.date for e in events)
    assert [e.decoded("dtstamp") for e in events] == [AT, AT]
    assert [str(e["summary"]) for e in events] == [e.summary for e in doc.events]
    assert [str(e["description"]) for e in events] == [e.description for e in doc.events]
    assert [str(e["url"]) for e in events] == [e.url for e in doc.events]


def test_hostile_text_survives_escaping_and_long_lines_are_folded():
    # Commas, semicolons, backslashes and newlines are escaped in TEXT (RFC 5545 sec. 3.3.11);
    # a line longer than 75 octets is folded (sec. 3.1), multi-byte characters included.
    hostile = due(
        item=f'Seal: "lid"; A,B \\ {HOSTILE}',
        basis=("Grease; wipe, re-fit \\ °C ≥ 5 — " * 6).strip() + f"\n{HOSTILE}",
    )
    doc = prepare_calendar([hostile], at=AT, url_for=url_for)
    data = render_calendar(doc)
    lines = data.split(b"\r\n")
    assert max(len(line) for line in lines) <= 75
    assert any(line.startswith(b" ") for line in lines)  # at least one continuation line
    for line in lines:
        line.decode("utf-8")  # no character split across a fold
    event = Calendar.from_ical(data).walk("VEVENT")[0]
    assert str(event["summary"]) == f'TX-0001: Seal: "lid"; A,B \\ {HOSTILE} (current)'
    assert str(event["description"]) == hostile.basis


def test_an_empty_list_renders_a_calendar_with_no_events():
    doc = prepare_calendar([due(due_on=None)], at=AT, url_for=url_for)
    assert doc.events == ()
    calendar = Calendar.from_ical(render_calendar(doc))
    assert calendar.walk("VEVENT") == []
    assert str(calendar["x-wr-calname"]) == NAME


@pytest.mark.django_db
def test_the_feed_links_each_event_to_the_unit_page(as_viewer, viewer, client, unit, technician):
    position = unit.variant.anode_positions.first()
    bench_visit(unit, technician, AnodeReading(position=position, mass_g=150))
    feed = CalendarFeed.objects.create(user=viewer)
    response = client.get(reverse("feed-ics", args=[feed.token]))
    assert response.status_code == 200
    assert response["Content-Type"] == "text/calendar; charset=utf-8"
    urls = {str(e["url"]) for e in Calendar.from_ical(response.content).walk("VEVENT")}
    assert urls == {f"http://testserver/units/{unit.serial}/"}
    settings_page = as_viewer.get(reverse("feed-settings"))
    assert f"http://testserver/feed/{feed.token}.ics".encode() in settings_page.content
