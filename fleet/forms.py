"""Forms for the workshop pages. Validation of a value lives on the model; forms add the
context a model cannot see on its own (which unit a record is for, who may be technician)."""

from django import forms
from django.contrib.auth import get_user_model
from django.db.models import Q, QuerySet
from django.forms import BaseInlineFormSet, inlineformset_factory
from django.utils import timezone

from . import roles
from .models import (
    AnodeReading,
    BatteryInstall,
    Deployment,
    HousingOpening,
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
from .photos import clean_photo
from .services.deployments import deploy_refusal


class DateInput(forms.DateInput):
    input_type = "date"

    def __init__(self, attrs: dict[str, str] | None = None) -> None:
        super().__init__(attrs=attrs, format="%Y-%m-%d")


class DateTimeInput(forms.DateTimeInput):
    input_type = "datetime-local"

    def __init__(self, attrs: dict[str, str] | None = None) -> None:
        super().__init__(attrs=attrs, format="%Y-%m-%dT%H:%M")


def _technicians() -> QuerySet:
    return (
        get_user_model()
        .objects.filter(
            Q(groups__name__in=[roles.TECHNICIAN, roles.SUPERVISOR]) | Q(is_superuser=True),
            is_active=True,
        )
        .distinct()
        .order_by("username")
    )


class ServiceRecordForm(forms.ModelForm):
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

    def __init__(self, *args: object, unit: Transponder, **kwargs: object) -> None:
        super().__init__(*args, **kwargs)
        self.instance.unit = unit
        self.fields["technician"].queryset = _technicians()
        self.fields["place"].queryset = Place.objects.all()
        self.fitted_pack = BatteryInstall.objects.filter(unit=unit, removed_on__isnull=True).first()
        if self.fitted_pack is None:
            del self.fields["remove_pack_on"]
            del self.fields["removed_pack_ocv_v"]
        else:
            self.fields[
                "remove_pack_on"
            ].help_text = (
                f"Pack {self.fitted_pack.pack_serial}, installed {self.fitted_pack.installed_on}."
            )

    def clean(self) -> dict[str, object]:
        data = super().clean()
        if self.fitted_pack is not None:
            if data.get("removed_pack_ocv_v") is not None and not data.get("remove_pack_on"):
                self.add_error("remove_pack_on", "Give the removal date with the removal volts.")
        return data

    @property
    def pack_removal(self) -> tuple[object, float | None] | None:
        if self.fitted_pack is None or not self.cleaned_data.get("remove_pack_on"):
            return None
        return self.cleaned_data["remove_pack_on"], self.cleaned_data.get("removed_pack_ocv_v")


class EntryForm(forms.ModelForm):
    """Attaches the (possibly unsaved) record so that model validation sees the unit."""

    def __init__(
        self, *args: object, record: ServiceRecord | None = None, **kwargs: object
    ) -> None:
        super().__init__(*args, **kwargs)
        if record is not None:
            self.instance.record = record
            if isinstance(self.instance, BatteryInstall):
                self.instance.unit = record.unit


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

    def __init__(
        self, *args: object, record: ServiceRecord | None = None, **kwargs: object
    ) -> None:
        super().__init__(*args, record=record, **kwargs)
        if record is not None:
            self.fields["position"].queryset = record.unit.variant.anode_positions.all()

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

    def __init__(
        self, *args: object, record: ServiceRecord | None = None, **kwargs: object
    ) -> None:
        super().__init__(*args, record=record, **kwargs)
        if record is not None:
            self.fields["position"].queryset = record.unit.variant.seal_positions.all()


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
            "removed_on",
            "ocv_removal_v",
        ]
        widgets = {
            "made_on": DateInput(),
            "installed_on": DateInput(),
            "removed_on": DateInput(),
        }


class PressureTestForm(EntryForm):
    class Meta:
        model = PressureTest
        fields = [
            "tested_on",
            "facility",
            "test_pressure_dbar",
            "hold_minutes",
            "start_pressure_dbar",
            "end_pressure_dbar",
            "water_temperature_start_c",
            "water_temperature_end_c",
            "ingress_found",
        ]
        widgets = {"tested_on": DateInput()}


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


class EntryFormSet(BaseInlineFormSet):
    def __init__(self, *args: object, record: ServiceRecord, **kwargs: object) -> None:
        self.record = record
        super().__init__(*args, instance=record, **kwargs)

    def get_form_kwargs(self, index: int | None) -> dict[str, object]:
        kwargs = super().get_form_kwargs(index)
        kwargs["record"] = self.record
        return kwargs


