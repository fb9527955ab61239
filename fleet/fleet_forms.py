"""Forms for the fleet management pages (supervisors): variants with their positions and
power steps, units one at a time or several at once, a unit's place and its hold.

Values are validated by the models; these forms add what a model cannot see on its own: the
gland check a supervisor confirms, rows in use by history, a list of serials."""

from __future__ import annotations

import re
from typing import Any

from django import forms
from django.forms import BaseInlineFormSet, inlineformset_factory
from django.utils.text import capfirst

from .due.glands import GlandReport, check_gland
from .due.readiness import Verdict
from .models import (
    AnodePosition,
    Chemistry,
    GlandKind,
    Place,
    ReplyChargeStep,
    SealPosition,
    Transponder,
    UnitHold,
    Variant,
)
from .models.validators import REASON_MAX_CHARS
from .services.fleet import MAX_UNITS_AT_ONCE, VariantParts, deletion_refusal


class VariantForm(forms.ModelForm[Variant]):
    allowed_chemistries = forms.MultipleChoiceField(
        choices=Chemistry.choices,
        widget=forms.CheckboxSelectMultiple,
        label="Battery chemistries the bay accepts",
        error_messages={"required": "Tick at least one battery chemistry."},
    )

    class Meta:
        model = Variant
        fields = [
            "name",
            "description",
            "depth_rating_m",
            "housing_alloy",
            "release_fitted",
            "has_temperature_sensor",
            "has_pressure_sensor",
            "has_tilt_sensor",
            "allowed_chemistries",
            "cells_in_series",
            "parallel_strings",
            "listen_current_a",
            "release_charge_as",
            "mass_in_air_kg",
            "displaced_volume_m3",
            "pressure_test_valid_months",
            "proof_factor",
            "release_test_valid_days",
            "sensor_check_interval_months",
            "bond_resistance_limit_ohm",
            "release_max_seconds",
            "release_max_motor_current_a",
            "battery_reserve_fraction",
        ]
        widgets = {"description": forms.Textarea(attrs={"rows": 2})}


class AnodePositionForm(forms.ModelForm[AnodePosition]):
    class Meta:
        model = AnodePosition
        fields = [
            "name",
            "alloy",
            "new_net_mass_g",
            "utilisation_factor",
            "replace_at_remaining_percent",
            "design_current_a",
        ]


_GLAND_INPUTS = (
    "as568_dash",
    "gland_kind",
    "bore_diameter_mm",
    "groove_diameter_mm",
    "groove_depth_mm",
    "groove_width_mm",
)


class SealPositionForm(forms.ModelForm[SealPosition]):
    """A seal position; its gland is checked as entered. A gland outside the common-practice
    ranges is refused with the figure on the field it comes from until the supervisor ticks
    ``confirm_gland`` (shown only then), for a new or changed gland."""

    confirm_gland = forms.BooleanField(
        required=False,
        widget=forms.HiddenInput,
        label="Outside the usual ranges: drawing checked, keep these sizes",
    )

    class Meta:
        model = SealPosition
        fields = [
            "name",
            "as568_dash",
            "iso_inner_diameter_mm",
            "iso_cross_section_mm",
            "material",
            "count",
            "interval_months",
            "max_openings",
            "gland_kind",
            "bore_diameter_mm",
            "groove_diameter_mm",
            "groove_depth_mm",
            "groove_width_mm",
        ]

    gland: GlandReport | None = None

    def clean(self) -> dict[str, Any]:
        super().clean()
        data = self.cleaned_data
        if self.errors or not data.get("gland_kind") or data.get("groove_width_mm") is None:
            return data  # the model's clean() says what is missing
        try:
            self.gland = check_gland(
                dash=data.get("as568_dash", ""),
                kind=GlandKind(data["gland_kind"]),
                bore_diameter_mm=data.get("bore_diameter_mm"),
                groove_diameter_mm=data.get("groove_diameter_mm"),
                groove_depth_mm=data.get("groove_depth_mm"),
                groove_width_mm=data["groove_width_mm"],
            )
        except ValueError:
            return data  # no AS568 size, or the groove outside the bore: the model names it
        self._confirm_outside_ranges(self.gland)
        return data

    def _confirm_outside_ranges(self, gland: GlandReport) -> None:
        failed = [f for f in gland.figures if f.verdict == Verdict.FAIL]
        changed = self.instance.pk is None or any(n in self.changed_data for n in _GLAND_INPUTS)
        if not failed or not changed:
            return
        self.fields["confirm_gland"].widget = forms.CheckboxInput()
        if self.cleaned_data.get("confirm_gland"):
            return
        for figure in failed:
            value = self.cleaned_data.get(figure.field)
            self.add_error(
                figure.field,
                f"{capfirst(figure.name)} {figure.percent:.1f} % with {gland.ring}; the usual "
                f"range is {figure.accepted} (common practice, no published source).",
            )
            # add_error drops the value; keep it so the model's checks see the whole gland.
            self.cleaned_data[figure.field] = value
        self.add_error(
            "confirm_gland",
            "Check the gland drawing. If these sizes are right, tick this box to keep them.",
        )


