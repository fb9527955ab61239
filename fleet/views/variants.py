"""Variant pages for supervisors: the list, one variant with its positions and gland checks,
and the form that creates or edits a variant with its positions and power steps."""

from typing import Any

from django.contrib import messages
from django.core.exceptions import ValidationError
from django.db.models import Count
from django.forms import BaseInlineFormSet
from django.http import HttpRequest, HttpResponse
from django.shortcuts import redirect, render
from django.urls import reverse
from django.views.decorators.http import require_http_methods

from fleet import roles
from fleet.due.glands import SOURCES, gland_report
from fleet.fleet_forms import VariantForm, variant_formsets, variant_parts
from fleet.models import Variant
from fleet.services.fleet import variant_save

from .guards import get_variant_for_user, require


@require(roles.can_supervise)
def variant_list(request: HttpRequest) -> HttpResponse:
    variants = Variant.objects.annotate(
        unit_count=Count("units", distinct=True),
        anode_count=Count("anode_positions", distinct=True),
        seal_count=Count("seal_positions", distinct=True),
    ).order_by("name")
    return render(request, "fleet/variant_list.html", {"variants": variants})


def variant_detail(request: HttpRequest, pk: int) -> HttpResponse:
    variant = get_variant_for_user(request, pk)
    seals = [(p, gland_report(p)) for p in variant.seal_positions.all()]
    return render(
        request,
        "fleet/variant_detail.html",
        {
            "variant": variant,
            "anodes": variant.anode_positions.all(),
            "seals": seals,
            "steps": variant.reply_steps.all(),
            "gland_sources": SOURCES,
            "unit_count": variant.units.count(),
            "units_url": f"{reverse('unit-list')}?variant={variant.pk}",
        },
    )


@require(roles.can_supervise)
@require_http_methods(["GET", "POST"])
def variant_new(request: HttpRequest) -> HttpResponse:
    return _variant_form(request, Variant())


@require_http_methods(["GET", "POST"])
def variant_edit(request: HttpRequest, pk: int) -> HttpResponse:
    return _variant_form(request, get_variant_for_user(request, pk))


def _all_valid(
    form: VariantForm, formsets: list[tuple[str, BaseInlineFormSet[Any, Any, Any]]]
) -> bool:
    valid = form.is_valid()
    for _, formset in formsets:
        valid = formset.is_valid() and valid  # validate every formset, to show every error
    return valid


def _variant_form(request: HttpRequest, variant: Variant) -> HttpResponse:
    data = request.POST if request.method == "POST" else None
    form = VariantForm(data, instance=variant)
    formsets = variant_formsets(variant, data)
    if data is not None and _all_valid(form, formsets):
        try:
            variant_save(variant=form.instance, parts=variant_parts(formsets))
        except ValidationError as exc:
            form.add_error(None, exc.messages)
        else:
            messages.success(request, f"Saved variant {variant.name}; its units' due items follow.")
            return redirect("variant-detail", pk=variant.pk)
    context = {"form": form, "formsets": formsets, "variant": variant}
    return render(
        request, "fleet/variant_form.html", context, status=400 if data is not None else 200
    )
