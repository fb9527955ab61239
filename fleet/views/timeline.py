"""The fleet timeline: every unit's deployments, bench visits and due dates over the last two
years and the next one, drawn server-side (``fleet.charts.timeline_svg``)."""

import datetime as dt

from django.core.paginator import Paginator
from django.http import HttpRequest, HttpResponse
from django.shortcuts import render
from django.urls import reverse
from django.utils import timezone
from django.utils.safestring import mark_safe

from fleet import roles
from fleet.charts import timeline_svg
from fleet.forms import TimelineFilterForm
from fleet.models import Transponder
from fleet.selectors import timeline_rows

from .guards import require

UNITS_PER_PAGE = 60
PAST_DAYS, AHEAD_DAYS = 730, 365


@require(roles.can_read)
def timeline(request: HttpRequest) -> HttpResponse:
    today = timezone.localdate()
    start, end = today - dt.timedelta(days=PAST_DAYS), today + dt.timedelta(days=AHEAD_DAYS)
    form = TimelineFilterForm(request.GET or None)
    units = Transponder.objects.select_related("variant").order_by("serial")
    if form.is_valid():
        if form.cleaned_data["variant"]:
            units = units.filter(variant=form.cleaned_data["variant"])
        if form.cleaned_data["place"]:
            units = units.filter(place=form.cleaned_data["place"])
    page = Paginator(units, UNITS_PER_PAGE).get_page(request.GET.get("page"))
    rows = timeline_rows(units=list(page.object_list), start=start, end=end)
    # Drawn by our own code from escaped text only (fleet.charts), so safe to place inline:
    # the unit serials are links.
    svg = timeline_svg(
        rows,
        start=start,
        end=end,
        today=today,
        unit_url=lambda serial: reverse("unit-detail", args=[serial]),
    )
    query = request.GET.copy()
    query.pop("page", None)
    return render(
        request,
        "fleet/timeline.html",
        {
            "form": form,
            "page": page,
            "svg": mark_safe(svg),  # noqa: S308
            "start": start,
            "end": end,
            "query": query.urlencode(),
        },
    )
