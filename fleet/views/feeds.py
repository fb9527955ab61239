"""The due calendar: a per-user secret iCalendar address that can be revoked."""

from django.conf import settings
from django.contrib import messages
from django.contrib.auth.decorators import login_not_required
from django.http import HttpRequest, HttpResponse
from django.shortcuts import redirect, render
from django.urls import reverse
from django.utils import timezone
from django.views.decorators.http import require_http_methods

from fleet import roles
from fleet.documents.calendar import prepare_calendar, render_calendar
from fleet.due.store import due_items_stored
from fleet.models import CalendarFeed
from fleet.models.feeds import new_feed_token

from .guards import AuthenticatedRequest, get_calendar_feed_for_token, require


@require(roles.can_read)
@require_http_methods(["GET", "POST"])
def feed_settings(request: AuthenticatedRequest) -> HttpResponse:
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
    url = request.build_absolute_uri(reverse("feed-ics", args=[feed.token])) if feed else None
    return render(request, "fleet/feed_settings.html", {"feed": feed, "url": url})


@login_not_required
def feed_ics(request: HttpRequest, token: str) -> HttpResponse:
    get_calendar_feed_for_token(token)
    at = timezone.now()
    items = due_items_stored(
        on=timezone.localdate(at), soon_days=settings.HOLDFAST["DUE_SOON_DAYS"]
    )
    doc = prepare_calendar(
        items,
        at=at,
        url_for=lambda serial: request.build_absolute_uri(reverse("unit-detail", args=[serial])),
    )
    response = HttpResponse(render_calendar(doc), content_type="text/calendar; charset=utf-8")
    response["Content-Disposition"] = 'inline; filename="holdfast-due.ics"'
    return response
