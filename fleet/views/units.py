from django.conf import settings
from django.contrib import messages
from django.db.models import Max
from django.http import HttpRequest, HttpResponse
from django.shortcuts import redirect, render
from django.utils import timezone
from django.views.decorators.http import require_http_methods
from django_tables2 import RequestConfig

from fleet import roles
from fleet.cautions import battery_cautions
from fleet.due.condition import annotate_condition, condition_of
from fleet.due.rules import rules_for
from fleet.due.store import unit_due_items
from fleet.exports import csv_response
from fleet.filters import UnitFilter
from fleet.fleet_forms import UnitMoveForm
from fleet.forms import PlannedDeploymentForm, UnitPhotoForm
from fleet.models import Transponder
from fleet.models.session import reading_one_unit
from fleet.selectors import unit_page, with_next_due
from fleet.tables import UnitTable, condition_badge

from .guards import AuthenticatedRequest, get_unit_for_user, require


@require_http_methods(["POST"])
def unit_photo_add(request: AuthenticatedRequest, serial: str) -> HttpResponse:
    unit = get_unit_for_user(request, serial, write=True)
    form = UnitPhotoForm(request.POST, request.FILES)
    if form.is_valid():
        photo = form.save(commit=False)
        photo.unit = unit
        photo.uploaded_by = request.user
        photo.save()
        messages.success(request, "Photo added.")
    else:
        for errors in form.errors.values():
            for error in errors:
                messages.error(request, f"Photo not added: {error}")
    return redirect(unit)


@require(roles.can_read)
def unit_list(request: HttpRequest) -> HttpResponse:
    queryset = annotate_condition(
        with_next_due(
            Transponder.objects.select_related("variant", "place").annotate(
                last_service=Max("service_records__opened_at")
            )
        ),
        timezone.localdate(),
    )
    unit_filter = UnitFilter(request.GET or None, queryset=queryset)
    table = UnitTable(unit_filter.qs)
    if request.GET.get("export") == "csv":
        return csv_response(table, "holdfast-units.csv")
    RequestConfig(request, paginate={"per_page": 50}).configure(table)
    return render(
        request,
        "fleet/unit_list.html",
        {"filter": unit_filter, "table": table, "count": unit_filter.qs.count()},
    )


@reading_one_unit
def unit_detail(request: HttpRequest, serial: str) -> HttpResponse:
    unit = get_unit_for_user(request, serial)
    try:
        history_page = int(request.GET.get("history", "1"))
    except ValueError:
        history_page = 1
    page = unit_page(unit=unit, rules=rules_for(unit.variant), history_page=history_page)
    on = timezone.localdate()
    soon_days = settings.HOLDFAST["DUE_SOON_DAYS"]
    return render(
        request,
        "fleet/unit_detail.html",
        {
            "unit": unit,
            "due_items": unit_due_items(unit, on=on, soon_days=soon_days),
            "readiness_form": PlannedDeploymentForm(initial={"start": on, "days": 90}, today=on),
            "variant": unit.variant,
            "condition_badge": condition_badge(condition_of(unit, on)),
            "anodes": page.anodes,
            "seals": page.seals,
            "fitted_pack": page.fitted_pack,
            # The fitted pack's chemistry, else every one the variant allows: never the
            # lithium caution on an alkaline unit.
            "battery_cautions": battery_cautions(
                (page.fitted_pack.chemistry,)
                if page.fitted_pack is not None
                else tuple(unit.variant.allowed_chemistries or ())
            ),
            "open_deployment": page.open_deployment,
            "open_record": page.open_record,
            "history": page.history,
            "history_page": page.history_page,
            "photos": unit.photos.select_related("uploaded_by"),
            "photo_form": UnitPhotoForm(),
            "move_form": UnitMoveForm(initial={"place": unit.place_id, "version": unit.version}),
            "hold_changes": unit.hold_changes.select_related("set_by"),
        },
    )
