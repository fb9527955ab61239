"""Amendments: corrections to a closed service record that keep the original value."""

from django.conf import settings
from django.contrib.contenttypes.fields import GenericForeignKey
from django.contrib.contenttypes.models import ContentType
from django.core.validators import MaxLengthValidator
from django.db import models

from .kits import Stamped, origin_field, uid_field
from .records import ServiceRecord
from .validators import REASON_MAX_CHARS


class Amendment(Stamped):
    record = models.ForeignKey(ServiceRecord, on_delete=models.PROTECT, related_name="amendments")
    target_type = models.ForeignKey(ContentType, on_delete=models.PROTECT)
    target_id = models.PositiveBigIntegerField()
    target = GenericForeignKey("target_type", "target_id")
    field_name = models.CharField(max_length=60)
    original_value = models.TextField(blank=True)
    corrected_value = models.TextField(blank=True)
    reason = models.TextField(
        max_length=REASON_MAX_CHARS, validators=[MaxLengthValidator(REASON_MAX_CHARS)]
    )
    created_by = models.ForeignKey(
        settings.AUTH_USER_MODEL, on_delete=models.PROTECT, related_name="+"
    )
    created_at = models.DateTimeField(auto_now_add=True)
    uid = uid_field()
    origin = origin_field()

    class Meta:
        ordering = ["created_at", "pk"]

    def __str__(self) -> str:
        return f"amendment to {self.field_name} on record {self.record_id}"
