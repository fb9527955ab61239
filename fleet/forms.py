"""Forms for the workshop pages. Validation of a value lives on the model; forms add the
context a model cannot see on its own (which unit a record is for, who may be technician)."""

import copy
import datetime as dt
from collections.abc import Mapping
from typing import Any, cast

from django import forms
from django.contrib.auth import get_user_model
from django.contrib.auth.models import User
from django.core.exceptions import ValidationError
from django.core.files.uploadedfile import UploadedFile
from django.db.models import Model, Q, QuerySet
from django.forms import BaseForm, BaseInlineFormSet, inlineformset_factory
from django.utils import timezone
from django.utils.datastructures import MultiValueDict

from . import roles
from .due import planned as planned_limits
from .models import (
    AnodeReading,
    BatteryInstall,
    Chemistry,
    Deployment,
    HousingOpening,
    LabelSetting,
    PackRemoval,
    Place,
    PressureTest,
    ReleaseTest,
    SealChange,
    SensorCheck,
    ServiceRecord,
    Site,
    Transponder,
    UnitPhoto,
    Variant,
)
from .models.records import Entry, entry_kinds
from .models.validators import DATE_VALIDATORS, REASON_MAX_CHARS, SUMMARY_MAX_CHARS
from .photos import clean_photo
from .recall import RECALL_VALUE_MAX_CHARS, MadeWithin, RecallPart
from .selectors import previous_anode_mass
from .services.deployments import deploy_refusal


class DateInput(forms.DateInput):
    input_type = "date"

    def __init__(self, attrs: dict[str, str] | None = None) -> None:
        super().__init__(attrs=attrs, format="%Y-%m-%d")


class TimeInput(forms.TimeInput):
    input_type = "time"

    def __init__(self, attrs: dict[str, str] | None = None) -> None:
        super().__init__(attrs=attrs, format="%H:%M")


class DateTimeInput(forms.DateTimeInput):
    input_type = "datetime-local"

    def __init__(self, attrs: dict[str, str] | None = None) -> None:
        super().__init__(attrs=attrs, format="%Y-%m-%dT%H:%M")


def _model_choice(form: BaseForm, name: str) -> forms.ModelChoiceField[Any]:
    """The form's field ``name``, known to be a model choice: ``fields`` maps to plain ``Field``."""
    return cast("forms.ModelChoiceField[Any]", form.fields[name])


def _choice(form: BaseForm, name: str) -> forms.ChoiceField:
    """The form's field ``name``, known to be a choice field."""
    return cast(forms.ChoiceField, form.fields[name])


def bound_dates(form: forms.BaseForm) -> None:
    """Hold every date and date-time the form takes to 1980 … today + the planning horizon.

    A form field parses "0001-01-01" or "9999-12-31T23:59" without complaint; shifting such a
    value to UTC or querying with it overflows. Refusing it here, as a field error, keeps it
    away from the model's ``clean()`` and the database; the model's own validators and
    ``clean()`` then apply their stricter limits (no future visit, no future test).
    """
    for field in form.fields.values():
        if isinstance(field, forms.DateField | forms.DateTimeField):
            field.validators = [*field.validators, *DATE_VALIDATORS]


def _technicians() -> QuerySet[User]:
    return (
        get_user_model()
        .objects.filter(
            Q(groups__name__in=[roles.TECHNICIAN, roles.SUPERVISOR]) | Q(is_superuser=True),
            is_active=True,
        )
        .distinct()
        .order_by("username")
    )


