from django.conf import settings
from django.db.models import Count
from django.http import HttpRequest, HttpResponse
from django.shortcuts import render
from django.utils import timezone
from django_tables2 import RequestConfig

from fleet import roles
from fleet.due.condition import Condition, annotate_condition
from fleet.due.items import ItemKind
from fleet.due.store import due_queryset, due_totals, export_rows
from fleet.exports import csv_rows_response
from fleet.forms import DueFilterForm
from fleet.models import Deployment, ServiceRecord, Transponder
from fleet.tables import DueItemTable, condition_badge

from .guards import require


@require(roles.can_read)
def dashboard(request: HttpRequest) -> HttpResponse:
    on = timezone.localdate()
    form = DueFilterForm(request.GET or None, kinds=[(k.value, k.label) for k in ItemKind])
    units = Transponder.objects.all()
    show, kind = "attention", ""
    if form.is_valid():
        show = form.cleaned_data["show"] or "attention"
        if form.cleaned_data["place"]:
            units = units.filter(place=form.cleaned_data["place"])
        if form.cleaned_data["variant"]:
            units = units.filter(variant=form.cleaned_data["variant"])
        kind = form.cleaned_data["kind"]
    soon_days = settings.HOLDFAST["DUE_SOON_DAYS"]
    due = due_totals(on=on, soon_days=soon_days, units=units)
    rows = due_queryset(on=on, soon_days=soon_days, show=show, units=units, kind=kind)
    if request.GET.get("export") == "csv":
        return csv_rows_response(export_rows(rows), f"holdfast-due-{on.isoformat()}.csv")
    table = DueItemTable(rows)
    RequestConfig(request, paginate={"per_page": 100}).configure(table)

    by_condition = dict(
        annotate_condition(Transponder.objects.order_by(), on)
        .values("condition")
        .annotate(n=Count("pk"))
        .values_list("condition", "n")
    )
    condition_rows = [
        (condition_badge(condition), condition.value, by_condition.get(condition.value, 0))
        for condition in Condition
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
            "due": due,
            "condition_rows": condition_rows,
            "by_place": by_place,
            "unit_count": sum(by_condition.values()),
            "open_records": ServiceRecord.objects.filter(closed_at__isnull=True)
            .select_related("unit", "technician")
            .order_by("opened_at")[:20],
            "in_water": Deployment.objects.filter(recovered_at__isnull=True)
            .select_related("unit", "site")
            .order_by("over_side_at")[:50],
        },
    )
