"""The import page: upload, preview (nothing written), confirm (all or nothing)."""

from __future__ import annotations

from django.contrib import messages
from django.http import FileResponse, Http404, HttpRequest, HttpResponse
from django.shortcuts import redirect, render
from django.urls import reverse
from django.views.decorators.http import require_GET, require_http_methods, require_POST

from fleet.imports import examples, staging
from fleet.imports.export import template_csv
from fleet.imports.forms import ImportConfirmForm, ImportUploadForm
from fleet.services.imports import KINDS, ImportRefusedError, Outcome, import_commit, import_preview

from .guards import AuthenticatedRequest, ashore_only, check_import_for_user


def _page(
    request: HttpRequest,
    form: ImportUploadForm,
    outcome: Outcome | None = None,
    confirm: ImportConfirmForm | None = None,
) -> HttpResponse:
    return render(
        request,
        "fleet/import.html",
        {
            "form": form,
            "outcome": outcome,
            "confirm": confirm,
            "kinds": KINDS.values(),
            "examples": examples.EXAMPLES,
        },
        status=400 if outcome is not None and not outcome.ok else 200,
    )


@require_http_methods(["GET", "POST"])
@ashore_only("importing a fleet")
def import_page(request: AuthenticatedRequest) -> HttpResponse:
    """GET: the upload form. POST: the preview of the uploaded file, kept on the server by its
    checksum until confirmed."""
    check_import_for_user(request)
    if request.method != "POST":
        return _page(request, ImportUploadForm())
    form = ImportUploadForm(request.POST, request.FILES)
    if not form.is_valid():
        return _page(request, form)
    upload = form.cleaned_data["file"]
    data = upload.read()
    kind = form.cleaned_data["kind"]
    outcome = import_preview(kind=kind, data=data, file_name=upload.name, by=request.user)
    confirm = None
    if outcome.ok:
        staging.stage(data)
        confirm = ImportConfirmForm(
            initial={"kind": kind, "checksum": outcome.checksum, "file_name": upload.name}
        )
    return _page(request, ImportUploadForm(initial={"kind": kind}), outcome, confirm)


@require_POST
@ashore_only("importing a fleet")
def import_confirm(request: AuthenticatedRequest) -> HttpResponse:
    """Write the previewed file, all or nothing."""
    check_import_for_user(request)
    form = ImportConfirmForm(request.POST)
    data = staging.staged(form.data.get("checksum", "")) if form.is_valid() else None
    if data is None:
        messages.error(request, "That file is no longer waiting to be imported; upload it again.")
        return redirect(reverse("import"))
    kind, name = form.cleaned_data["kind"], form.cleaned_data["file_name"]
    try:
        outcome = import_commit(kind=kind, data=data, file_name=name, by=request.user)
    except ImportRefusedError as refused:
        return _page(request, ImportUploadForm(initial={"kind": kind}), refused.outcome)
    staging.discard(outcome.checksum)
    created = ", ".join(f"{count} {label}" for label, count in outcome.counts.items())
    messages.success(request, f"Imported {name}: {created or 'nothing new'}.")
    return redirect(reverse("import"))


@require_GET
def import_template(request: AuthenticatedRequest, kind: str) -> HttpResponse:
    """The empty file (header line) for ``kind``."""
    check_import_for_user(request)
    if kind not in KINDS:
        raise Http404("No such import kind.")
    response = HttpResponse(template_csv(kind), content_type="text/csv; charset=utf-8")
    response["Content-Disposition"] = f'attachment; filename="holdfast-{kind}-template.csv"'
    return response


@require_GET
def import_example(request: AuthenticatedRequest, name: str) -> FileResponse:
    """An example file with invented data, to try the import on the demo."""
    check_import_for_user(request)
    path = examples.example_path(name)
    if path is None:
        raise Http404("No such example.")
    return FileResponse(path.open("rb"), as_attachment=True, filename=path.name)
