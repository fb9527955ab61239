from django.contrib import messages
from django.core.exceptions import PermissionDenied, ValidationError
from django.db.models import Model
from django.http import HttpResponse
from django.shortcuts import redirect, render
from django.utils import timezone
from django.views.decorators.http import require_http_methods

from fleet import roles
from fleet.due.rules import rules_for
from fleet.forms import AmendmentForm, CloseRecordForm, ServiceRecordForm, entry_formsets
from fleet.models import ServiceRecord
from fleet.models.records import Entry, amendable_field
from fleet.selectors import record_amendments, record_sections
from fleet.services.records import (
    amendable_fields,
    amendable_targets,
    amendment_create,
    can_discard,
    check_can_open_record,
    open_record_of,
    service_record_close,
    service_record_discard,
    service_record_save,
)

from .guards import AuthenticatedRequest, get_record_for_user, get_unit_for_user


def _edit(
    request: AuthenticatedRequest, record: ServiceRecord, template_title: str
) -> HttpResponse:
    data = request.POST if request.method == "POST" else None
    files = request.FILES if request.method == "POST" else None
    form = ServiceRecordForm(data, instance=record, unit=record.unit)
    formsets = entry_formsets(form.instance, data, files)
    errors: list[str] = []
    if request.method == "POST":
        valid = form.is_valid()
        valid = all([fs.is_valid() for _, fs in formsets]) and valid  # validate every formset
        if valid:
            entries, deleted = [], []
            for _, formset in formsets:
                entries.extend(formset.save(commit=False))
                deleted.extend(formset.deleted_objects)
            try:
                expected = int(request.POST.get("version", "0")) if record.pk else None
            except ValueError:
                expected = -1
            try:
                saved = service_record_save(
                    record=form.instance,
                    entries=entries,
                    delete=deleted,
                    by=request.user,
                    expected_version=expected,
                    pack_removal=form.pack_removal,
                )
            except ValidationError as exc:
                errors = exc.messages
                if record.pk is None:
                    form.instance.pk = None  # nothing was saved; keep showing a new record
            else:
                messages.success(request, f"Saved the bench visit for {saved.unit.serial}.")
                return redirect(saved)
        else:
            errors = ["Nothing was saved. Correct the fields marked below."]
    return render(
        request,
        "fleet/record_form.html",
        {
            "unit": record.unit,
            "record": record,
            "form": form,
            "formsets": formsets,
            "errors": errors,
            # A refused new visit links to the one in progress.
            "open_record": open_record_of(record.unit) if errors and record.pk is None else None,
            "title": template_title,
        },
        status=400 if errors else 200,
    )


@require_http_methods(["GET", "POST"])
def record_new(request: AuthenticatedRequest, serial: str) -> HttpResponse:
    unit = get_unit_for_user(request, serial, write=True)
    try:
        check_can_open_record(unit)
    except ValidationError as exc:
        messages.error(request, " ".join(exc.messages))
        current = open_record_of(unit)
        return redirect(current or unit)
    record = ServiceRecord(
        unit=unit,
        opened_at=timezone.now().replace(second=0, microsecond=0),
        technician=request.user,
        place=unit.place,
    )
    return _edit(request, record, f"New bench visit for {unit.serial}")


@require_http_methods(["GET", "POST"])
def record_edit(request: AuthenticatedRequest, pk: int) -> HttpResponse:
    record = get_record_for_user(request, pk, write=True)
    if record.is_closed:
        messages.error(request, "This record is closed. Correct it with an amendment.")
        return redirect("record-amend", pk=record.pk)
    return _edit(request, record, f"Bench visit for {record.unit.serial}")


def _target_label(target: Model) -> str:
    if isinstance(target, Entry):
        return f"{target.kind_label.capitalize()} #{target.pk}: {target}"
    return "Record"


def record_detail(request: AuthenticatedRequest, pk: int) -> HttpResponse:
    record = get_record_for_user(request, pk)
    sections = record_sections(record=record, rules=rules_for(record.unit.variant))
    empty = not any(entries for _, entries in sections)
    return render(
        request,
        "fleet/record_detail.html",
        {
            "record": record,
            "unit": record.unit,
            "sections": sections,
            "amendments": record_amendments(record=record),
            "close_form": CloseRecordForm(initial={"version": record.version}),
            "can_discard": empty
            and not record.is_closed
            and roles.can_record(request.user)
            and can_discard(record, request.user),
        },
    )


@require_http_methods(["POST"])
def record_close(request: AuthenticatedRequest, pk: int) -> HttpResponse:
    record = get_record_for_user(request, pk, supervise=True)
    form = CloseRecordForm(request.POST)
    if not form.is_valid():
        messages.error(
            request,
            "Tick the confirmation to close the record."
            if "confirm" in form.errors
            else "The close form was incomplete; reload the record and close it again.",
        )
        return redirect(record)
    try:
        service_record_close(
            record=record,
            by=request.user,
            at=timezone.now(),
            expected_version=form.cleaned_data["version"],
        )
    except ValidationError as exc:
        messages.error(request, " ".join(exc.messages))
    else:
        messages.success(request, "Record closed. It is now read-only.")
    return redirect(record)


@require_http_methods(["POST"])
def record_discard(request: AuthenticatedRequest, pk: int) -> HttpResponse:
    record = get_record_for_user(request, pk, write=True)
    if not can_discard(record, request.user):
        raise PermissionDenied
    unit = record.unit
    try:
        service_record_discard(record=record, by=request.user)
    except ValidationError as exc:
        messages.error(request, " ".join(exc.messages))
        return redirect(record)
    messages.success(request, f"The empty bench visit for {unit.serial} was discarded.")
    return redirect(unit)


@require_http_methods(["GET", "POST"])
def record_amend(request: AuthenticatedRequest, pk: int) -> HttpResponse:
    # Only supervisors correct a closed record (the service refuses anyone else too).
    record = get_record_for_user(request, pk, supervise=True)
    if not record.is_closed:
        return redirect("record-edit", pk=record.pk)
    targets = {f"{t._meta.model_name}:{t.pk}": t for t in amendable_targets(record)}
    choices = []
    for key, target in targets.items():
        for field_name in amendable_fields(target):
            field = amendable_field(target, field_name)
            current = field.value_to_string(target)
            label = f"{_target_label(target)} — {field.verbose_name} (now: {current or 'empty'})"
            choices.append((f"{key}:{field_name}", label))
    form = AmendmentForm(request.POST or None, choices=choices, initial={"version": record.version})
    status = 200
    if request.method == "POST":
        if form.is_valid():
            model_name, target_pk, field_name = form.cleaned_data["target_field"].split(":")
            try:
                amendment_create(
                    record=record,
                    target=targets[f"{model_name}:{target_pk}"],
                    field_name=field_name,
                    corrected_value=form.cleaned_data["corrected_value"],
                    reason=form.cleaned_data["reason"],
                    by=request.user,
                    expected_version=form.cleaned_data["version"],
                )
            except ValidationError as exc:
                if hasattr(exc, "error_dict"):
                    for name, errs in exc.message_dict.items():
                        form.add_error(name if name in form.fields else "corrected_value", errs)
                else:
                    form.add_error(None, exc.messages)
            else:
                messages.success(request, "Amendment recorded; the original value is kept.")
                return redirect(record)
        status = 400
    return render(
        request,
        "fleet/record_amend.html",
        {"record": record, "unit": record.unit, "form": form},
        status=status,
    )
