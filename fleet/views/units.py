from django.conf import settings
from django.contrib import messages
from django.db.models import Max, Prefetch
from django.http import HttpRequest, HttpResponse
from django.shortcuts import redirect, render
from django.utils import timezone
from django.views.decorators.http import require_http_methods
from django_tables2 import RequestConfig

from fleet import roles
from fleet.due.acceptance import release_test_failures
from fleet.due.condition import annotate_condition, condition_of
from fleet.due.rules import Rules, rules_for
from fleet.due.store import unit_due_items
from fleet.exports import csv_response
from fleet.filters import UnitFilter
from fleet.forms import PlannedDeploymentForm, UnitPhotoForm
from fleet.models import (
    AnodeReading,
    BatteryInstall,
    Deployment,
    ReleaseTest,
    SealChange,
    ServiceRecord,
    Transponder,
)
from fleet.models.records import Entry, entry_kinds
from fleet.tables import UnitTable, condition_badge

from .guards import get_unit_for_user, require


@require_http_methods(["POST"])
def unit_photo_add(request: HttpRequest, serial: str) -> HttpResponse:
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
        Transponder.objects.select_related("variant", "place").annotate(
            last_service=Max("service_records__opened_at")
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


def _latest_by_position(entries: list, key: str) -> dict[int, object]:
    latest: dict[int, object] = {}
    for entry in entries:  # newest first
        latest.setdefault(getattr(entry, key), entry)
    return latest


def _entry_lines(
    record: ServiceRecord, kinds: tuple[type[Entry], ...], rules: Rules
) -> list[tuple[str, str]]:
    """(line, warning) for each entry of a prefetched record, kind by kind."""
    lines = []
    for kind in kinds:
        for entry in getattr(record, kind.related_name()).all():
            warning = entry.warning()
            if isinstance(entry, ReleaseTest) and release_test_failures(entry, rules):
                warning = "fault noted"
            lines.append((entry.history_line(), warning))
    return lines


def unit_detail(request: HttpRequest, serial: str) -> HttpResponse:
    unit = get_unit_for_user(request, serial)
    variant = unit.variant
    anode_positions = list(variant.anode_positions.all())
    seal_positions = list(variant.seal_positions.all())

    readings = list(
        AnodeReading.objects.filter(record__unit=unit)
        .select_related("record", "position")
        .order_by("-record__opened_at", "-pk")
    )
    seal_changes = list(
        SealChange.objects.filter(record__unit=unit)
        .select_related("record", "position")
        .order_by("-record__opened_at", "-pk")
    )
    last_reading = _latest_by_position(readings, "position_id")
    last_seal = _latest_by_position(seal_changes, "position_id")
    fitted_pack = BatteryInstall.objects.filter(unit=unit, removed_on__isnull=True).first()

    kinds = entry_kinds()
    records = (
        ServiceRecord.objects.filter(unit=unit)
        .select_related("technician", "place", "closed_by")
        .prefetch_related(
            *(Prefetch(kind.related_name(), queryset=kind.with_list_related()) for kind in kinds),
            "amendments",
        )
    )
    deployments = Deployment.objects.filter(unit=unit).select_related("site", "override_by")
    on = timezone.localdate()
    soon_days = settings.HOLDFAST["DUE_SOON_DAYS"]
    rules = rules_for(unit.variant)
    history = sorted(
        [("record", r.opened_at, r, _entry_lines(r, kinds, rules)) for r in records]
        + [("deployment", d.over_side_at, d, []) for d in deployments],
        key=lambda item: item[1],
        reverse=True,
    )
    return render(
        request,
        "fleet/unit_detail.html",
        {
            "unit": unit,
            "due_items": unit_due_items(unit, on=on, soon_days=soon_days),
            "readiness_form": PlannedDeploymentForm(initial={"start": on, "days": 90}, today=on),
            "variant": variant,
            "condition_badge": condition_badge(condition_of(unit, on)),
            "anodes": [(p, last_reading.get(p.pk)) for p in anode_positions],
            "seals": [(p, last_seal.get(p.pk)) for p in seal_positions],
            "fitted_pack": fitted_pack,
            "open_deployment": next((d for d in deployments if d.recovered_at is None), None),
            "history": history,
            "photos": unit.photos.select_related("uploaded_by"),
            "photo_form": UnitPhotoForm(),
        },
    )