class ServiceRecordForm(forms.ModelForm[ServiceRecord]):
    class Meta:
        model = ServiceRecord
        fields = ["opened_at", "technician", "place", "summary"]
        widgets = {
            "opened_at": DateTimeInput(),
            "summary": forms.Textarea(attrs={"rows": 3}),
        }

    # Taking out the pack fitted at an earlier visit (a new pack below replaces it anyway).
    remove_pack_on = forms.DateField(
        required=False, widget=DateInput(), label="Fitted pack removed on"
    )
    removed_pack_ocv_v = forms.FloatField(
        required=False, min_value=0.0, max_value=300.0, label="Its open-circuit volts at removal"
    )

    def __init__(self, *args: Any, unit: Transponder, **kwargs: Any) -> None:
        super().__init__(*args, **kwargs)
        bound_dates(self)
        self.instance.unit = unit
        _model_choice(self, "technician").queryset = _technicians()
        _model_choice(self, "place").queryset = Place.objects.all()
        self.fitted_pack = BatteryInstall.objects.filter(unit=unit, removal__isnull=True).first()
        if self.fitted_pack is None:
            del self.fields["remove_pack_on"]
            del self.fields["removed_pack_ocv_v"]
        else:
            self.fields[
                "remove_pack_on"
            ].help_text = (
                f"Pack {self.fitted_pack.pack_serial}, installed {self.fitted_pack.installed_on}."
            )

    def clean(self) -> dict[str, Any]:
        super().clean()
        data = self.cleaned_data
        if self.fitted_pack is not None:
            if data.get("removed_pack_ocv_v") is not None and not data.get("remove_pack_on"):
                self.add_error("remove_pack_on", "Give the removal date with the removal volts.")
        return data

    @property
    def pack_removal(self) -> tuple[dt.date, float | None] | None:
        if self.fitted_pack is None or not self.cleaned_data.get("remove_pack_on"):
            return None
        return self.cleaned_data["remove_pack_on"], self.cleaned_data.get("removed_pack_ocv_v")


class EntryForm(forms.ModelForm[Entry]):
    """Attaches the (possibly unsaved) record so that model validation sees the unit.

    Each entry kind has one subclass naming the kind as ``Meta.model``; ``entry_forms()``
    finds it there."""

    def __init__(self, *args: Any, record: ServiceRecord | None = None, **kwargs: Any) -> None:
        super().__init__(*args, **kwargs)
        bound_dates(self)
        if record is not None:
            self.instance.record = record
            if isinstance(self.instance, BatteryInstall):
                self.instance.unit = record.unit

    @classmethod
    def initial_rows(cls, variant: Variant) -> list[dict[str, object]]:
        """Rows filled in advance on a new record (the variant's positions, say)."""
        return []


class AnodeReadingForm(EntryForm):
    class Meta:
        model = AnodeReading
        fields = [
            "position",
            "mass_g",
            "remaining_percent",
            "bond_resistance_ohm",
            "replaced",
            "photo",
            "note",
        ]
        widgets = {"photo": forms.ClearableFileInput(attrs={"accept": "image/*"})}

    # Shown (as a checkbox) only when the mass is heavier than the anode's last reading.
    confirm_heavier = forms.BooleanField(
        required=False,
        widget=forms.HiddenInput,
        label="Heavier than the last reading: weighed again, keep it",
    )

    def __init__(self, *args: Any, record: ServiceRecord | None = None, **kwargs: Any) -> None:
        super().__init__(*args, record=record, **kwargs)
        self.record = record
        if record is not None:
            _model_choice(self, "position").queryset = record.unit.variant.anode_positions.all()

    def clean(self) -> dict[str, Any]:
        super().clean()
        data = self.cleaned_data
        mass, position = data.get("mass_g"), data.get("position")
        record = self.record
        if mass is None or position is None or record is None or not record.unit_id:
            return data
        previous = previous_anode_mass(
            unit_id=record.unit_id,
            position_id=position.pk,
            before=record.opened_at or timezone.now(),
            exclude_record_id=record.pk,
        )
        if previous is None or mass <= previous.mass_g:
            return data
        # An anode only loses mass: ask for a second look instead of refusing or saving blind.
        self.fields["confirm_heavier"].widget = forms.CheckboxInput()
        if not data.get("confirm_heavier"):
            self.add_error(
                "confirm_heavier",
                f"{mass:g} g is heavier than this anode's last reading ({previous.mass_g:g} g "
                f"on {previous.on}), and an anode only loses mass. Weigh it again and check it "
                "is the same anode; if the reading is right, tick this box to save it.",
            )
        return data

    @classmethod
    def initial_rows(cls, variant: Variant) -> list[dict[str, object]]:
        return [{"position": p.pk} for p in variant.anode_positions.all()]

    def clean_photo(self) -> object:
        photo = self.cleaned_data.get("photo")
        if photo and hasattr(photo, "content_type"):  # a fresh upload, not the stored file
            return clean_photo(photo)
        return photo


