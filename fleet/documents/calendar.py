"""The due calendar: one all-day event per dated due item, as an iCalendar (RFC 5545) feed.

Like the PDFs, a prepared dataclass states everything the feed says and a renderer turns it
into bytes. The icalendar library escapes text (commas, semicolons, backslashes, newlines)
and folds long lines at 75 octets, as RFC 5545 sec. 3.1 and 3.3.11 require.

Each event's uid is a hash of serial, kind and item, so a calendar program updates the same
event when its date moves instead of adding a second one.
"""

from __future__ import annotations

import datetime as dt
import hashlib
from collections.abc import Callable, Iterable
from dataclasses import dataclass

from icalendar import Calendar, Event

from fleet.due.items import DueItem

PRODID = "-//Holdfast//due maintenance//EN"
NAME = "Holdfast: maintenance due"


@dataclass(frozen=True, slots=True)
class CalendarEvent:
    uid: str
    start: dt.date
    summary: str
    description: str
    url: str


@dataclass(frozen=True, slots=True)
class CalendarDocument:
    prodid: str
    name: str
    stamp: dt.datetime  # aware; every event's DTSTAMP
    events: tuple[CalendarEvent, ...]


def event_uid(item: DueItem) -> str:
    key = f"{item.serial}|{item.kind}|{item.item}".encode()
    return f"{hashlib.sha256(key).hexdigest()[:32]}@holdfast"


def prepare_calendar(
    items: Iterable[DueItem], *, at: dt.datetime, url_for: Callable[[str], str]
) -> CalendarDocument:
    """The events for ``items`` that have a due date, in the order given; ``url_for(serial)``
    gives the absolute address of the unit's page. An item with no data has no date and no
    event."""
    events = tuple(
        CalendarEvent(
            uid=event_uid(item),
            start=item.due_on,
            summary=f"{item.serial}: {item.item} ({item.state.label.lower()})",
            description=item.basis + ("\n" + "\n".join(item.flags) if item.flags else ""),
            url=url_for(item.serial),
        )
        for item in items
        if item.due_on is not None
    )
    return CalendarDocument(prodid=PRODID, name=NAME, stamp=at, events=events)


def render_calendar(doc: CalendarDocument) -> bytes:
    calendar = Calendar()
    calendar.add("prodid", doc.prodid)
    calendar.add("version", "2.0")
    calendar.add("x-wr-calname", doc.name)
    for item in doc.events:
        event = Event()
        event.add("uid", item.uid)
        event.add("dtstamp", doc.stamp)
        event.add("dtstart", item.start)
        event.add("summary", item.summary)
        event.add("description", item.description)
        event.add("url", item.url)
        calendar.add_component(event)
    ical: bytes = calendar.to_ical()
    return ical