class ReplyChargeStepForm(forms.ModelForm[ReplyChargeStep]):
    class Meta:
        model = ReplyChargeStep
        fields = ["step", "charge_per_reply_as", "source_level_db"]


class VariantPartFormSet(BaseInlineFormSet[Any, Variant, Any]):
    """Refuses to delete a row the units' history or settings still point at."""

    def clean(self) -> None:
        super().clean()
        refusals = [
            deletion_refusal(form.instance)
            for form in self.deleted_forms
            if form.instance.pk is not None
        ]
        if any(refusals):
            raise forms.ValidationError([r for r in refusals if r])


def variant_formsets(
    variant: Variant, data: Any = None
) -> list[tuple[str, BaseInlineFormSet[Any, Variant, Any]]]:
    """The variant's anode positions, seal positions and power steps, one formset each."""
    extra = 1 if variant.pk else 2
    kinds: list[tuple[str, type[forms.ModelForm[Any]], str]] = [
        ("Anode positions", AnodePositionForm, "anodes"),
        ("Seal positions", SealPositionForm, "seals"),
        ("Transmit power steps", ReplyChargeStepForm, "steps"),
    ]
    formsets: list[tuple[str, BaseInlineFormSet[Any, Variant, Any]]] = []
    for title, form, prefix in kinds:
        formset_class = inlineformset_factory(
            Variant,
            form._meta.model,
            form=form,
            formset=VariantPartFormSet,
            extra=extra,
            can_delete=True,
            can_delete_extra=False,
        )
        formsets.append((title, formset_class(data, instance=variant, prefix=prefix)))
    return formsets


def variant_parts(formsets: list[tuple[str, BaseInlineFormSet[Any, Variant, Any]]]) -> VariantParts:
    """What the valid formsets change, unsaved, for ``variant_save``."""
    parts = VariantParts()
    targets: list[list[Any]] = [parts.anode_positions, parts.seal_positions, parts.reply_steps]
    for (_, formset), target in zip(formsets, targets, strict=True):
        target.extend(formset.save(commit=False))
        parts.deleted.extend(formset.deleted_objects)
    return parts


class UnitForm(forms.ModelForm[Transponder]):
    # The version the editor loaded: a change since then refuses the edit (``unit_save``).
    version = forms.IntegerField(widget=forms.HiddenInput, min_value=1, required=False)

    class Meta:
        model = Transponder
        fields = [
            "serial",
            "variant",
            "place",
            "acoustic_address",
            "turnaround_delay_ms",
            "transmit_power_step",
            "notes",
        ]
        widgets = {"notes": forms.Textarea(attrs={"rows": 3})}

    def __init__(self, *args: Any, **kwargs: Any) -> None:
        super().__init__(*args, **kwargs)
        if self.instance.pk is None:
            return
        self.fields["serial"].disabled = True
        self.fields["serial"].help_text = "A serial does not change; register a new unit instead."
        self.initial.setdefault("version", self.instance.version)
        has_history = self.instance.service_records.exists() or self.instance.deployments.exists()
        if has_history:
            self.fields["variant"].disabled = True
            self.fields[
                "variant"
            ].help_text = (
                "Fixed: the unit has bench visits or deployments recorded on this variant."
            )


_RANGE = re.compile(r"^(?P<prefix>[A-Z0-9-]*?)(?P<start>\d+)\.\.(?P=prefix)(?P<end>\d+)$")