class SealChangeForm(EntryForm):
    class Meta:
        model = SealChange
        fields = ["position", "material", "cure_date", "lot", "reason"]
        widgets = {"cure_date": DateInput()}

    def __init__(self, *args: Any, record: ServiceRecord | None = None, **kwargs: Any) -> None:
        super().__init__(*args, record=record, **kwargs)
        if record is not None:
            _model_choice(self, "position").queryset = record.unit.variant.seal_positions.all()

    @classmethod
    def initial_rows(cls, variant: Variant) -> list[dict[str, object]]:
        return [{"position": p.pk, "material": p.material} for p in variant.seal_positions.all()]


class BatteryInstallForm(EntryForm):
    class Meta:
        model = BatteryInstall
        fields = [
            "pack_serial",
            "chemistry",
            "nominal_voltage_v",
            "capacity_ah",
            "made_on",
            "installed_on",
            "ocv_install_v",
        ]
        widgets = {"made_on": DateInput(), "installed_on": DateInput()}

    def __init__(self, *args: Any, record: ServiceRecord | None = None, **kwargs: Any) -> None:
        super().__init__(*args, record=record, **kwargs)
        if record is not None:
            # Offer only what the variant's battery bay accepts (the model refuses the rest).
            allowed = list(record.unit.variant.allowed_chemistries or ())
            field = _choice(self, "chemistry")
            field.choices = [("", "---------")] + [
                (value, label) for value, label in Chemistry.choices if value in allowed
            ]
            field.error_messages["invalid_choice"] = (
                f"This variant's battery bay accepts {', '.join(allowed) or 'no chemistry'}."
            )


class PressureTestForm(EntryForm):
    class Meta:
        model = PressureTest
        fields = [
            "tested_on",
            "hold_ended_at",
            "facility",
            "test_pressure_dbar",
            "hold_minutes",
            "start_pressure_dbar",
            "end_pressure_dbar",
            "water_temperature_start_c",
            "water_temperature_end_c",
            "ingress_found",
        ]
        widgets = {"tested_on": DateInput(), "hold_ended_at": TimeInput()}


class ReleaseTestForm(EntryForm):
    class Meta:
        model = ReleaseTest
        fields = [
            "tested_on",
            "kind",
            "load_kg",
            "seconds_to_release",
            "motor_current_a",
            "limit_switch_ok",
            "acoustic_command_ok",
        ]
        widgets = {"tested_on": DateInput()}


class SensorCheckForm(EntryForm):
    class Meta:
        model = SensorCheck
        fields = ["checked_on", "sensor", "reference_value", "unit_reading", "raw_resistance_ohm"]
        widgets = {"checked_on": DateInput()}


class HousingOpeningForm(EntryForm):
    class Meta:
        model = HousingOpening
        fields = [
            "opened_at",
            "closed_at",
            "vented_before_opening",
            "internal_pressure_found",
            "reason",
        ]
        widgets = {"opened_at": DateTimeInput(), "closed_at": DateTimeInput()}


class PackRemovalForm(EntryForm):
    class Meta:
        model = PackRemoval
        fields = ["install", "removed_on", "ocv_removal_v"]
        widgets = {"removed_on": DateInput()}

    def __init__(self, *args: Any, record: ServiceRecord | None = None, **kwargs: Any) -> None:
        super().__init__(*args, record=record, **kwargs)
        if record is not None and record.unit_id:
            # The unit's packs still fitted, and the one this row already removes.
            fitted = Q(removal__isnull=True)
            removal = self.instance
            if isinstance(removal, PackRemoval) and removal.pk is not None:
                fitted |= Q(pk=removal.install_id)
            _model_choice(self, "install").queryset = BatteryInstall.objects.filter(
                fitted, unit_id=record.unit_id
            )


