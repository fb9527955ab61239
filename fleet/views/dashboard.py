from django.conf import settings
from django.db.models import QuerySet
from django.http import HttpRequest, HttpResponse
from django.shortcuts import render
from django.utils import timezone
from django_tables2 import RequestConfig

from fleet import roles
from fleet.due.condition import Condition
from fleet.due.items import ItemKind
from fleet.due.store import LISTED_COLUMNS, due_queryset, due_summary, export_rows
from fleet.exports import csv_rows_response
from fleet.forms import DueFilterForm
from fleet.models import Transponder
from fleet.selectors import fleet_counts, open_records, units_in_water
from fleet.tables import CountedPaginator, DueItemTable, condition_badge

from .guards import require


@require(roles.can_read)
def dashboard(request: HttpRequest) -> HttpResponse:
    on = timezone.localdate()
    form = DueFilterForm(request.GET or None, kinds=[(k.value, k.label) for k in ItemKind])
    # No unit filter at all unless one is chosen: an unfiltered ``IN (SELECT …)`` of every
    # unit only slows the due-row queries down.
    units: QuerySet[Transponder] | None = None
    show, kind = "attention", ""
    if form.is_valid():
        show = form.cleaned_data["show"] or "attention"
        if form.cleaned_data["place"]:
            units = Transponder.objects.filter(place=form.cleaned_data["place"])
        if form.cleaned_data["variant"]:
            units = (units if units is not None else Transponder.objects.all()).filter(
                variant=form.cleaned_data["variant"]
            )
        kind = form.cleaned_data["kind"]
    soon_days = settings.HOLDFAST["DUE_SOON_DAYS"]
    rows = due_queryset(on=on, soon_days=soon_days, show=show, units=units, kind=kind)
    if request.GET.get("export") == "csv":
        return csv_rows_response(export_rows(rows), f"holdfast-due-{on.isoformat()}.csv")
    # The totals, the rows listed and whether any has a flag, in one pass over the rows.
    summary = due_summary(on=on, soon_days=soon_days, show=show, units=units, kind=kind)
    due = summary.totals
    # An empty column keeps its width: drop the flags column when no listed row has a flag.
    table = DueItemTable(
        rows.only(*LISTED_COLUMNS), exclude=() if summary.listed_flagged else ("flags",)
    )
    paginate = {"per_page": 100, "paginator_class": CountedPaginator, "count": summary.listed}
    RequestConfig(request, paginate=paginate).configure(table)

    counts = fleet_counts(on=on)
    condition_rows = [
        (condition_badge(condition), condition.value, counts.by_condition[condition])
        for condition in Condition
    ]
    return render(
        request,
        "fleet/dashboard.html",
        {
            "on": on,
            "form": form,
            "table": table,
            "due": due,
            "condition_rows": condition_rows,
            "by_place": counts.by_place,
            "unit_count": counts.total,
            "open_records": open_records(limit=20),
            "in_water": units_in_water(limit=50),
        },
    )
