"""Merging a vessel kit back ashore: each merge, and each conflict it found.

A merge (``KitMerge``) is one return file of one kit brought into the shore database: its
checksum, who and when, and how many rows of each kind it added. A conflict (``KitConflict``)
is a pair of histories the merge would not choose between on its own: both sides' rows are
kept whole (serialized) until a supervisor picks one of the choices offered; the choice, who,
when and a note are then kept with it.
"""

from django.conf import settings
from django.core.validators import MaxLengthValidator
from django.db import models

from .units import Transponder
from .validators import REASON_MAX_CHARS


class KitMerge(models.Model):
    class Status(models.TextChoices):
        PREVIEWED = "previewed", "Previewed"
        APPLIED = "applied", "Applied"

    kit = models.ForeignKey("fleet.Kit", on_delete=models.PROTECT, related_name="merges")
    file_sha256 = models.CharField("file SHA-256", max_length=64)
    merged_at = models.DateTimeField()
    merged_by = models.ForeignKey(
        settings.AUTH_USER_MODEL, on_delete=models.PROTECT, related_name="+"
    )
    status = models.CharField(max_length=12, choices=Status.choices, default=Status.PREVIEWED)
    # Rows added per kind ({"bench visits": 2, "deployments": 1, ...}) and the total.
    counts = models.JSONField(default=dict, blank=True)
    rows_added = models.PositiveIntegerField(default=0)
    rows_changed = models.PositiveIntegerField(default=0)
    # Written by the merge, never typed.
    notes = models.TextField(blank=True, editable=False)

    class Meta:
        ordering = ["-merged_at", "-pk"]

    def __str__(self) -> str:
        return f"merge of {self.kit} on {self.merged_at:%Y-%m-%d %H:%M}"


class KitConflict(models.Model):
    class Kind(models.TextChoices):
        INTERLEAVED = "interleaved", "Unit changed on both sides"
        TWO_PLACES = "two_places", "Unit deployed in two places"
        CLOSED_TWICE = "closed_twice", "Bench visit closed on both sides"
        WORKED_TWICE = "worked_twice", "Bench visit worked on both sides"
        AMENDED_TWICE = "amended_twice", "Value amended on both sides"
        RECOVERED_TWICE = "recovered_twice", "Deployment recovered on both sides"
        HOLD_TWICE = "hold_twice", "Hold changed on both sides"
        CERTIFICATE = "certificate", "Certificate changed on both sides"

    class Choice(models.TextChoices):
        KEEP_SHORE = "keep_shore", "Keep the shore's version"
        ADD_VESSEL = "add_vessel", "Add the vessel's version as well"
        TAKE_VESSEL = "take_vessel", "Take the vessel's value"

    merge = models.ForeignKey(KitMerge, on_delete=models.CASCADE, related_name="conflicts")
    kind = models.CharField(max_length=20, choices=Kind.choices)
    unit = models.ForeignKey(Transponder, on_delete=models.PROTECT, related_name="kit_conflicts")
    # A stable key of what is in conflict (the vessel rows' uids), so a later merge of the
    # same kit recognises a conflict it already recorded.
    key = models.CharField(max_length=200)
    explanation = models.TextField(editable=False)  # written by the merge, never typed
    shore_version = models.JSONField(default=list, blank=True)
    vessel_version = models.JSONField(default=list, blank=True)
    choices = models.JSONField(default=list, blank=True)
    resolution = models.CharField(max_length=20, choices=Choice.choices, blank=True)
    resolved_by = models.ForeignKey(
        settings.AUTH_USER_MODEL,
        on_delete=models.PROTECT,
        related_name="+",
        null=True,
        blank=True,
    )
    resolved_at = models.DateTimeField(null=True, blank=True)
    note = models.TextField(
        blank=True, max_length=REASON_MAX_CHARS, validators=[MaxLengthValidator(REASON_MAX_CHARS)]
    )

    class Meta:
        ordering = ["merge", "pk"]
        constraints = [
            models.CheckConstraint(
                condition=models.Q(resolution="")
                | models.Q(resolved_by__isnull=False, resolved_at__isnull=False),
                name="kitconflict_resolution_has_who_and_when",
            )
        ]

    def __str__(self) -> str:
        return f"{self.get_kind_display()}: {self.unit}"

    @property
    def is_resolved(self) -> bool:
        return bool(self.resolution)

    def choice_labels(self) -> list[tuple[str, str]]:
        labels = dict(self.Choice.choices)
        return [(c, str(labels.get(c, c))) for c in self.choices]
