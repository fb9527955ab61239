"""Unit pages for supervisors: register a unit or several at once, edit one, move it between
places, set or clear its hold. Every write goes through a service."""

from django.contrib import messages
from django.core.exceptions import ValidationError
from django.forms import BaseForm
from django.http import HttpRequest, HttpResponse
from django.shortcuts import redirect, render
from django.urls import reverse
from django.utils import timezone
from django.views.decorators.http import require_http_methods

from fleet import roles
from fleet.fleet_forms import UnitBatchForm, UnitForm, UnitHoldForm, UnitMoveForm
from fleet.models import Transponder, UnitHold
from fleet.services.fleet import unit_hold_set, unit_move, units_bring_into_service
from fleet.services.reference import unit_save

from .guards import AuthenticatedRequest, get_unit_for_user, require


def _apply_errors(form: BaseForm, exc: ValidationError) -> None:
    if hasattr(exc, "error_dict"):
        for name, errors in exc.message_dict.items():
            form.add_error(name if name in form.fields else None, errors)
    else:
        form.add_error(None, exc.messages)


@require(roles.can_supervise)
@require_http_methods(["GET", "POST"])
def unit_new(request: HttpRequest) -> HttpResponse:
    return _unit_form(request, Transponder())


@require_http_methods(["GET", "POST"])
def unit_edit(request: HttpRequest, serial: str) -> HttpResponse:
    return _unit_form(request, get_unit_for_user(request, serial, supervise=True))


def _unit_form(request: HttpRequest, unit: Transponder) -> HttpResponse:
    form = UnitForm(request.POST or None, instance=unit)
    if request.method == "POST":
        if form.is_valid():
            try:
                unit_save(unit=form.instance, expected_version=form.cleaned_data.get("version"))
            except ValidationError as exc:
                _apply_errors(form, exc)
            else:
                messages.success(request, f"Saved {unit.serial}.")
                return redirect(unit)
        return render(request, "fleet/unit_form.html", {"form": form, "unit": unit}, status=400)
    return render(request, "fleet/unit_form.html", {"form": form, "unit": unit})


@require(roles.can_supervise)
@require_http_methods(["GET", "POST"])
def units_new_batch(request: HttpRequest) -> HttpResponse:
    form = UnitBatchForm(request.POST or None, initial={"variant": request.GET.get("variant")})
    if request.method == "POST":
        if form.is_valid():
            try:
                units = units_bring_into_service(units=form.units())
            except ValidationError as exc:
                form.add_error(None, exc.messages)
            else:
                first, last = units[0].serial, units[-1].serial
                messages.success(
                    request,
                    f"Brought {len(units)} unit{'s' if len(units) > 1 else ''} into service "
                    f"({first}{f' to {last}' if len(units) > 1 else ''}).",
                )
                variant = form.cleaned_data["variant"]
                return redirect(f"{reverse('unit-list')}?variant={variant.pk}")
        return render(request, "fleet/unit_batch_form.html", {"form": form}, status=400)
    return render(request, "fleet/unit_batch_form.html", {"form": form})


@require_http_methods(["POST"])
def unit_move_view(request: HttpRequest, serial: str) -> HttpResponse:
    unit = get_unit_for_user(request, serial, supervise=True)
    form = UnitMoveForm(request.POST)
    if not form.is_valid():
        for errors in form.errors.values():
            for error in errors:
                messages.error(request, f"Not moved: {error}")
        return redirect(unit)
    place = form.cleaned_data["place"]
    try:
        unit_move(unit=unit, place=place, expected_version=form.cleaned_data["version"])
    except ValidationError as exc:
        for message in exc.messages:
            messages.error(request, f"Not moved: {message}")
    else:
        messages.success(request, f"{unit.serial} is now at {place}.")
    return redirect(unit)


@require_http_methods(["GET", "POST"])
def unit_hold(request: AuthenticatedRequest, serial: str) -> HttpResponse:
    unit = get_unit_for_user(request, serial, supervise=True)
    form = UnitHoldForm(request.POST or None, current=unit.hold)
    if request.method == "POST" and form.is_valid():
        hold = UnitHold(form.cleaned_data["hold"])
        try:
            unit_hold_set(
                unit=unit,
                hold=hold,
                reason=form.cleaned_data["reason"],
                by=request.user,
                at=timezone.now(),
            )
        except ValidationError as exc:
            _apply_errors(form, exc)
        else:
            messages.success(request, f"{unit.serial}: hold set to {hold.label.lower()}.")
            return redirect(unit)
    context = {
        "form": form,
        "unit": unit,
        "changes": unit.hold_changes.select_related("set_by"),
    }
    return render(
        request, "fleet/unit_hold.html", context, status=400 if request.method == "POST" else 200
    )
