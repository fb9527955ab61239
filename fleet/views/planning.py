import datetime as dt

from django.http import Http404, HttpRequest, HttpResponse
from django.shortcuts import render
from django.utils import timezone

from fleet import charts, roles
from fleet.due.engine import UnitEvaluation, evaluate_unit, fleet_queryset
from fleet.due.history import anode_history, battery_history
from fleet.due.readiness import plan_campaign, readiness_for
from fleet.forms import PlanForm, PlannedDeploymentForm
from fleet.models import Transponder

from .guards import get_unit_for_user, require


def _today() -> dt.date:
    return timezone.localdate()


def readiness(request: HttpRequest, serial: str) -> HttpResponse:
    unit = get_unit_for_user(request, serial)
    on = _today()
    form = PlannedDeploymentForm(request.GET or None, today=on)
    result = None
    status = 200
    if form.is_bound:
        if form.is_valid():
            result = readiness_for(unit, form.planned(), on=on)
        else:
            status = 400
    return render(
        request,
        "fleet/readiness.html",
        {"unit": unit, "form": form, "result": result, "query": request.GET.urlencode()},
        status=status,
    )


@require(roles.can_read)
def plan(request: HttpRequest) -> HttpResponse:
    on = _today()
    form = PlanForm(request.GET or None, today=on)
    result = None
    status = 200
    if form.is_bound:
        if form.is_valid():
            result = plan_campaign(form.planned(), wanted=form.cleaned_data["wanted"], on=on)
        else:
            status = 400
    return render(
        request,
        "fleet/plan.html",
        {"form": form, "result": result},
        status=status,
    )


def _evaluation(request: HttpRequest, serial: str) -> tuple[UnitEvaluation, dt.date]:
    unit = get_unit_for_user(request, serial)
    on = _today()
    loaded = fleet_queryset(Transponder.objects.filter(pk=unit.pk)).get()
    return evaluate_unit(loaded, on=on), on


def _svg(body: str) -> HttpResponse:
    response = HttpResponse(body, content_type="image/svg+xml; charset=utf-8")
    response["Cache-Control"] = "private, max-age=60"
    return response


def anode_chart(request: HttpRequest, serial: str, position_id: int) -> HttpResponse:
    ev, on = _evaluation(request, serial)
    history = anode_history(ev, position_id)
    if history is None:
        raise Http404("No such anode position on this unit.")
    return _svg(charts.anode_chart_svg(history, serial=ev.unit.serial, today=on))


def battery_chart(request: HttpRequest, serial: str) -> HttpResponse:
    ev, on = _evaluation(request, serial)
    return _svg(charts.battery_chart_svg(battery_history(ev), serial=ev.unit.serial, today=on))