# (prefix, title, model, form, extra blank rows on a new record)
ENTRY_KINDS: tuple[tuple[str, str, type, type[EntryForm], int], ...] = (
    ("anodes", "Anode readings", AnodeReading, AnodeReadingForm, 0),
    ("seals", "Seal changes", SealChange, SealChangeForm, 0),
    ("battery", "Battery install", BatteryInstall, BatteryInstallForm, 1),
    ("pressure", "Pressure test", PressureTest, PressureTestForm, 1),
    ("release", "Release test", ReleaseTest, ReleaseTestForm, 1),
    ("sensors", "Sensor checks", SensorCheck, SensorCheckForm, 2),
    ("openings", "Housing openings", HousingOpening, HousingOpeningForm, 1),
)


def entry_formsets(
    record: ServiceRecord, data: object = None, files: object = None
) -> list[tuple[str, BaseInlineFormSet]]:
    """One formset per entry kind. Anode and seal rows start one per position of the variant."""
    variant = record.unit.variant
    formsets = []
    for prefix, title, model, form, extra in ENTRY_KINDS:
        initial: list[dict[str, object]] = []
        if prefix == "anodes":
            initial = [{"position": p.pk} for p in variant.anode_positions.all()]
        elif prefix == "seals":
            initial = [
                {"position": p.pk, "material": p.material} for p in variant.seal_positions.all()
            ]
        if record.pk is not None:
            initial, extra = [], 1
        formset_class = inlineformset_factory(
            ServiceRecord,
            model,
            form=form,
            formset=EntryFormSet,
            fk_name="record",
            extra=max(extra, len(initial)),
            can_delete=record.pk is not None,
        )
        formsets.append(
            (
                title,
                formset_class(data, files, record=record, prefix=prefix, initial=initial or None),
            )
        )
    return formsets


class CloseRecordForm(forms.Form):
    confirm = forms.BooleanField(
        label="I have checked every entry; close the record. Later corrections become amendments."
    )


class AmendmentForm(forms.Form):
    target_field = forms.ChoiceField(label="Value to correct")
    corrected_value = forms.CharField(max_length=200)
    reason = forms.CharField(widget=forms.Textarea(attrs={"rows": 2}))

    def __init__(self, *args: object, choices: list[tuple[str, str]], **kwargs: object) -> None:
        super().__init__(*args, **kwargs)
        self.fields["target_field"].choices = choices


class DeploymentForm(forms.ModelForm):
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

    def __init__(self, *args: object, **kwargs: object) -> None:
        super().__init__(*args, **kwargs)
        self.fields["unit"].queryset = Transponder.objects.select_related("variant").order_by(
            "serial"
        )

    def clean_unit(self) -> Transponder:
        """Held, in the water or on the bench: say so before anything else about the dates."""
        unit = self.cleaned_data["unit"]
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


class SiteForm(forms.ModelForm):
    class Meta:
        model = Site
        fields = [
            "name",
            "latitude_deg",
            "longitude_deg",
            "water_depth_m",
            "bottom_temperature_c",
            "practical_salinity",
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

    def __init__(self, *args: object, kinds: list[tuple[str, str]], **kwargs: object) -> None:
        super().__init__(*args, **kwargs)
        self.fields["kind"].choices = [("", "Any kind"), *kinds]


class PlannedDeploymentForm(forms.Form):
    """A planned deployment: where, from when, for how long, at what duty."""

    site = forms.ModelChoiceField(queryset=Site.objects.all())
    start = forms.DateField(widget=DateInput(), label="Over the side on")
    days = forms.IntegerField(min_value=1, max_value=3650, label="Planned days")
    rate = forms.IntegerField(
        min_value=0,
        max_value=1_000_000,
        required=False,
        label="Interrogations a day",
        help_text="Empty: the unit's recent duty.",
    )
    step = forms.IntegerField(
        min_value=1,
        max_value=9,
        required=False,
        label="Transmit power step",
        help_text="Empty: the unit's setting.",
    )

    def __init__(self, *args: object, today: object, **kwargs: object) -> None:
        super().__init__(*args, **kwargs)
        self.today = today

    def clean_start(self) -> object:
        start = self.cleaned_data["start"]
        if start < self.today:
            raise forms.ValidationError("The deployment must start today or later.")
        return start


class PlanForm(PlannedDeploymentForm):
    wanted = forms.IntegerField(min_value=1, max_value=500, label="Units wanted", initial=4)

    field_order = ["site", "start", "days", "wanted", "rate"]

    def __init__(self, *args: object, **kwargs: object) -> None:
        super().__init__(*args, **kwargs)
        del self.fields["step"]


class UnitPhotoForm(forms.ModelForm):
    class Meta:
        model = UnitPhoto
        fields = ["image", "caption"]
        widgets = {"image": forms.ClearableFileInput(attrs={"accept": "image/*"})}

    def clean_image(self) -> object:
        image = self.cleaned_data.get("image")
        if image is None:
            raise forms.ValidationError("Choose a photo to upload.")
        return clean_photo(image)