class EntryFormSet(BaseInlineFormSet[Entry, ServiceRecord, EntryForm]):
    def __init__(
        self,
        data: Mapping[str, Any] | None = None,
        files: MultiValueDict[str, UploadedFile[Any]] | None = None,
        *,
        record: ServiceRecord,
        **kwargs: Any,
    ) -> None:
        self.record = record
        super().__init__(data, files, instance=record, **kwargs)

    def get_form_kwargs(self, index: int | None) -> dict[str, Any]:
        kwargs = super().get_form_kwargs(index)
        kwargs["record"] = self.record
        return kwargs


def entry_forms() -> dict[type[Model], type[EntryForm]]:
    """Each entry kind's form, by its ``Meta.model``: every subclass of ``EntryForm``."""
    found: dict[type[Model], type[EntryForm]] = {}
    pending = list(EntryForm.__subclasses__())
    while pending:
        form = pending.pop(0)
        if form._meta.model is not None:
            found.setdefault(form._meta.model, form)
        pending.extend(form.__subclasses__())
    return found


def entry_formsets(
    record: ServiceRecord,
    data: Mapping[str, Any] | None = None,
    files: MultiValueDict[str, UploadedFile[Any]] | None = None,
) -> list[tuple[str, BaseInlineFormSet[Entry, ServiceRecord, EntryForm]]]:
    """One formset per entry kind. Anode and seal rows start one per position of the variant."""
    variant = record.unit.variant
    forms_by_model = entry_forms()
    formsets: list[tuple[str, BaseInlineFormSet[Entry, ServiceRecord, EntryForm]]] = []
    for kind in entry_kinds():
        # A kind the variant cannot carry (a release test on a unit with no release) is not
        # offered, unless an earlier save of this visit holds such entries to edit.
        if not kind.fits(variant) and not (
            record.pk is not None and getattr(record, kind.related_name()).exists()
        ):
            continue
        form = forms_by_model[kind]
        initial = form.initial_rows(variant)
        extra = kind.bench_extra
        if record.pk is not None:
            initial, extra = [], 1
        formset_class = inlineformset_factory(
            ServiceRecord,
            kind,
            form=form,
            formset=EntryFormSet,
            fk_name="record",
            extra=max(extra, len(initial)),
            can_delete=record.pk is not None,
        )
        formsets.append(
            (
                kind.bench_heading(),
                formset_class(
                    data, files, record=record, prefix=kind.bench_prefix, initial=initial or None
                ),
            )
        )
    return formsets


_YES = frozenset({"yes", "y", "true", "1", "on"})
_NO = frozenset({"no", "n", "false", "0", "off"})


def amendment_form_field(target: Model, field_name: str) -> forms.Field:
    """The form field the record's or entry's own form uses for ``field_name``: the same
    parsing, localisation, time zone, choices, length and date limits as at entry."""
    form: forms.BaseForm
    if isinstance(target, ServiceRecord):
        form = ServiceRecordForm(instance=target, unit=target.unit)
    elif isinstance(target, Entry):
        form = entry_forms()[type(target)](instance=target, record=target.record)
    else:
        raise ValidationError({"field_name": "That value cannot be corrected by an amendment."})
    if field_name not in form.fields:
        raise ValidationError({"field_name": "That value cannot be corrected by an amendment."})
    return form.fields[field_name]


def parse_amendment_value(target: Model, field_name: str, raw: str) -> object:
    """The typed correction ``raw`` as the entry form would have cleaned it, or a
    ``ValidationError`` on ``corrected_value`` with the form's message.

    A checkbox cannot be typed, so a yes/no field takes yes or no (true/false, 1/0) and then
    goes through the same form field. A naive date-time is read in the workshop's time zone,
    as the entry form reads it, and kept in UTC like every stored time.
    """
    field = amendment_form_field(target, field_name)
    text = raw.strip()
    value: object = text
    if isinstance(field, forms.BooleanField):
        if text.lower() not in _YES | _NO:
            raise ValidationError({"corrected_value": "Enter yes or no."})
        value = text.lower() in _YES
    try:
        cleaned = field.clean(value)
    except ValidationError as exc:
        raise ValidationError({"corrected_value": exc.messages}) from exc
    if isinstance(cleaned, dt.datetime):
        cleaned = cleaned.astimezone(dt.UTC)  # inside the date bounds: no overflow
    return cleaned


