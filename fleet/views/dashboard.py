from django.db.models import Count
from django.http import HttpRequest, HttpResponse
from django.shortcuts import render

from fleet import roles
from fleet.models import Deployment, ServiceRecord, Transponder, UnitStatus
from fleet.tables import status_badge

from .guards import require


@require(roles.can_read)
def dashboard(request: HttpRequest) -> HttpResponse:
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
