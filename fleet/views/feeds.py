"""The due calendar: a per-user secret iCalendar address that can be revoked."""

import hashlib

from django.conf import settings
from django.contrib import messages
from django.contrib.auth.decorators import login_not_required
from django.http import Http404, HttpRequest, HttpResponse
from django.shortcuts import redirect, render
from django.utils import timezone
from django.views.decorators.http import require_http_methods
from icalendar import Calendar, Event

from fleet import roles
from fleet.due.store import due_items_stored
from fleet.models import CalendarFeed
from fleet.models.feeds import new_feed_token

from .guards import require


@require(roles.can_read)
@require_http_methods(["GET", "POST"])
def feed_settings(request: HttpRequest) -> HttpResponse:
    feed = CalendarFeed.objects.filter(user=request.user).first()
    if request.method == "POST":
        action = request.POST.get("action")
        if action == "create" and feed is None:
            feed = CalendarFeed.objects.create(user=request.user)
            messages.success(request, "Your calendar address is ready.")
        elif action == "renew" and feed is not None:
            feed.token = new_feed_token()
            feed.save(update_fields=["token"])
            messages.success(request, "Address replaced. The old one no longer works.")
        elif action == "revoke" and feed is not None:
            feed.delete()
            feed = None
            messages.success(request, "Calendar address revoked.")
        return redirect("feed-settings")
    url = request.build_absolute_uri(f"/feed/{feed.token}.ics") if feed else None
    return render(request, "fleet/feed_settings.html", {"feed": feed, "url": url})


@login_not_required
def feed_ics(request: HttpRequest, token: str) -> HttpResponse:
    feed = CalendarFeed.objects.select_related("user").filter(token=token).first()
    # A revoked token, or a user who has left or lost every role, gets nothing.
    if feed is None or not feed.user.is_active or not roles.can_read(feed.user):
        raise Http404("No such calendar.")
    at = timezone.now()
    on = timezone.localdate(at)
    calendar = Calendar()
    calendar.add("prodid", "-//Holdfast//due maintenance//EN")
    calendar.add("version", "2.0")
    calendar.add("x-wr-calname", "Holdfast: maintenance due")
    for item in due_items_stored(on=on, soon_days=settings.HOLDFAST["DUE_SOON_DAYS"]):
        if item.due_on is None:
            continue
        event = Event()
        key = f"{item.serial}|{item.kind}|{item.item}".encode()
        event.add("uid", f"{hashlib.sha256(key).hexdigest()[:32]}@holdfast")
        event.add("dtstamp", at)
        event.add("dtstart", item.due_on)
        event.add("summary", f"{item.serial}: {item.item} ({item.state.label.lower()})")
        event.add("description", item.basis + ("\n" + "\n".join(item.flags) if item.flags else ""))
        event.add("url", request.build_absolute_uri(f"/units/{item.serial}/"))
        calendar.add_component(event)
    response = HttpResponse(calendar.to_ical(), content_type="text/calendar; charset=utf-8")
    response["Content-Disposition"] = 'inline; filename="holdfast-due.ics"'
    return response