class CloseRecordForm(forms.Form):
    # The record version the supervisor reviewed: a change since then refuses the close.
    version = forms.IntegerField(widget=forms.HiddenInput, min_value=0)
    confirm = forms.BooleanField(
        label="I have checked every entry; close the record. Later corrections become amendments."
    )


class AmendmentForm(forms.Form):
    """One correction: the value (shown with the entry form's own widget, parsed by the entry
    form's own field in ``parse_amendment_value``) and the reason."""

    # The record version the form was built from: a change since then refuses the amendment.
    version = forms.IntegerField(widget=forms.HiddenInput, min_value=0)
    # Which value: "<model>:<pk>:<field>", chosen on the steps before.
    target_field = forms.CharField(widget=forms.HiddenInput, max_length=120)
    # Posted as text and parsed with the entry form's field (``parse_amendment_value``).
    corrected_value = forms.CharField(
        label="Corrected value", max_length=SUMMARY_MAX_CHARS, required=False, strip=False
    )
    reason = forms.CharField(
        label="Why it is corrected",
        max_length=REASON_MAX_CHARS,
        widget=forms.Textarea(attrs={"rows": 2}),
        error_messages={"required": "Say why the value is being corrected."},
    )

    def __init__(
        self, *args: Any, value_field: forms.Field | None = None, label: str = "", **kwargs: Any
    ) -> None:
        super().__init__(*args, **kwargs)
        if value_field is not None:
            self.fields["corrected_value"].widget = amendment_widget(value_field)
            self.fields["corrected_value"].label = f"Corrected {label[:1].lower()}{label[1:]}"
            self.fields["corrected_value"].help_text = value_field.help_text


YES_NO_CHOICES = [("yes", "Yes"), ("no", "No")]


def amendment_widget(field: forms.Field) -> forms.Widget:
    """The entry form's widget for a correction: its choices, date and time inputs, number
    input; a yes/no field as two buttons, so that "no" is said, not left out."""
    if isinstance(field, forms.BooleanField):
        return forms.RadioSelect(choices=YES_NO_CHOICES)
    widget: forms.Widget = copy.deepcopy(field.widget)
    widget.is_required = False
    return widget


def amendment_initial(field: forms.Field, value: object) -> object:
    """The stored value as the correction's widget shows it at first."""
    if isinstance(field, forms.BooleanField):
        return "yes" if value else "no"
    if isinstance(value, dt.datetime):
        return timezone.localtime(value)
    return value


class AmendmentEntryForm(forms.Form):
    """Step one: which entry (or the record itself) holds the value to correct."""

    target = forms.ChoiceField(label="Entry to correct")

    def __init__(self, *args: Any, choices: list[tuple[str, str]], **kwargs: Any) -> None:
        super().__init__(*args, **kwargs)
        _choice(self, "target").choices = choices


class AmendmentFieldForm(forms.Form):
    """Step two: which of the entry's values, by its label."""

    target = forms.CharField(widget=forms.HiddenInput)
    field = forms.ChoiceField(label="Value to correct")

    def __init__(self, *args: Any, choices: list[tuple[str, str]], **kwargs: Any) -> None:
        super().__init__(*args, **kwargs)
        _choice(self, "field").choices = choices


class DeploymentForm(forms.ModelForm[Deployment]):
    class Meta:
        model = Deployment
        fields = [
            "unit",
            "site",
            "over_side_at",
            "planned_days",
            "planned_interrogations_per_day",
            "transmit_power_step",
            "notes",
        ]
        widgets = {"over_side_at": DateTimeInput(), "notes": forms.Textarea(attrs={"rows": 2})}

    def __init__(self, *args: Any, **kwargs: Any) -> None:
        super().__init__(*args, **kwargs)
        bound_dates(self)
        units = Transponder.objects.select_related("variant").order_by("serial")
        _model_choice(self, "unit").queryset = units

    def clean_unit(self) -> Transponder:
        """Held, in the water or on the bench: say so before anything else about the dates."""
        unit: Transponder = self.cleaned_data["unit"]
        refusal = deploy_refusal(unit, timezone.localdate())
        if refusal:
            raise forms.ValidationError(refusal)
        return unit


