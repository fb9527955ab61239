"""Reference data is managed here by supervisors: variants with their positions, places, sites.
Service records are written through the workshop pages (they carry the audit trail), so the
admin shows them read-only."""

from typing import Any, TypeVar

from django.contrib import admin
from django.db.models import Model
from django.http import HttpRequest

from . import models
from .services.reference import site_save, unit_save, variant_changed

_M = TypeVar("_M", bound=Model)

# The admin is where supervisors keep the reference data: branded as ours. Its sign-in page
# is replaced by ours (``fleet.views.signin.admin_login``, routed in fleet/urls.py).
admin.site.site_header = "Holdfast reference data"
admin.site.site_title = "Holdfast reference data"
admin.site.index_title = "Variants, units, places and sites"


class AnodePositionInline(admin.TabularInline[models.AnodePosition, models.Variant]):
    model = models.AnodePosition
    extra = 0


class SealPositionInline(admin.TabularInline[models.SealPosition, models.Variant]):
    model = models.SealPosition
    extra = 0


class ReplyChargeStepInline(admin.TabularInline[models.ReplyChargeStep, models.Variant]):
    model = models.ReplyChargeStep
    extra = 0


@admin.register(models.Variant)
class VariantAdmin(admin.ModelAdmin[models.Variant]):
    list_display = ("name", "depth_rating_m", "housing_alloy", "release_fitted")
    inlines = [AnodePositionInline, SealPositionInline, ReplyChargeStepInline]

    def save_related(self, request: HttpRequest, form: Any, formsets: Any, change: bool) -> None:
        super().save_related(request, form, formsets, change)
        # Intervals and positions feed every unit's due items: recompute them now.
        variant_changed(variant=form.instance)


@admin.register(models.Transponder)
class TransponderAdmin(admin.ModelAdmin[models.Transponder]):
    list_display = ("serial", "variant", "hold", "place", "acoustic_address")
    list_filter = ("hold", "variant", "place")
    search_fields = ("serial", "acoustic_address")
    # A hold is set, changed or cleared from the unit's page (``unit_hold_set``), which refuses
    # impossible moves and keeps the hold history; here it is shown, never edited.
    readonly_fields = ("hold", "hold_reason", "hold_set_by", "hold_set_at")

    def save_model(self, request: HttpRequest, obj: Any, form: Any, change: bool) -> None:
        unit_save(unit=obj)


@admin.register(models.Place)
class PlaceAdmin(admin.ModelAdmin[models.Place]):
    list_display = ("name", "kind")


@admin.register(models.Site)
class SiteAdmin(admin.ModelAdmin[models.Site]):
    list_display = ("name", "latitude_deg", "longitude_deg", "water_depth_m")

    def save_model(self, request: HttpRequest, obj: Any, form: Any, change: bool) -> None:
        site_save(site=obj)


class ReadOnlyAdmin(admin.ModelAdmin[_M]):
    def has_add_permission(self, request: object, obj: object = None) -> bool:
        return False

    def has_change_permission(self, request: object, obj: object = None) -> bool:
        return False

    def has_delete_permission(self, request: object, obj: object = None) -> bool:
        return False


@admin.register(models.ServiceRecord)
class ServiceRecordAdmin(ReadOnlyAdmin[models.ServiceRecord]):
    list_display = ("unit", "opened_at", "closed_at", "technician")


@admin.register(models.Deployment)
class DeploymentAdmin(ReadOnlyAdmin[models.Deployment]):
    list_display = ("unit", "site", "over_side_at", "recovered_at")


@admin.register(models.Amendment)
class AmendmentAdmin(ReadOnlyAdmin[models.Amendment]):
    list_display = ("record", "field_name", "original_value", "corrected_value", "created_by")


@admin.register(models.ReleaseCertificate)
class ReleaseCertificateAdmin(ReadOnlyAdmin[models.ReleaseCertificate]):
    """Issued and withdrawn from the record page (the service keeps numbering and supersession)."""

    list_display = ("number", "release_test", "status", "issued_at", "issued_by", "valid_until")
    list_filter = ("status", "year")
    search_fields = ("number",)
    exclude = ("verification_code",)
