"""PDF documents and certificate actions. Each view parses the request, guards, calls a
``fleet.documents`` prepare function or service, and serves the bytes."""

from typing import Literal, overload

from django.contrib import messages
from django.contrib.auth.decorators import login_not_required
from django.core.exceptions import ValidationError
from django.http import HttpRequest, HttpResponse, HttpResponseBadRequest
from django.shortcuts import redirect, render
from django.urls import reverse
from django.utils import timezone
from django.utils.http import url_has_allowed_host_and_scheme
from django.views.decorators.http import require_GET, require_http_methods, require_POST

from fleet import roles
from fleet.documents.certificate import prepare_certificate, render_certificate
from fleet.documents.checklist import prepare_checklist, render_checklist
from fleet.documents.labels import PAPERS, prepare_labels, render_labels
from fleet.documents.report import RecordOpenError, prepare_report, render_report
from fleet.forms import LabelContactForm, PlannedDeploymentForm
from fleet.models import LabelSetting, ReleaseCertificate, Site, Variant
from fleet.models.session import reading_one_unit
from fleet.models.units import serial_validator
from fleet.selectors import label_units
from fleet.services.certificates import certificate_issue, certificate_withdraw
from fleet.services.labels import label_contact_save

from .guards import (
    AuthenticatedRequest,
    get_certificate_for_user,
    get_record_for_user,
    get_release_test_for_user,
    get_unit_for_user,
    require,
)


def _pdf(data: bytes, filename: str) -> HttpResponse:
    response = HttpResponse(data, content_type="application/pdf")
    response["Content-Disposition"] = f'inline; filename="{filename}"'
    response["X-Content-Type-Options"] = "nosniff"
    return response


def _bad(message: str) -> HttpResponse:
    return HttpResponseBadRequest(message, content_type="text/plain; charset=utf-8")


@overload
def _int_param(
    request: HttpRequest, name: str, lo: int, hi: int, *, required: Literal[True]
) -> int: ...


@overload
def _int_param(
    request: HttpRequest, name: str, lo: int, hi: int, *, required: bool
) -> int | None: ...


def _int_param(request: HttpRequest, name: str, lo: int, hi: int, *, required: bool) -> int | None:
    raw = request.GET.get(name, "").strip()
    if not raw:
        if required:
            raise ValueError(f"Give {name}.")
        return None
    try:
        value = int(raw)
    except ValueError:
        raise ValueError(f"{name} must be a whole number, not {raw[:20]!r}.") from None
    if not lo <= value <= hi:
        raise ValueError(f"{name} must be between {lo} and {hi}, not {value}.")
    return value


@require_GET
@reading_one_unit
def checklist_pdf(request: HttpRequest, serial: str) -> HttpResponse:
    """``?site=<id>&start=YYYY-MM-DD&days=N[&rate=N&step=N]``; any bad parameter is a 400."""
    unit = get_unit_for_user(request, serial)
    now = timezone.now()
    form = PlannedDeploymentForm(request.GET, today=timezone.localdate(now))
    if not form.is_valid():
        problems = "; ".join(
            f"{name}: {' '.join(str(e) for e in errors)}" for name, errors in form.errors.items()
        )
        return _bad(f"Cannot prepare the checklist: {problems}")
    doc = prepare_checklist(
        unit,
        form.planned(),
        at=now,
        unit_url=request.build_absolute_uri(unit.get_absolute_url()),
    )
    return _pdf(render_checklist(doc), f"{doc.reference}.pdf")


@require_GET
def checklist_form(request: HttpRequest, serial: str) -> HttpResponse:
    """A small GET form that builds the checklist address."""
    unit = get_unit_for_user(request, serial)
    return render(
        request,
        "fleet/documents/checklist_form.html",
        {
            "unit": unit,
            "sites": Site.objects.order_by("name"),
            "today": timezone.localdate(),
        },
    )


# At most this many units on one sheet request (21 pages of 24).
MAX_LABEL_UNITS = 500


def _label_serials(request: HttpRequest) -> list[str] | None:
    """The ``unit`` parameters (serials, any case), or ``None`` when none is given."""
    raw = [s.strip().upper() for s in request.GET.getlist("unit") if s.strip()]
    if not raw:
        return None
    if len(raw) > MAX_LABEL_UNITS:
        raise ValueError(f"Choose at most {MAX_LABEL_UNITS} units for one sheet, not {len(raw)}.")
    for serial in raw:
        try:
            serial_validator(serial)
        except ValidationError:
            raise ValueError(f"{serial[:40]!r} is not a unit serial.") from None
    return sorted(set(raw))


def _label_variant(request: HttpRequest) -> int | None:
    if not request.GET.get("variant", "").strip():
        return None
    variant_id = _int_param(request, "variant", 1, 2**62, required=True)
    if not Variant.objects.filter(pk=variant_id).exists():
        raise ValueError(f"There is no variant with id {variant_id}.")
    return variant_id