class DeploymentOverrideForm(forms.Form):
    """A supervisor's written reason to deploy against failed readiness checks."""

    reason = forms.CharField(
        label="Deploy against the failed checks because",
        required=False,
        max_length=2000,
        widget=forms.Textarea(attrs={"rows": 3}),
        help_text="Supervisors only. At least 10 characters; kept with the deployment and "
        "printed on the checklist.",
    )


class RecoveryForm(forms.Form):
    recovered_at = forms.DateTimeField(label="Recovered", widget=DateTimeInput())
    replies_counted = forms.IntegerField(
        label="Replies counted on recovery", required=False, min_value=0, max_value=100_000_000
    )
    place = forms.ModelChoiceField(queryset=Place.objects.all(), required=False, label="Now at")

    def __init__(self, *args: Any, **kwargs: Any) -> None:
        super().__init__(*args, **kwargs)
        bound_dates(self)


class SiteForm(forms.ModelForm[Site]):
    class Meta:
        model = Site
        fields = [
            "name",
            "latitude_deg",
            "longitude_deg",
            "water_depth_m",
            "bottom_temperature_c",
            "practical_salinity",
            "surface_temperature_c",
            "notes",
        ]
        widgets = {"notes": forms.Textarea(attrs={"rows": 3})}


class DueFilterForm(forms.Form):
    """Filters for the overdue and due-soon list on the overview."""

    SHOW = (
        ("attention", "Overdue and due soon"),
        ("overdue", "Overdue only"),
        ("all", "Everything"),
    )

    show = forms.ChoiceField(choices=SHOW, required=False, initial="attention")
    place = forms.ModelChoiceField(
        queryset=Place.objects.all(), required=False, empty_label="Any place"
    )
    variant = forms.ModelChoiceField(
        queryset=Variant.objects.all(), required=False, empty_label="Any variant"
    )
    kind = forms.ChoiceField(required=False)

    def __init__(self, *args: Any, kinds: list[tuple[str, str]], **kwargs: Any) -> None:
        super().__init__(*args, **kwargs)
        _choice(self, "kind").choices = [("", "Any kind"), *kinds]


class PlannedDeploymentForm(forms.Form):
    """A planned deployment: where, from when, for how long, at what duty. ``planned()``
    gives the one ``PlannedDeployment`` that readiness, the planner and the checklist read."""

    site = forms.ModelChoiceField(
        queryset=Site.objects.all(),
        error_messages={"required": "Choose a site.", "invalid_choice": "There is no such site."},
    )
    start = forms.DateField(
        widget=DateInput(),
        label="Over the side on",
        error_messages={
            "required": "Give the start date.",
            "invalid": "Give the start as a date, YYYY-MM-DD.",
        },
    )
    days = forms.IntegerField(
        min_value=1,
        max_value=planned_limits.MAX_DAYS,
        label="Planned days",
        error_messages={
            "required": "Give the planned days.",
            "min_value": f"Planned days must be between 1 and {planned_limits.MAX_DAYS}.",
            "max_value": f"Planned days must be between 1 and {planned_limits.MAX_DAYS}.",
        },
    )
    rate = forms.IntegerField(
        min_value=0,
        max_value=planned_limits.MAX_INTERROGATIONS_PER_DAY,
        required=False,
        label="Interrogations a day",
        help_text="Empty: the unit's recent duty.",
    )
    step = forms.IntegerField(
        min_value=planned_limits.POWER_STEPS[0],
        max_value=planned_limits.POWER_STEPS[1],
        required=False,
        label="Transmit power step",
        help_text="Empty: the unit's setting.",
    )

    def __init__(self, *args: Any, today: dt.date, **kwargs: Any) -> None:
        super().__init__(*args, **kwargs)
        self.today = today

    def clean_start(self) -> dt.date:
        start: dt.date = self.cleaned_data["start"]
        try:
            planned_limits.PlannedDeployment(Site(), start, 1).check_start(self.today)
        except ValueError as exc:
            message = str(exc)
            raise forms.ValidationError(message[0].upper() + message[1:] + ".") from exc
        return start

    def planned(self) -> planned_limits.PlannedDeployment:
        """The validated plan; call after ``is_valid()``."""
        data = self.cleaned_data
        return planned_limits.PlannedDeployment(
            site=data["site"],
            start=data["start"],
            days=data["days"],
            interrogations_per_day=data.get("rate"),
            power_step=data.get("step"),
        )


