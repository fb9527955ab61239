"""Finding things: the search box, a recall by seal lot or pack serial, the bench-visit list.
Each view parses the request, guards by role, calls a selector and renders."""

from django.http import HttpRequest, HttpResponse
from django.shortcuts import render
from django.views.decorators.http import require_GET
from django_tables2 import RequestConfig

from fleet import roles
from fleet.exports import csv_rows_response
from fleet.filters import RecordFilter
from fleet.forms import RecallForm
from fleet.recall import RecallPart, recall, recall_csv_rows
from fleet.search import SEARCH_MAX_CHARS, SearchQueryError, search_everything
from fleet.selectors import service_records_list
from fleet.tables import RecordTable

from .guards import require


@require_GET
@require(roles.can_read)
def search(request: HttpRequest) -> HttpResponse:
    raw = request.GET.get("q", "")
    context: dict[str, object] = {"q": raw[: SEARCH_MAX_CHARS * 2]}
    try:
        context["results"] = search_everything(raw)
    except SearchQueryError as exc:
        context["error"] = str(exc)
    return render(request, "fleet/search.html", context)


@require_GET
@require(roles.can_read)
def recall_view(request: HttpRequest) -> HttpResponse:
    """``?part=seal_lot|pack_serial&value=...`` or ``?part=packs_made&made_from=…&made_to=…
    [&chemistry=…]``, then ``[&since=YYYY-MM-DD][&export=csv]``."""
    form = RecallForm(request.GET or None)
    result = None
    if form.is_valid():
        result = recall(
            part=RecallPart(form.cleaned_data["part"]),
            value=form.cleaned_data["value"],
            since=form.cleaned_data["since"],
            made=form.made(),
        )
        if request.GET.get("export") == "csv":
            return csv_rows_response(recall_csv_rows(result), "holdfast-recall.csv")
    return render(request, "fleet/recall.html", {"form": form, "result": result})


@require_GET
@require(roles.can_read)
def record_list(request: HttpRequest) -> HttpResponse:
    """Every bench visit, newest first, filtered by unit, technician, status and dates."""
    record_filter = RecordFilter(request.GET or None, queryset=service_records_list())
    invalid = record_filter.is_bound and not record_filter.is_valid()
    records = record_filter.queryset.none() if invalid else record_filter.qs
    table = RecordTable(records)
    RequestConfig(request, paginate={"per_page": 50}).configure(table)
    return render(
        request,
        "fleet/record_list.html",
        {"filter": record_filter, "table": table, "invalid": invalid},
    )
