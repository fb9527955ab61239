"""Imports: each imported file once (by checksum), and the file row each imported record came
from."""

from django.conf import settings
from django.contrib.contenttypes.fields import GenericForeignKey
from django.contrib.contenttypes.models import ContentType
from django.db import models


class ImportBatch(models.Model):
    """One imported file. Its checksum is unique: the same file is never imported twice."""

    kind = models.CharField(max_length=16)
    file_name = models.CharField(max_length=255)
    checksum = models.CharField(max_length=64, unique=True)
    rows = models.PositiveIntegerField()
    imported_by = models.ForeignKey(
        settings.AUTH_USER_MODEL, on_delete=models.PROTECT, related_name="+"
    )
    imported_at = models.DateTimeField()

    class Meta:
        ordering = ["-imported_at", "-pk"]
        verbose_name_plural = "import batches"

    def __str__(self) -> str:
        return f"{self.file_name} ({self.kind}, {self.imported_at:%Y-%m-%d %H:%M})"


class ImportedRow(models.Model):
    """A record (unit, site, deployment, bench visit or entry) and the file row it came from."""

    batch = models.ForeignKey(ImportBatch, on_delete=models.CASCADE, related_name="imported_rows")
    row = models.PositiveIntegerField()
    target_type = models.ForeignKey(ContentType, on_delete=models.PROTECT, related_name="+")
    target_id = models.PositiveBigIntegerField()
    target = GenericForeignKey("target_type", "target_id")

    class Meta:
        ordering = ["batch", "row", "pk"]
        indexes = [models.Index(fields=["target_type", "target_id"])]

    def __str__(self) -> str:
        return f"{self.batch.file_name} row {self.row}"