class PlanForm(PlannedDeploymentForm):
    wanted = forms.IntegerField(min_value=1, max_value=500, label="Units wanted", initial=4)

    field_order = ["site", "start", "days", "wanted", "rate"]

    def __init__(self, *args: Any, **kwargs: Any) -> None:
        super().__init__(*args, **kwargs)
        del self.fields["step"]


class UnitPhotoForm(forms.ModelForm[UnitPhoto]):
    class Meta:
        model = UnitPhoto
        fields = ["image", "caption"]
        widgets = {"image": forms.ClearableFileInput(attrs={"accept": "image/*"})}

    def clean_image(self) -> object:
        image = self.cleaned_data.get("image")
        if image is None:
            raise forms.ValidationError("Choose a photo to upload.")
        return clean_photo(image)


class RecallForm(forms.Form):
    part = forms.ChoiceField(choices=RecallPart.choices, label="Part", initial=RecallPart.SEAL_LOT)
    value = forms.CharField(
        required=False,
        max_length=RECALL_VALUE_MAX_CHARS,
        label="Lot or pack serial",
        help_text="As written on the seal packet or the pack; capitals or not.",
    )
    made_from = forms.DateField(
        required=False,
        widget=DateInput(),
        validators=[*DATE_VALIDATORS],
        label="Packs made from",
        help_text="Packs made in a period: the first day of manufacture recalled.",
    )
    made_to = forms.DateField(
        required=False,
        widget=DateInput(),
        validators=[*DATE_VALIDATORS],
        label="Packs made up to",
        help_text="The last day of manufacture recalled, included.",
    )
    chemistry = forms.ChoiceField(
        required=False,
        choices=[("", "Any chemistry"), *Chemistry.choices],
        label="Chemistry",
    )
    since = forms.DateField(
        required=False,
        widget=DateInput(),
        validators=[*DATE_VALIDATORS],
        label="Fitted at any time since",
        help_text="Empty: only parts fitted now.",
    )

    def clean_since(self) -> dt.date | None:
        since: dt.date | None = self.cleaned_data.get("since")
        if since is not None and since > timezone.localdate():
            raise ValidationError("This date is in the future.")
        return since

    def clean(self) -> dict[str, Any]:
        super().clean()
        data = self.cleaned_data
        if data.get("part") == RecallPart.PACKS_MADE:
            first, last = data.get("made_from"), data.get("made_to")
            if first is None and "made_from" not in self.errors:
                self.add_error("made_from", "Give the first day of manufacture recalled.")
            if last is None and "made_to" not in self.errors:
                self.add_error("made_to", "Give the last day of manufacture recalled.")
            if first is not None and last is not None and last < first:
                self.add_error("made_to", "The period ends before it begins.")
        elif data.get("part") and not (data.get("value") or "").strip():
            self.add_error("value", "Give the lot or the pack serial.")
        return data

    def made(self) -> MadeWithin | None:
        """The period of a recall of packs made in one (the form must be valid)."""
        data = self.cleaned_data
        if data["part"] != RecallPart.PACKS_MADE:
            return None
        return MadeWithin(data["made_from"], data["made_to"], data.get("chemistry") or "")


class LabelContactForm(forms.ModelForm[LabelSetting]):
    class Meta:
        model = LabelSetting
        fields = ["contact_line"]


class TimelineFilterForm(forms.Form):
    """Which units the fleet timeline draws."""

    variant = forms.ModelChoiceField(
        queryset=Variant.objects.all(), required=False, empty_label="Any variant"
    )
    place = forms.ModelChoiceField(
        queryset=Place.objects.all(), required=False, empty_label="Any place"
    )
