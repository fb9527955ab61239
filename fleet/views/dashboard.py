from django.db.models import Count
from django.http import HttpRequest, HttpResponse
from django.shortcuts import render
from django.utils import timezone
from django_tables2 import RequestConfig

from fleet import roles
from fleet.due.engine import DueState, ItemKind, due_items, evaluate_fleet
from fleet.exports import csv_response
from fleet.forms import DueFilterForm
from fleet.models import Deployment, ServiceRecord, Transponder, UnitStatus
from fleet.tables import DueItemTable, due_rows, status_badge

from .guards import require

_SHOW = {
    "attention": {DueState.OVERDUE, DueState.DUE_SOON},
    "overdue": {DueState.OVERDUE},
    "all": set(DueState),
}


@require(roles.can_read)
def dashboard(request: HttpRequest) -> HttpResponse:
    at = timezone.now()
    on = timezone.localdate(at)
    form = DueFilterForm(request.GET or None, kinds=[(k.value, k.label) for k in ItemKind])
    queryset = Transponder.objects.all()
    show = _SHOW["attention"]
    kind = ""
    flagged = True
    if form.is_valid():
        show = _SHOW.get(form.cleaned_data["show"] or "attention", show)
        if form.cleaned_data["place"]:
            queryset = queryset.filter(place=form.cleaned_data["place"])
        if form.cleaned_data["variant"]:
            queryset = queryset.filter(variant=form.cleaned_data["variant"])
        kind = form.cleaned_data["kind"]
    evaluations = evaluate_fleet(on=on, at=at, queryset=queryset)
    all_items = due_items(evaluations)
    if form.is_bound and form.is_valid():
        flagged = form.cleaned_data["show"] in ("", "attention")
    items = [
        i
        for i in all_items
        if (i.state in show or (flagged and i.flags)) and (not kind or i.kind == kind)
    ]
    table = DueItemTable(due_rows(items))
    if request.GET.get("export") == "csv":
        return csv_response(table, f"holdfast-due-{on.isoformat()}.csv")
    RequestConfig(request, paginate={"per_page": 100}).configure(table)

    by_status = dict(
        Transponder.objects.values_list("status").annotate(n=Count("pk")).values_list("status", "n")
    )
    status_rows = [
        (status_badge(value, label), value, by_status.get(value, 0))
        for value, label in UnitStatus.choices
    ]
    by_place = (
        Transponder.objects.values("place__name").annotate(n=Count("pk")).order_by("place__name")
    )
    return render(
        request,
        "fleet/dashboard.html",
        {
            "on": on,
            "form": form,
            "table": table,
            "overdue_count": sum(1 for i in all_items if i.state == DueState.OVERDUE),
            "due_soon_count": sum(1 for i in all_items if i.state == DueState.DUE_SOON),
            "units_overdue": sum(1 for ev in evaluations if ev.worst == DueState.OVERDUE),
            "status_rows": status_rows,
            "by_place": by_place,
            "unit_count": sum(by_status.values()),
            "open_records": ServiceRecord.objects.filter(closed_at__isnull=True)
            .select_related("unit", "technician")
            .order_by("opened_at")[:20],
            "in_water": Deployment.objects.filter(recovered_at__isnull=True)
            .select_related("unit", "site")
            .order_by("over_side_at")[:50],
        },
    )
