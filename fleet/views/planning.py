import datetime as dt
from typing import Any

from django.core.paginator import Page, Paginator
from django.http import Http404, HttpRequest, HttpResponse
from django.shortcuts import render
from django.utils import timezone

from fleet import charts, roles
from fleet.due.engine import (
    OUTLOOK_RELATED,
    UnitEvaluation,
    anode_outlook_of_unit,
    evaluate_unit,
    loaded_unit,
)
from fleet.due.history import anode_history_of, battery_history
from fleet.due.readiness import (
    Plan,
    RejectedGroup,
    cyclic_gc_paused,
    plan_campaign,
    readiness_for,
)
from fleet.forms import PlanForm, PlannedDeploymentForm
from fleet.models.session import reading_one_unit, reading_one_unit_in_written_order

from .guards import get_unit_for_user, require


def _today() -> dt.date:
    return timezone.localdate()


@reading_one_unit
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


# Ready units shown beyond the number wanted; rejected units shown a page at a time.
PLAN_SPARE_ROWS = 20
REJECTED_PER_PAGE = 20


def _rejected_pages(request: HttpRequest, result: Plan) -> list[tuple[RejectedGroup, Page[Any]]]:
    """Each group of rejected units with one page of it: the page asked for (``reason`` and
    ``page`` in the query) for that group, the first page for the others."""
    chosen = request.GET.get("reason", "")
    number = request.GET.get("page", 1)
    return [
        (group, Paginator(group.units, REJECTED_PER_PAGE).get_page(
            number if group.reason == chosen else 1
        ))
        for group in result.rejected_groups
    ]  # fmt: skip


@require(roles.can_read)
def plan(request: HttpRequest) -> HttpResponse:
    # The cyclic collector held off until the page is drawn and the plan's rows dropped
    # (``Plan.drop_rows``; Django keeps a drawn context in a reference cycle): the objects
    # of a whole-fleet plan are then freed by reference counting, not walked by a
    # collection while the page is drawn or after.
    with cyclic_gc_paused():
        return _plan_page(request)


def _plan_page(request: HttpRequest) -> HttpResponse:
    on = _today()
    result: Plan | None = None
    form = PlanForm(request.GET or None, today=on)
    context: dict[str, Any] = {"form": form, "result": None}
    status = 200
    if form.is_bound:
        if form.is_valid():
            wanted = form.cleaned_data["wanted"]
            result = plan_campaign(form.planned(), wanted=wanted, on=on)
            query = request.GET.copy()
            query.pop("reason", None)
            query.pop("page", None)
            context.update(
                result=result,
                shown_ready=result.ready[: wanted + PLAN_SPARE_ROWS],
                rejected_pages=_rejected_pages(request, result),
                plan_query=query.urlencode(),
            )
        else:
            status = 400
    response = render(request, "fleet/plan.html", context, status=status)
    # Drawn: the lists the context holds (the rows shown, the pages of rejected units) and
    # the plan's own are emptied, so that reference counting frees the rows.
    for value in context.values():
        if isinstance(value, list):
            value.clear()
    if result is not None:
        result.drop_rows()
    return response


def _evaluation(request: HttpRequest, serial: str) -> tuple[UnitEvaluation, dt.date]:
    unit = get_unit_for_user(request, serial)
    on = _today()
    loaded = loaded_unit(unit.pk)
    return evaluate_unit(loaded, on=on), on


def _svg(body: str) -> HttpResponse:
    response = HttpResponse(body, content_type="image/svg+xml; charset=utf-8")
    response["Cache-Control"] = "private, max-age=60"
    return response


@reading_one_unit_in_written_order  # the unit with its six joined rows; the rest join two
def anode_chart(request: HttpRequest, serial: str, position_id: int) -> HttpResponse:
    # One position's projection from its stored state row, not the unit's every item.
    unit = get_unit_for_user(request, serial, related=OUTLOOK_RELATED)
    outlook = anode_outlook_of_unit(unit, position_id)
    if outlook is None:
        raise Http404("No such anode position on this unit.")
    history = anode_history_of(outlook)
    return _svg(charts.anode_chart_svg(history, serial=unit.serial, today=_today()))


@reading_one_unit_in_written_order  # the unit with its twelve joined rows; the rest join two
def battery_chart(request: HttpRequest, serial: str) -> HttpResponse:
    ev, on = _evaluation(request, serial)
    return _svg(charts.battery_chart_svg(battery_history(ev), serial=ev.unit.serial, today=on))