@require_GET
@require(roles.can_read)
def labels_pdf(request: HttpRequest) -> HttpResponse:
    """``?paper=a4|letter``, then ``variant=<id>`` and/or ``unit=<serial>`` (repeatable);
    lost and retired units are left off unless ``include_held=1``. Bad input is a 400."""
    paper = request.GET.get("paper", "a4").strip().lower()
    if paper not in PAPERS:
        return _bad(f"Unknown paper size {paper[:20]!r}; use one of: {', '.join(PAPERS)}.")
    try:
        serials = _label_serials(request)
        variant_id = _label_variant(request)
    except ValueError as exc:
        return _bad(str(exc))
    include_held = request.GET.get("include_held", "") in ("1", "on", "true")
    selection = label_units(serials=serials, variant_id=variant_id, include_held=include_held)
    if selection.unknown:
        return _bad(f"No unit has the serial {', '.join(selection.unknown)}.")
    if selection.left_out and not selection.units:
        return _bad(
            f"{', '.join(selection.left_out)}: lost or retired, so left off the sheet. "
            'Ask for them with include_held=1 (tick "Include lost and retired units").'
        )
    scope = None
    if serials is not None:
        scope = f"U-{serials[0]}" if len(serials) == 1 else f"SEL{len(serials)}"
    sheet = prepare_labels(
        selection.units,
        paper=paper,
        variant_id=variant_id,
        on=timezone.localdate(),
        url_for=lambda u: request.build_absolute_uri(u.get_absolute_url()),
        contact=LabelSetting.current().contact_line,
        scope=scope,
    )
    return _pdf(render_labels(sheet), f"{sheet.reference}.pdf")


@require_http_methods(["GET", "POST"])
@require(roles.can_supervise)
def label_contact(request: AuthenticatedRequest) -> HttpResponse:
    """The "if found, contact" line every label prints; supervisors set it."""
    current = LabelSetting.current()
    form = LabelContactForm(request.POST or None, instance=current)
    if request.method == "POST" and form.is_valid():
        try:
            label_contact_save(
                contact_line=form.cleaned_data["contact_line"], by=request.user, at=timezone.now()
            )
        except ValidationError as exc:
            messages.error(request, " ".join(exc.messages))
        else:
            messages.success(request, "Saved the contact line the labels print.")
            return redirect("label-contact")
    return render(request, "fleet/documents/label_contact.html", {"form": form, "setting": current})


@require_GET
def record_report_pdf(request: HttpRequest, pk: int) -> HttpResponse:
    record = get_record_for_user(request, pk)
    try:
        doc = prepare_report(record, charts_on=timezone.localdate())
    except RecordOpenError as exc:
        return HttpResponse(str(exc), status=409, content_type="text/plain; charset=utf-8")
    return _pdf(render_report(doc), f"{doc.reference}.pdf")


def _back(request: HttpRequest, fallback: str) -> HttpResponse:
    target = request.POST.get("next", "")
    if url_has_allowed_host_and_scheme(
        target, allowed_hosts={request.get_host()}, require_https=request.is_secure()
    ):
        return redirect(target)
    return redirect(fallback)


@require_POST
def certificate_issue_view(request: AuthenticatedRequest, pk: int) -> HttpResponse:
    test = get_release_test_for_user(request, pk)
    try:
        certificate = certificate_issue(release_test=test, by=request.user, at=timezone.now())
    except ValidationError as exc:
        messages.error(request, " ".join(exc.messages))
    else:
        messages.success(request, f"Issued certificate {certificate.number}.")
    return _back(request, test.record.get_absolute_url())


@require_POST
def certificate_withdraw_view(request: AuthenticatedRequest, number: str) -> HttpResponse:
    certificate = get_certificate_for_user(request, number, supervise=True)
    try:
        certificate_withdraw(
            certificate=certificate,
            reason=request.POST.get("reason", ""),
            by=request.user,
            at=timezone.now(),
        )
    except ValidationError as exc:
        messages.error(request, " ".join(exc.messages))
    else:
        messages.success(request, f"Withdrew certificate {certificate.number}.")
    return _back(request, certificate.release_test.record.get_absolute_url())


@require_GET
def certificate_pdf(request: HttpRequest, number: str) -> HttpResponse:
    certificate = get_certificate_for_user(request, number)
    verify_url = request.build_absolute_uri(
        reverse("certificate-verify", args=[certificate.verification_code])
    )
    doc = prepare_certificate(certificate, verify_url=verify_url)
    return _pdf(render_certificate(doc), f"{certificate.number}.pdf")


@login_not_required
@require_GET
def certificate_verify(request: HttpRequest, code: str) -> HttpResponse:
    """Public: the key facts of one certificate, nothing else (no notes, no reasons, no names)."""
    certificate = (
        ReleaseCertificate.objects.select_related("release_test__record__unit", "superseded_by")
        .filter(verification_code=code)
        .first()
    )
    context: dict[str, object] = {"certificate": certificate, "code": code[:40]}
    if certificate is None:
        return render(request, "fleet/documents/verify.html", context, status=404)
    today = timezone.localdate()
    context.update(
        {
            "serial": certificate.release_test.record.unit.serial,
            "expired": certificate.is_current and certificate.valid_until < today,
        }
    )
    response = render(request, "fleet/documents/verify.html", context)
    response["X-Robots-Tag"] = "noindex"
    return response
