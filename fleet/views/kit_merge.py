"""The kit merge pages (supervisors): upload a return file, see the preview (nothing written),
confirm, then the result with the conflicts kept, each with its resolution form."""

from __future__ import annotations

import tempfile
from pathlib import Path
from typing import Any

from django.contrib import messages
from django.core.exceptions import ValidationError
from django.http import HttpRequest, HttpResponse
from django.shortcuts import redirect, render
from django.urls import reverse
from django.views.decorators.http import require_GET, require_http_methods, require_POST

from fleet.archive import ArchiveError
from fleet.kits import merge_staging
from fleet.kits.merge import MergePlan, MergeRefusedError
from fleet.kits.merge_forms import ConflictResolveForm, KitConfirmForm, KitUploadForm
from fleet.models import KitConflict, KitMerge
from fleet.services.kit_merge import conflict_resolve, merge_apply, merge_preview

from .guards import (
    AuthenticatedRequest,
    ashore_only,
    check_kit_merge_for_user,
    get_kit_conflict_for_user,
    get_kit_merge_for_user,
)


def _page(
    request: HttpRequest,
    form: KitUploadForm,
    *,
    plan: MergePlan | None = None,
    confirm: KitConfirmForm | None = None,
    error: str = "",
) -> HttpResponse:
    return render(
        request,
        "fleet/kit_merge.html",
        {
            "form": form,
            "plan": plan,
            "confirm": confirm,
            "error": error,
            "merges": KitMerge.objects.select_related("kit", "merged_by")[:20],
        },
        status=400 if error else 200,
    )


def _preview(path: Path) -> MergePlan:
    from fleet.kits.files import read_kit_file

    with tempfile.TemporaryDirectory(prefix="holdfast-kit-preview-") as work:
        return merge_preview(read_kit_file(path, into=Path(work)))


@require_http_methods(["GET", "POST"])
@ashore_only("merging a kit back")
def kit_merge_page(request: AuthenticatedRequest) -> HttpResponse:
    """GET: the upload form and the merges so far. POST: the preview of the uploaded file,
    kept on the server by its checksum until confirmed."""
    check_kit_merge_for_user(request)
    if request.method != "POST":
        return _page(request, KitUploadForm())
    form = KitUploadForm(request.POST, request.FILES)
    if not form.is_valid():
        return _page(request, form)
    upload = form.cleaned_data["file"]
    digest = merge_staging.stage(upload.read())
    path = merge_staging.staged(digest)
    assert path is not None
    try:
        plan = _preview(path)
    except (ArchiveError, MergeRefusedError) as exc:
        merge_staging.discard(digest)
        return _page(request, KitUploadForm(), error=f"{upload.name} is refused: {exc}")
    confirm = KitConfirmForm(initial={"checksum": digest, "file_name": upload.name})
    return _page(request, KitUploadForm(), plan=plan, confirm=confirm)


@require_POST
@ashore_only("merging a kit back")
def kit_merge_confirm(request: AuthenticatedRequest) -> HttpResponse:
    """Merge the previewed file, all of it in one transaction."""
    from fleet.kits.files import read_kit_file

    check_kit_merge_for_user(request)
    form = KitConfirmForm(request.POST)
    path = merge_staging.staged(form.data.get("checksum", "")) if form.is_valid() else None
    if path is None:
        messages.error(request, "That file is no longer waiting to be merged; upload it again.")
        return redirect(reverse("kit-merge"))
    digest = form.cleaned_data["checksum"]
    try:
        with tempfile.TemporaryDirectory(prefix="holdfast-kit-merge-") as work:
            merge = merge_apply(read_kit_file(path, into=Path(work)), by=request.user)
    except (ArchiveError, MergeRefusedError, ValidationError) as exc:
        text = "; ".join(getattr(exc, "messages", None) or [str(exc)])
        return _page(request, KitUploadForm(), error=f"The merge is refused: {text}")
    merge_staging.discard(digest)
    messages.success(request, f"Merged {form.cleaned_data['file_name']} into kit {merge.kit.code}.")
    return redirect(reverse("kit-merge-result", args=[merge.pk]))


@require_GET
@ashore_only("merging a kit back")
def kit_merge_result(request: AuthenticatedRequest, pk: int) -> HttpResponse:
    merge = get_kit_merge_for_user(request, pk)
    conflicts = list(
        KitConflict.objects.filter(merge__kit=merge.kit)
        .select_related("unit", "resolved_by", "merge")
        .order_by("merge__merged_at", "pk")
    )
    forms = {c.pk: ConflictResolveForm(conflict=c, prefix=f"c{c.pk}") for c in conflicts}
    return render(
        request,
        "fleet/kit_merge_result.html",
        {
            "merge": merge,
            "conflicts": [(c, forms[c.pk], _sides(c)) for c in conflicts],
            "open_conflicts": sum(1 for c in conflicts if not c.is_resolved),
        },
    )


def _side_rows(side: str, rows: list[dict[str, Any]]) -> list[dict[str, Any]]:
    shown = []
    for row in rows:
        what = row.get("model") or f"change ({row.get('change', '')})"
        values = row.get("fields") or row.get("payload") or {}
        shown.append(
            {
                "title": f"{side} {what}",
                "text": row.get("text", ""),
                "values": [(name, "(none)" if v is None else v) for name, v in values.items()],
            }
        )
    return shown


def _sides(conflict: KitConflict) -> dict[str, list[dict[str, Any]]]:
    """Both sides of a conflict as the page lists them: each row's line and every value."""
    return {
        "shore": _side_rows("Shore", list(conflict.shore_version or [])),
        "vessel": _side_rows("Vessel", list(conflict.vessel_version or [])),
    }


@require_POST
@ashore_only("merging a kit back")
def kit_conflict_resolve(request: AuthenticatedRequest, pk: int) -> HttpResponse:
    conflict = get_kit_conflict_for_user(request, pk)
    form = ConflictResolveForm(request.POST, conflict=conflict, prefix=f"c{conflict.pk}")
    target = reverse("kit-merge-result", args=[conflict.merge_id]) + f"#conflict-{conflict.pk}"
    if not form.is_valid():
        messages.error(request, "Choose one of the resolutions offered.")
        return redirect(target)
    try:
        conflict_resolve(
            conflict=conflict,
            choice=form.cleaned_data["choice"],
            by=request.user,
            note=form.cleaned_data["note"],
        )
    except ValidationError as exc:
        messages.error(request, " ".join(exc.messages))
        return redirect(target)
    messages.success(
        request,
        f"Conflict on {conflict.unit.serial} resolved: {conflict.get_resolution_display()}.",
    )
    return redirect(target)