def expand_serials(text: str) -> list[str]:
    """Serials from a list (one per line, or separated by commas or spaces) with ranges
    written ``TX-0101..TX-0110`` or ``TX-0101 to TX-0110`` (the digits keep their width).
    ``ValidationError`` names each range it cannot read."""
    text = re.sub(r"\s+to\s+", "..", text.upper())
    serials: list[str] = []
    problems: list[str] = []
    for token in re.split(r"[\s,;]+", text.strip()):
        if not token:
            continue
        if ".." not in token:
            serials.append(token)
            continue
        match = _RANGE.match(token)
        if match is None:
            problems.append(
                f"{token}: write a range as TX-0101..TX-0110, the same prefix on both ends."
            )
            continue
        start, end = int(match["start"]), int(match["end"])
        if end < start:
            problems.append(f"{token}: the range ends before it starts.")
            continue
        if end - start >= MAX_UNITS_AT_ONCE:
            problems.append(f"{token}: more than {MAX_UNITS_AT_ONCE} serials.")
            continue
        width = len(match["start"])
        serials.extend(f"{match['prefix']}{n:0{width}d}" for n in range(start, end + 1))
    if problems:
        raise forms.ValidationError(problems)
    return serials


class UnitBatchForm(forms.Form):
    serials = forms.CharField(
        widget=forms.Textarea(attrs={"rows": 4}),
        help_text="A range such as TX-0101..TX-0110, or serials one per line or separated by "
        f"commas; at most {MAX_UNITS_AT_ONCE}. All are registered, or none is.",
    )
    variant = forms.ModelChoiceField(queryset=Variant.objects.all())
    place = forms.ModelChoiceField(queryset=Place.objects.all(), label="Now at")
    first_address = forms.RegexField(
        regex=r"^\d{1,12}$",
        label="First acoustic address",
        help_text="The units take this address and the ones after it, in serial order "
        "(301, 302, …; leading zeros kept).",
        error_messages={"invalid": "Give the first address as digits, e.g. 301."},
    )
    turnaround_delay_ms = forms.FloatField(
        label="Turnaround delay (ms)", min_value=0.0, max_value=1000.0
    )
    transmit_power_step = forms.IntegerField(min_value=1, max_value=9, initial=1)
    notes = forms.CharField(widget=forms.Textarea(attrs={"rows": 2}), required=False)

    def clean_serials(self) -> list[str]:
        serials = expand_serials(self.cleaned_data["serials"])
        if not serials:
            raise forms.ValidationError("Give at least one serial.")
        if len(serials) > MAX_UNITS_AT_ONCE:
            raise forms.ValidationError(f"At most {MAX_UNITS_AT_ONCE} serials at once.")
        return serials

    def units(self) -> list[Transponder]:
        """The new units, unsaved; call after ``is_valid()``."""
        data = self.cleaned_data
        first = data["first_address"]
        return [
            Transponder(
                serial=serial,
                variant=data["variant"],
                place=data["place"],
                acoustic_address=f"{int(first) + index:0{len(first)}d}",
                turnaround_delay_ms=data["turnaround_delay_ms"],
                transmit_power_step=data["transmit_power_step"],
                notes=data["notes"],
            )
            for index, serial in enumerate(data["serials"])
        ]


class UnitMoveForm(forms.Form):
    place = forms.ModelChoiceField(queryset=Place.objects.all(), label="Move to")
    version = forms.IntegerField(widget=forms.HiddenInput, min_value=1)


HOLD_ACTIONS = (
    (UnitHold.QUARANTINED.value, "Quarantine: keep it out of service until checked"),
    (UnitHold.RETIRED.value, "Retire: out of service for good"),
    (UnitHold.LOST.value, "Lost: cannot be found or recovered"),
    (UnitHold.NONE.value, "No hold: found, released or returned to service"),
)


class UnitHoldForm(forms.Form):
    hold = forms.ChoiceField(
        label="Set the hold to",
        widget=forms.RadioSelect,
        help_text="A unit in the water cannot be retired (recover it, or mark it lost). A unit "
        "with an open bench visit is in hand, so it cannot be marked lost or retired. Lost "
        "fits a unit in the water or ashore that cannot be found; clearing it records it found.",
    )
    reason = forms.CharField(
        max_length=REASON_MAX_CHARS,
        widget=forms.Textarea(attrs={"rows": 3}),
        help_text="Required; kept with the unit's hold history.",
    )

    def __init__(self, *args: Any, current: str, **kwargs: Any) -> None:
        super().__init__(*args, **kwargs)
        hold = self.fields["hold"]
        assert isinstance(hold, forms.ChoiceField)
        hold.choices = [(value, label) for value, label in HOLD_ACTIONS if value != current]
