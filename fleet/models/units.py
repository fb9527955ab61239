"""Transponders (units), by serial, and their photos."""

from django.conf import settings
from django.core.exceptions import ValidationError
from django.core.validators import (
    MaxLengthValidator,
    MaxValueValidator,
    MinValueValidator,
    RegexValidator,
)
from django.db import models
from django.db.models import Q
from django.urls import reverse

from .kits import Stamped, origin_field, uid_field
from .places import Place
from .validators import REASON_MAX_CHARS, SUMMARY_MAX_CHARS, finite
from .variants import Variant

serial_validator = RegexValidator(
    r"^[A-Z0-9][A-Z0-9-]{1,30}$",
    "Use 2 to 31 capital letters, digits and hyphens, starting with a letter or digit.",
)


class UnitHold(models.TextChoices):
    """What the records cannot know, set by hand with a reason. Everything else about a unit's
    condition is derived from its records (``fleet.due.condition``)."""

    NONE = "none", "No hold"
    QUARANTINED = "quarantined", "Quarantined"
    RETIRED = "retired", "Retired"
    LOST = "lost", "Lost"


class Transponder(models.Model):
    serial = models.CharField(max_length=31, unique=True, validators=[serial_validator])
    variant = models.ForeignKey(Variant, on_delete=models.PROTECT, related_name="units")
    hold = models.CharField(max_length=12, choices=UnitHold.choices, default=UnitHold.NONE)
    hold_reason = models.TextField(
        blank=True,
        max_length=REASON_MAX_CHARS,
        validators=[MaxLengthValidator(REASON_MAX_CHARS)],
        help_text="Required when the unit is held.",
    )
    hold_set_by = models.ForeignKey(
        settings.AUTH_USER_MODEL,
        on_delete=models.PROTECT,
        related_name="+",
        null=True,
        blank=True,
        editable=False,
    )
    hold_set_at = models.DateTimeField(null=True, blank=True, editable=False)
    place = models.ForeignKey(
        Place, on_delete=models.PROTECT, null=True, blank=True, related_name="units"
    )
    acoustic_address = models.CharField(
        max_length=12,
        validators=[RegexValidator(r"^[A-Z0-9-]{1,12}$", "Capital letters, digits and hyphens.")],
        help_text="Address or channel the unit answers to.",
    )
    # Inside calc.ranging's turnaround_s guard (0 to 10 s) once divided by 1000.
    turnaround_delay_ms = models.FloatField(
        "turnaround delay (ms)",
        validators=[finite, MinValueValidator(0.0), MaxValueValidator(1000.0)],
    )
    transmit_power_step = models.PositiveSmallIntegerField(
        default=1, validators=[MinValueValidator(1), MaxValueValidator(9)]
    )
    notes = models.TextField(
        blank=True,
        max_length=SUMMARY_MAX_CHARS,
        validators=[MaxLengthValidator(SUMMARY_MAX_CHARS)],
    )
    created_at = models.DateTimeField(auto_now_add=True)
    updated_at = models.DateTimeField(auto_now=True)
    version = models.PositiveIntegerField(default=1, editable=False)

    class Meta:
        ordering = ["serial"]
        verbose_name = "transponder"
        constraints = [
            models.CheckConstraint(
                condition=Q(hold=UnitHold.NONE) | ~Q(hold_reason=""),
                name="unit_hold_has_reason",
                violation_error_message="Say why the unit is held.",
            ),
        ]

    def __str__(self) -> str:
        return self.serial

    def get_absolute_url(self) -> str:
        return reverse("unit-detail", args=[self.serial])

    def clean(self) -> None:
        super().clean()
        if self.hold != UnitHold.NONE and not self.hold_reason.strip():
            raise ValidationError({"hold_reason": "Say why the unit is held."})
        if self.variant_id and self.transmit_power_step:
            check_power_step(self.variant, self.transmit_power_step, "transmit_power_step")
        refusal = self.variant_change_refusal()
        if refusal:
            raise ValidationError({"variant": refusal})

    def variant_change_refusal(self) -> str:
        """Why the variant cannot change ("" when it can): the history's anode and seal
        positions belong to the variant the unit had when they were written."""
        if self.pk is None or not self.variant_id:
            return ""
        stored = Transponder.objects.filter(pk=self.pk).values_list("variant_id", flat=True).first()
        if stored is None or stored == self.variant_id:
            return ""
        if not (self.service_records.exists() or self.deployments.exists()):
            return ""
        return (
            f"{self.serial} already has bench visits or deployments, so its variant cannot "
            "change: their anode and seal positions belong to the variant they were recorded "
            "on. Holdfast has no tool that maps a history's positions to another variant; "
            "keep the variant, or register the rebuilt unit under a new serial."
        )


def check_power_step(variant: Variant, step: int, field: str) -> None:
    """A power step must be one the variant lists a reply charge for (when it lists any)."""
    steps = sorted(variant.reply_steps.values_list("step", flat=True))
    if steps and step not in steps:
        raise ValidationError(
            {field: f"{variant} has transmit power steps {', '.join(map(str, steps))}."}
        )


class HoldChange(Stamped):
    """One change of a unit's hold, with who made it, when and why (the unit keeps the latest)."""

    unit = models.ForeignKey(Transponder, on_delete=models.CASCADE, related_name="hold_changes")
    from_hold = models.CharField(max_length=12, choices=UnitHold.choices)
    to_hold = models.CharField(max_length=12, choices=UnitHold.choices)
    reason = models.TextField(
        max_length=REASON_MAX_CHARS, validators=[MaxLengthValidator(REASON_MAX_CHARS)]
    )
    set_by = models.ForeignKey(settings.AUTH_USER_MODEL, on_delete=models.PROTECT, related_name="+")
    set_at = models.DateTimeField()
    uid = uid_field()
    origin = origin_field()

    class Meta:
        ordering = ["-set_at", "-pk"]

    def __str__(self) -> str:
        return f"{self.get_from_hold_display()} to {self.get_to_hold_display()}: {self.reason}"


def _photo_path(instance: "UnitPhoto", filename: str) -> str:
    return f"units/{instance.unit.serial}/{filename}"


class UnitPhoto(models.Model):
    unit = models.ForeignKey(Transponder, on_delete=models.CASCADE, related_name="photos")
    image = models.ImageField(upload_to=_photo_path)
    caption = models.CharField(max_length=120, blank=True)
    uploaded_by = models.ForeignKey(
        settings.AUTH_USER_MODEL, on_delete=models.PROTECT, related_name="+"
    )
    uploaded_at = models.DateTimeField(auto_now_add=True)

    class Meta:
        ordering = ["-uploaded_at"]

    def __str__(self) -> str:
        return self.caption or self.image.name or ""
