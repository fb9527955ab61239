from typing import Any

from django.contrib import messages
from django.core.exceptions import PermissionDenied, ValidationError
from django.db.models import Model
from django.http import HttpResponse
from django.shortcuts import redirect, render
from django.utils import timezone
from django.views.decorators.http import require_http_methods

from fleet import roles
from fleet.cautions import Caution, Task, bench_cautions, record_cautions, unit_cautions
from fleet.due.rules import rules_for
from fleet.formatting import field_label, field_value
from fleet.forms import (
    AmendmentEntryForm,
    AmendmentFieldForm,
    AmendmentForm,
    CloseRecordForm,
    ServiceRecordForm,
    amendment_form_field,
    amendment_initial,
    entry_formsets,
)
from fleet.models import ServiceRecord
from fleet.models.records import Entry
from fleet.selectors import (
    EntryNames,
    entry_names,
    record_amendments,
    record_sections,
    section_entry_names,
)
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


def _bench_sections(
    record: ServiceRecord, formsets: list[tuple[str, Any]]
) -> list[tuple[str, Any, tuple[Caution, ...]]]:
    """Each formset with the cautions of the hazard its section records."""
    by_prefix = bench_cautions(record.unit)
    return [(title, fs, by_prefix.get(fs.prefix, ())) for title, fs in formsets]


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
            "sections": _bench_sections(record, formsets),
            "cautions": unit_cautions(record.unit, tasks=[Task.OPEN_HOUSING]),
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


def _target_label(target: Model, names: EntryNames) -> str:
    if isinstance(target, Entry):
        return f"{names[(type(target), target.pk)]}: {target.history_line()}"
    return "The visit itself (its summary)"


def _field_choices(target: Model) -> list[tuple[str, str]]:
    """The target's amendable values by label, each with what is recorded now, in words."""
    return [
        (name, f"{field_label(target, name)} (now: {field_value(target, name)})")
        for name in amendable_fields(target)
    ]


def record_detail(request: AuthenticatedRequest, pk: int) -> HttpResponse:
    record = get_record_for_user(request, pk)
    sections = record_sections(record=record, rules=rules_for(record.unit.variant))
    empty = not any(section.rows for section in sections)
    failed = sum(
        1 for s in sections for row in s.rows if row.verdict is not None and not row.verdict.passed
    )
    return render(
        request,
        "fleet/record_detail.html",
        {
            "record": record,
            "unit": record.unit,
            "sections": sections,
            "failed_count": failed,
            "cautions": record_cautions(record) if not record.is_closed else (),
            "amendments": record_amendments(record=record, names=section_entry_names(sections)),
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


def _amend_steps(
    request: AuthenticatedRequest, record: ServiceRecord, targets: dict[str, Model]
) -> dict[str, Any]:
    """Steps one and two (GET): the entry, then the value by its label; then the form."""
    names = entry_names(targets.values())
    entries = [(key, _target_label(t, names)) for key, t in targets.items()]
    entry_form = AmendmentEntryForm(
        request.GET if "target" in request.GET else None, choices=entries
    )
    if not entry_form.is_valid():
        return {"step": "entry", "entry_form": AmendmentEntryForm(choices=entries)}
    key = entry_form.cleaned_data["target"]
    target = targets[key]
    choices = _field_choices(target)
    field_form = AmendmentFieldForm(
        request.GET if "field" in request.GET else None,
        choices=choices,
        initial={"target": key},
    )
    if not field_form.is_valid() or field_form.cleaned_data["target"] != key:
        return {
            "step": "field",
            "target_label": _target_label(target, names),
            "field_form": AmendmentFieldForm(choices=choices, initial={"target": key}),
        }
    return {"step": "value", "target_key": f"{key}:{field_form.cleaned_data['field']}"}


def _value_form(
    record: ServiceRecord, target: Model, field_name: str, data: Any = None
) -> AmendmentForm:
    value_field = amendment_form_field(target, field_name)
    return AmendmentForm(
        data,
        value_field=value_field,
        label=field_label(target, field_name),
        initial={
            "version": record.version,
            "target_field": f"{target._meta.model_name}:{target.pk}:{field_name}",
            "corrected_value": amendment_initial(value_field, getattr(target, field_name)),
        },
    )


def _split_key(key: str, targets: dict[str, Model]) -> tuple[Model, str] | None:
    model_name, _, rest = key.partition(":")
    target_pk, _, field_name = rest.partition(":")
    target = targets.get(f"{model_name}:{target_pk}")
    if target is None or field_name not in amendable_fields(target):
        return None
    return target, field_name


def _post_amendment(
    request: AuthenticatedRequest, record: ServiceRecord, targets: dict[str, Model]
) -> tuple[AmendmentForm | None, Model | None, str]:
    """Record the posted correction; the form with its errors when it was refused."""
    found = _split_key(request.POST.get("target_field", ""), targets)
    if found is None:
        form = AmendmentForm(request.POST)
        form.is_valid()
        form.add_error(
            None, "That value is not one this record can correct: choose the entry and value again."
        )
        return form, None, ""
    target, field_name = found
    form = _value_form(record, target, field_name, request.POST)
    if not form.is_valid():
        return form, target, field_name
    try:
        amendment_create(
            record=record,
            target=target,
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
        return form, target, field_name
    return None, target, field_name


@require_http_methods(["GET", "POST"])
def record_amend(request: AuthenticatedRequest, pk: int) -> HttpResponse:
    """Correct one value of a closed record: pick the entry, then the value by its label, then
    give the corrected value in the entry form's own input and the reason."""
    # Only supervisors correct a closed record (the service refuses anyone else too).
    record = get_record_for_user(request, pk, supervise=True)
    if not record.is_closed:
        return redirect("record-edit", pk=record.pk)
    targets = {f"{t._meta.model_name}:{t.pk}": t for t in amendable_targets(record)}
    context: dict[str, Any] = {"record": record, "unit": record.unit}
    if request.method == "POST":
        form, target, field_name = _post_amendment(request, record, targets)
        if form is None:
            messages.success(request, "Amendment recorded; the original value is kept.")
            return redirect(record)
        context.update(step="value", form=form)
        if target is not None:
            context.update(
                target_label=_target_label(target, entry_names(targets.values())),
                field_label=field_label(target, field_name),
                now=field_value(target, field_name),
            )
        return render(request, "fleet/record_amend.html", context, status=400)
    context.update(_amend_steps(request, record, targets))
    if context["step"] == "value":
        target, field_name = _split_key(context["target_key"], targets) or (None, "")
        assert target is not None  # the steps only offer amendable fields of this record
        context.update(
            form=_value_form(record, target, field_name),
            target_label=_target_label(target, entry_names(targets.values())),
            field_label=field_label(target, field_name),
            now=field_value(target, field_name),
        )
    return render(request, "fleet/record_amend.html", context)
