from django.core.validators import MaxValueValidator, MinValueValidator
from django.db import models

from fleet.models import ServiceRecord
from fleet.models.records import Entry


class GaugeZeroCheck(Entry):
    """The unit's depth gauge read at the surface, vented to air."""

    record = models.ForeignKey(
        ServiceRecord, on_delete=models.CASCADE, related_name="gauge_zero_checks"
    )
    checked_on = models.DateField()
    zero_offset_dbar = models.FloatField(
        "zero offset (dbar)", validators=[MinValueValidator(-50.0), MaxValueValidator(50.0)]
    )
    note = models.CharField(max_length=80, blank=True)

    kind_label = "gauge zero check"
    bench_prefix = "gauges"
    amendable_fields = ("checked_on", "zero_offset_dbar", "note")
    dated_by = "checked_on"

    class Meta:
        ordering = ["-checked_on"]

    def __str__(self) -> str:
        return f"gauge zero {self.zero_offset_dbar:+g} dbar on {self.checked_on}"

    def describe(self) -> str:
        return f"Gauge reads {self.zero_offset_dbar:+g} dbar at the surface"
