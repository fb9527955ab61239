"""Deployments: a unit in the water at a site, from over the side to recovery."""

from django.conf import settings
from django.core.exceptions import ValidationError
from django.core.validators import MaxLengthValidator, MaxValueValidator, MinValueValidator
from django.db import models
from django.db.models import Q
from django.utils import timezone

from .kits import Stamped, origin_field, uid_field
from .places import Site
from .units import Transponder, check_power_step
from .validators import DATE_VALIDATORS, SUMMARY_MAX_CHARS, within_date_bounds


class Deployment(Stamped):
    unit = models.ForeignKey(Transponder, on_delete=models.PROTECT, related_name="deployments")
    site = models.ForeignKey(Site, on_delete=models.PROTECT, related_name="deployments")
    over_side_at = models.DateTimeField("over the side", validators=[*DATE_VALIDATORS])
    recovered_at = models.DateTimeField(
        "recovered", null=True, blank=True, validators=[*DATE_VALIDATORS]
    )
    # Days, interrogations a day and power step feed calc.battery.charge_used_ah (listen
    # hours and replies from 0 up) through the due engine and readiness.
    planned_days = models.PositiveIntegerField(
        validators=[MinValueValidator(1), MaxValueValidator(3650)]
    )
    planned_interrogations_per_day = models.PositiveIntegerField(
        validators=[MaxValueValidator(1_000_000)]
    )
    replies_counted = models.PositiveIntegerField(
        "replies counted on recovery", null=True, blank=True
    )
    transmit_power_step = models.PositiveSmallIntegerField(
        validators=[MinValueValidator(1), MaxValueValidator(9)]
    )
    notes = models.TextField(
        blank=True,
        max_length=SUMMARY_MAX_CHARS,
        validators=[MaxLengthValidator(SUMMARY_MAX_CHARS)],
    )
    created_by = models.ForeignKey(
        settings.AUTH_USER_MODEL, on_delete=models.PROTECT, related_name="+", null=True
    )
    created_at = models.DateTimeField(auto_now_add=True)
    # A supervisor may deploy a unit whose readiness failed, with a written reason; the failing
    # checks are kept as they read at that moment, one "name: numbers" per line.
    override_reason = models.TextField(
        "deployed against a failed check because",
        blank=True,
        max_length=SUMMARY_MAX_CHARS,
        validators=[MaxLengthValidator(SUMMARY_MAX_CHARS)],
    )
    override_by = models.ForeignKey(
        settings.AUTH_USER_MODEL,
        on_delete=models.PROTECT,
        related_name="+",
        null=True,
        blank=True,
        editable=False,
    )
    override_at = models.DateTimeField(null=True, blank=True, editable=False)
    override_checks = models.TextField(blank=True, editable=False)
    uid = uid_field()
    origin = origin_field()

    class Meta:
        ordering = ["-over_side_at"]
        constraints = [
            models.CheckConstraint(
                condition=Q(recovered_at__isnull=True)
                | Q(recovered_at__gt=models.F("over_side_at")),
                name="deployment_recovered_after_over_side",
            ),
            models.UniqueConstraint(
                fields=["unit"],
                condition=Q(recovered_at__isnull=True),
                name="one_open_deployment_per_unit",
            ),
        ]
        indexes = [
            # A unit's deployments newest first (its history page), as its visits are.
            models.Index(fields=["unit", "over_side_at"], name="deployment_by_unit_age"),
            # The units in the water at a site (the acoustic address check): a few rows,
            # where the site's index holds every deployment there ever was.
            models.Index(
                fields=["site"],
                condition=Q(recovered_at__isnull=True),
                name="open_deployment_by_site",
            ),
        ]

    def __str__(self) -> str:
        return f"{self.unit} at {self.site} from {self.over_side_at:%Y-%m-%d}"

    @property
    def overridden(self) -> bool:
        return bool(self.override_reason)

    @property
    def override_check_lines(self) -> list[str]:
        return self.override_checks.splitlines()

    def clean(self) -> None:
        super().clean()
        errors: dict[str, str] = {}
        now = timezone.now()
        if self.over_side_at and self.over_side_at > now:
            errors["over_side_at"] = "Over the side cannot be in the future."
        if self.recovered_at:
            if self.recovered_at > now:
                errors["recovered_at"] = "Recovery cannot be in the future."
            elif self.over_side_at and self.recovered_at <= self.over_side_at:
                errors["recovered_at"] = "Recovery must come after over the side."
        if self.replies_counted is not None and self.recovered_at is None:
            errors["replies_counted"] = "Count replies when the unit is recovered."
        if self.unit_id and self.transmit_power_step:
            try:
                check_power_step(self.unit.variant, self.transmit_power_step, "transmit_power_step")
            except ValidationError as exc:
                errors.update({k: v[0] for k, v in exc.message_dict.items()})
        if errors:
            raise ValidationError(errors)
        if not (within_date_bounds(self.over_side_at) and within_date_bounds(self.recovered_at)):
            return  # the field validators say why; such a date cannot be shifted or queried
        self._check_overlap()

    def _check_overlap(self) -> None:
        """A unit is in one place at a time: no two of its deployments overlap."""
        if self.unit_id and self.over_side_at:
            end = self.recovered_at
            others = Deployment.objects.filter(unit_id=self.unit_id).exclude(pk=self.pk)
            overlapping = others.filter(
                Q(recovered_at__isnull=True) | Q(recovered_at__gt=self.over_side_at)
            )
            if end is not None:
                overlapping = overlapping.filter(over_side_at__lt=end)
            if overlapping.exists():
                raise ValidationError(
                    {"over_side_at": "This unit has another deployment overlapping these dates."}
                )
