"""Vessel kits: the list, making one (ashore), downloading its file, packing it (on board)."""

from __future__ import annotations

import tempfile
from pathlib import Path

from django.conf import settings
from django.contrib import messages
from django.core.exceptions import ValidationError
from django.http import FileResponse, Http404, HttpResponse
from django.http.response import HttpResponseBase
from django.shortcuts import redirect, render
from django.urls import reverse
from django.utils import timezone
from django.views.decorators.http import require_GET, require_http_methods, require_POST

from fleet.kits.forms import KitForm, KitUnitFilterForm
from fleet.kits.identity import current_kit
from fleet.selectors import kit_rows
from fleet.services.kits import kit_export, kit_pack

from .guards import AuthenticatedRequest, ashore_only, check_kits_for_user, get_kit_for_user

KIT_SUFFIX = ".holdfast-kit"


def kit_file_path(code: str) -> Path:
    return Path(settings.KIT_FILES_ROOT) / f"{code}{KIT_SUFFIX}"


@require_GET
def kit_list(request: AuthenticatedRequest) -> HttpResponse:
    """Ashore: every kit with its status. On board: this kit, and the button that packs it."""
    check_kits_for_user(request)
    here = current_kit()
    kits = kit_rows()
    files = {kit.code for kit in kits if kit_file_path(kit.code).is_file()}
    return render(request, "fleet/kit_list.html", {"kits": kits, "here": here, "files": files})


@require_http_methods(["GET", "POST"])
@ashore_only("making a kit")
def kit_new(request: AuthenticatedRequest) -> HttpResponse:
    check_kits_for_user(request)
    unit_filter = KitUnitFilterForm(request.GET or None)
    text = unit_filter.cleaned_data["q"] if unit_filter.is_valid() else ""
    if request.method != "POST":
        form = KitForm(unit_filter=text)
        return render(request, "fleet/kit_form.html", {"form": form, "filter": unit_filter})
    form = KitForm(request.POST)
    if form.is_valid():
        data = form.cleaned_data
        root = Path(settings.KIT_FILES_ROOT)
        root.mkdir(parents=True, exist_ok=True)
        with tempfile.TemporaryDirectory(dir=root) as work:
            made = Path(work) / f"new{KIT_SUFFIX}"
            try:
                kit = kit_export(
                    units=list(data["units"]),
                    sites=list(data["sites"]),
                    users=list(data["users"]),
                    job=data["job"],
                    by=request.user,
                    out=made,
                )
            except ValidationError as exc:
                for field, errors in exc.message_dict.items():
                    form.add_error(field if field in form.fields else None, errors)
            else:
                made.replace(kit_file_path(kit.code))
                messages.success(
                    request,
                    f"Kit {kit.code} is made: download its file below and copy it to the "
                    "vessel's laptop.",
                )
                return redirect(reverse("kit-list"))
    return render(
        request, "fleet/kit_form.html", {"form": form, "filter": KitUnitFilterForm()}, status=400
    )


@require_GET
def kit_file(request: AuthenticatedRequest, code: str) -> FileResponse:
    kit = get_kit_for_user(request, code)
    path = kit_file_path(kit.code)
    if not path.is_file():
        raise Http404("This kit's file is not kept here.")
    return FileResponse(path.open("rb"), as_attachment=True, filename=path.name)


@require_POST
def kit_pack_view(request: AuthenticatedRequest) -> HttpResponseBase:
    """On board: write the returning file and offer it for download."""
    check_kits_for_user(request)
    kit = current_kit()
    if kit is None:
        messages.error(request, "This is the shore database: there is no vessel kit to pack.")
        return redirect(reverse("kit-list"))
    name = f"{kit.code}-return-{timezone.localdate():%Y%m%d}{KIT_SUFFIX}"
    work = Path(tempfile.mkdtemp(prefix="holdfast-pack-"))
    out = kit_pack(by=request.user, out=work / name)
    response = FileResponse(out.open("rb"), as_attachment=True, filename=name)
    out.unlink()  # the open handle keeps the data until the response is sent
    work.rmdir()
    return response
