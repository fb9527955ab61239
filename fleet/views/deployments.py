from django.contrib import messages
from django.core.exceptions import ValidationError
from django.forms import BaseForm
from django.http import HttpRequest, HttpResponse
from django.shortcuts import redirect, render
from django.utils import timezone
from django.views.decorators.http import require_http_methods
from django_tables2 import RequestConfig

from fleet import roles
from fleet.exports import csv_response
from fleet.forms import DeploymentForm, DeploymentOverrideForm, RecoveryForm, SiteForm
from fleet.models import Deployment, Site, Transponder, UnitHold
from fleet.services.deployments import ReadinessError, deployment_recover, deployment_start
from fleet.services.reference import site_save
from fleet.tables import DeploymentTable, SiteTable

from .guards import AuthenticatedRequest, get_deployment_for_user, get_site_for_user, require


def _apply_errors(form: BaseForm, exc: ValidationError) -> None:
    if hasattr(exc, "error_dict"):
        for name, errs in exc.message_dict.items():
            form.add_error(name if name in form.fields else None, errs)
    else:
        form.add_error(None, exc.messages)


@require(roles.can_read)
def deployment_list(request: HttpRequest) -> HttpResponse:
    queryset = Deployment.objects.select_related("unit", "site")
    in_water_only = request.GET.get("open") == "1"
    if in_water_only:
        # A unit held as lost is not in the water as far as anyone knows.
        queryset = queryset.filter(recovered_at__isnull=True).exclude(unit__hold=UnitHold.LOST)
    table = DeploymentTable(queryset)
    if request.GET.get("export") == "csv":
        return csv_response(table, "holdfast-deployments.csv")
    RequestConfig(request, paginate={"per_page": 50}).configure(table)
    return render(
        request, "fleet/deployment_list.html", {"table": table, "in_water_only": in_water_only}
    )


@require(roles.can_record)
@require_http_methods(["GET", "POST"])
def deployment_new(request: AuthenticatedRequest) -> HttpResponse:
    initial: dict[str, object] = {"over_side_at": timezone.now().replace(second=0, microsecond=0)}
    serial = request.GET.get("unit")
    if serial:
        unit = Transponder.objects.filter(serial=serial).first()
        if unit:
            initial.update(unit=unit.pk, transmit_power_step=unit.transmit_power_step)
    form = DeploymentForm(request.POST or None, initial=initial)
    can_override = roles.can_supervise(request.user)
    override = DeploymentOverrideForm(request.POST or None, prefix="override")
    failed_checks = None
    status = 200
    if request.method == "POST":
        if form.is_valid() and override.is_valid():
            try:
                deployment = deployment_start(
                    deployment=form.instance,
                    by=request.user,
                    override_reason=override.cleaned_data["reason"] if can_override else "",
                )
            except ReadinessError as exc:
                failed_checks = exc.checks
                form.add_error(None, exc.summary)
                if exc.override_error:
                    override.add_error("reason", exc.override_error)
            except ValidationError as exc:
                _apply_errors(form, exc)
            else:
                if deployment.overridden:
                    messages.warning(
                        request,
                        f"{deployment.unit.serial} is in the water against a failed check; "
                        "the reason is kept with the deployment.",
                    )
                else:
                    messages.success(request, f"{deployment.unit.serial} is in the water.")
                return redirect(deployment.unit)
        status = 400
    return render(
        request,
        "fleet/deployment_form.html",
        {
            "form": form,
            "override": override,
            "can_override": can_override,
            "failed_checks": failed_checks,
        },
        status=status,
    )


@require_http_methods(["GET", "POST"])
def deployment_recover_view(request: AuthenticatedRequest, pk: int) -> HttpResponse:
    deployment = get_deployment_for_user(request, pk, write=True)
    form = RecoveryForm(
        request.POST or None,
        initial={"recovered_at": timezone.now().replace(second=0, microsecond=0)},
    )
    status = 200
    if request.method == "POST":
        if form.is_valid():
            try:
                deployment_recover(
                    deployment=deployment,
                    recovered_at=form.cleaned_data["recovered_at"],
                    replies_counted=form.cleaned_data["replies_counted"],
                    place=form.cleaned_data["place"],
                    by=request.user,
                )
            except ValidationError as exc:
                _apply_errors(form, exc)
            else:
                messages.success(request, f"{deployment.unit.serial} recovered; book it in.")
                return redirect(deployment.unit)
        status = 400
    return render(
        request,
        "fleet/deployment_recover.html",
        {"form": form, "deployment": deployment},
        status=status,
    )


@require(roles.can_read)
def site_list(request: HttpRequest) -> HttpResponse:
    table = SiteTable(Site.objects.all())
    RequestConfig(request, paginate=False).configure(table)
    return render(request, "fleet/site_list.html", {"table": table})


def site_detail(request: HttpRequest, pk: int) -> HttpResponse:
    site = get_site_for_user(request, pk)
    table = DeploymentTable(site.deployments.select_related("unit", "site"))
    RequestConfig(request, paginate={"per_page": 50}).configure(table)
    return render(request, "fleet/site_detail.html", {"site": site, "table": table})


@require(roles.can_supervise)
@require_http_methods(["GET", "POST"])
def site_new(request: HttpRequest) -> HttpResponse:
    return _site_form(request, Site())


@require_http_methods(["GET", "POST"])
def site_edit(request: HttpRequest, pk: int) -> HttpResponse:
    return _site_form(request, get_site_for_user(request, pk, supervise=True))


def _site_form(request: HttpRequest, site: Site) -> HttpResponse:
    form = SiteForm(request.POST or None, instance=site)
    if request.method == "POST":
        if form.is_valid():
            site_save(site=form.instance)
            messages.success(request, f"Saved site {site.name}.")
            return redirect(site)
        return render(request, "fleet/site_form.html", {"form": form, "site": site}, status=400)
    return render(request, "fleet/site_form.html", {"form": form, "site": site})
