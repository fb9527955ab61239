"""Service records: one visit of a unit to the bench, and the entries made during it.

A record is open while the technician works on it and read-only once a supervisor closes it.
Corrections to a closed record are ``Amendment`` rows that keep the original value. Every
housing opening counts against seal intervals and voids the last pressure test; the due
engine reads them from here.
"""

import datetime as dt

from django.conf import settings
from django.core.exceptions import ValidationError
from django.core.validators import MaxValueValidator, MinValueValidator
from django.db import models
from django.db.models import Q
from django.urls import reverse
from django.utils import timezone

from .places import Place
from .units import Transponder
from .variants import AnodePosition, Chemistry, Elastomer, SealPosition


def _today() -> dt.date:
    return timezone.localdate()


def _not_future_date(value: dt.date | None, field: str, errors: dict[str, str]) -> None:
    if value is not None and value > _today():
        errors[field] = "This date is in the future."


class ServiceRecord(models.Model):
    unit = models.ForeignKey(Transponder, on_delete=models.PROTECT, related_name="service_records")
    opened_at = models.DateTimeField("opened")
    closed_at = models.DateTimeField("closed", null=True, blank=True)
    technician = models.ForeignKey(
        settings.AUTH_USER_MODEL, on_delete=models.PROTECT, related_name="records_worked"
    )
    place = models.ForeignKey(Place, on_delete=models.PROTECT, related_name="service_records")
    summary = models.TextField(blank=True)

    created_by = models.ForeignKey(
        settings.AUTH_USER_MODEL, on_delete=models.PROTECT, related_name="+"
    )
    created_at = models.DateTimeField(auto_now_add=True)
    updated_by = models.ForeignKey(
        settings.AUTH_USER_MODEL, on_delete=models.PROTECT, related_name="+", null=True, blank=True
    )
    updated_at = models.DateTimeField(auto_now=True)
    closed_by = models.ForeignKey(
        settings.AUTH_USER_MODEL, on_delete=models.PROTECT, related_name="+", null=True, blank=True
    )
    version = models.PositiveIntegerField(default=1)

    class Meta:
        ordering = ["-opened_at", "-pk"]
        constraints = [
            models.CheckConstraint(
                condition=Q(closed_at__isnull=True) | Q(closed_at__gte=models.F("opened_at")),
                name="record_closed_after_opened",
            ),
            models.UniqueConstraint(
                fields=["unit"],
                condition=Q(closed_at__isnull=True),
                name="one_open_record_per_unit",
                violation_error_message=(
                    "This unit already has an open bench visit; finish or discard it first."
                ),
            ),
        ]

    def __str__(self) -> str:
        return f"{self.unit} bench visit {self.opened_at:%Y-%m-%d}"

    def get_absolute_url(self) -> str:
        return reverse("record-detail", args=[self.pk])

    @property
    def is_closed(self) -> bool:
        return self.closed_at is not None

    @property
    def service_date(self) -> dt.date:
        return timezone.localdate(self.opened_at)

    def clean(self) -> None:
        super().clean()
        if self.opened_at and self.opened_at > timezone.now():
            raise ValidationError({"opened_at": "The visit cannot start in the future."})


class Entry(models.Model):
    """Common part of every entry: the record it belongs to."""

    record = models.ForeignKey(ServiceRecord, on_delete=models.CASCADE, related_name="+")

    kind_label = "entry"

    class Meta:
        abstract = True

    def owning_record(self) -> "ServiceRecord | None":
        """The record, saved or not yet saved (forms attach an unsaved one to validate against)."""
        try:
            return self.record
        except ServiceRecord.DoesNotExist:
            return None

    def unit_variant_id(self) -> int | None:
        record = self.owning_record()
        return record.unit.variant_id if record is not None and record.unit_id else None


def _photo_path(instance: "AnodeReading", filename: str) -> str:
    return f"anodes/{instance.record.unit.serial}/{filename}"


class AnodeReading(Entry):
    record = models.ForeignKey(
        ServiceRecord, on_delete=models.CASCADE, related_name="anode_readings"
    )
    position = models.ForeignKey(AnodePosition, on_delete=models.PROTECT, related_name="readings")
    mass_g = models.FloatField(
        "net mass (g)", null=True, blank=True, validators=[MinValueValidator(0.0)]
    )
    remaining_percent = models.FloatField(
        "estimated remaining (%)",
        null=True,
        blank=True,
        validators=[MinValueValidator(0.0), MaxValueValidator(100.0)],
    )
    bond_resistance_ohm = models.FloatField(
        "bond resistance (Ω)",
        null=True,
        blank=True,
        validators=[MinValueValidator(0.0), MaxValueValidator(1000.0)],
    )
    replaced = models.BooleanField(
        "replaced", default=False, help_text="A new anode was fitted after this reading."
    )
    photo = models.ImageField(upload_to=_photo_path, null=True, blank=True)
    note = models.CharField(max_length=200, blank=True)

    kind_label = "anode reading"

    class Meta:
        ordering = ["position__name"]

    def __str__(self) -> str:
        return f"{self.position.name}: {self.describe()}"

    def describe(self) -> str:
        parts = []
        if self.mass_g is not None:
            parts.append(f"{self.mass_g:g} g")
        if self.remaining_percent is not None:
            parts.append(f"{self.remaining_percent:g} % remaining")
        if self.bond_resistance_ohm is not None:
            parts.append(f"bond {self.bond_resistance_ohm:g} Ω")
        if self.replaced:
            parts.append("replaced")
        return ", ".join(parts)

    @property
    def effective_remaining_percent(self) -> float | None:
        if self.mass_g is not None and self.position_id:
            return 100.0 * self.mass_g / self.position.new_net_mass_g
        return self.remaining_percent

    def clean(self) -> None:
        super().clean()
        errors: dict[str, str] = {}
        if self.mass_g is None and self.remaining_percent is None:
            errors["mass_g"] = "Give the net mass, the estimated remaining percentage, or both."
        if self.position_id and self.mass_g is not None:
            new_mass = self.position.new_net_mass_g
            if self.mass_g > new_mass:
                errors["mass_g"] = (
                    f"{self.mass_g:g} g is heavier than a new anode at this position "
                    f"({new_mass:g} g); allowed 0 to {new_mass:g} g."
                )
        variant_id = self.unit_variant_id()
        if self.position_id and variant_id and self.position.variant_id != variant_id:
            errors["position"] = "This anode position belongs to another variant."
        if errors:
            raise ValidationError(errors)


class SealChange(Entry):
    class Reason(models.TextChoices):
        INTERVAL = "interval", "Interval reached"
        OPENING = "opening", "Housing opened"
        DAMAGE = "damage", "Damage or set found"
        LEAK = "leak", "Leak or ingress"
        FIRST_FIT = "first_fit", "First fit"

    record = models.ForeignKey(ServiceRecord, on_delete=models.CASCADE, related_name="seal_changes")
    position = models.ForeignKey(SealPosition, on_delete=models.PROTECT, related_name="changes")
    material = models.CharField(max_length=8, choices=Elastomer.choices)
    cure_date = models.DateField(
        "cure date", help_text="From the packet; the first day of the cure quarter if only that."
    )
    lot = models.CharField(max_length=40, blank=True)
    reason = models.CharField(max_length=16, choices=Reason.choices)

    kind_label = "seal change"

    class Meta:
        ordering = ["position__name"]

    def __str__(self) -> str:
        return f"{self.position.name}: {self.get_material_display()}, cured {self.cure_date}"

    def clean(self) -> None:
        super().clean()
        errors: dict[str, str] = {}
        _not_future_date(self.cure_date, "cure_date", errors)
        variant_id = self.unit_variant_id()
        if self.position_id and variant_id and self.position.variant_id != variant_id:
            errors["position"] = "This seal position belongs to another variant."
        if errors:
            raise ValidationError(errors)


class BatteryInstall(Entry):
    record = models.ForeignKey(
        ServiceRecord, on_delete=models.CASCADE, related_name="battery_installs"
    )
    # Kept beside the record so that "one fitted pack per unit" is a database constraint.
    unit = models.ForeignKey(Transponder, on_delete=models.PROTECT, related_name="battery_installs")
    pack_serial = models.CharField(max_length=40)
    chemistry = models.CharField(max_length=12, choices=Chemistry.choices)
    nominal_voltage_v = models.FloatField(
        "nominal voltage (V)", validators=[MinValueValidator(0.5), MaxValueValidator(200.0)]
    )
    capacity_ah = models.FloatField(
        "rated capacity (Ah)", validators=[MinValueValidator(0.01), MaxValueValidator(10000.0)]
    )
    made_on = models.DateField("pack made on")
    installed_on = models.DateField("installed on")
    removed_on = models.DateField("removed on", null=True, blank=True)
    ocv_install_v = models.FloatField(
        "open-circuit volts at install",
        validators=[MinValueValidator(0.0), MaxValueValidator(300.0)],
    )
    ocv_removal_v = models.FloatField(
        "open-circuit volts at removal",
        null=True,
        blank=True,
        validators=[MinValueValidator(0.0), MaxValueValidator(300.0)],
    )

    kind_label = "battery install"

    class Meta:
        ordering = ["-installed_on"]
        constraints = [
            models.UniqueConstraint(
                fields=["unit"],
                condition=Q(removed_on__isnull=True),
                name="one_fitted_pack_per_unit",
                violation_error_message="This unit already has a fitted battery pack.",
            ),
        ]

    def __str__(self) -> str:
        return f"pack {self.pack_serial} ({self.get_chemistry_display()})"

    @property
    def is_fitted(self) -> bool:
        return self.removed_on is None

    def clean(self) -> None:
        super().clean()
        errors: dict[str, str] = {}
        for field in ("made_on", "installed_on", "removed_on"):
            _not_future_date(getattr(self, field), field, errors)
        if self.made_on and self.installed_on and self.installed_on < self.made_on:
            errors["installed_on"] = "A pack cannot be installed before it was made."
        if self.removed_on and self.installed_on and self.removed_on < self.installed_on:
            errors["removed_on"] = "Removal must be on or after the install date."
        if self.ocv_removal_v is not None and self.removed_on is None:
            errors["ocv_removal_v"] = "Record removal volts with a removal date."
        if self.nominal_voltage_v and self.ocv_install_v is not None:
            top = 1.3 * self.nominal_voltage_v
            if self.ocv_install_v > top:
                errors["ocv_install_v"] = (
                    f"{self.ocv_install_v:g} V is above 1.3 × nominal ({top:.1f} V); "
                    "check the meter and the nominal voltage."
                )
        record = self.owning_record()
        if record is not None and record.unit_id and self.chemistry:
            allowed = record.unit.variant.allowed_chemistries or []
            if self.chemistry not in allowed:
                errors["chemistry"] = (
                    f"This variant's battery bay accepts {', '.join(allowed) or 'no chemistry'}."
                )
        if errors:
            raise ValidationError(errors)


class PressureTest(Entry):
    record = models.ForeignKey(
        ServiceRecord, on_delete=models.CASCADE, related_name="pressure_tests"
    )
    tested_on = models.DateField()
    test_pressure_dbar = models.FloatField(
        "test pressure (dbar)", validators=[MinValueValidator(0.0), MaxValueValidator(20000.0)]
    )
    hold_minutes = models.FloatField(
        "hold (min)", validators=[MinValueValidator(0.0), MaxValueValidator(10000.0)]
    )
    start_pressure_dbar = models.FloatField(
        "start of hold (dbar)", validators=[MinValueValidator(0.0), MaxValueValidator(20000.0)]
    )
    end_pressure_dbar = models.FloatField(
        "end of hold (dbar)", validators=[MinValueValidator(0.0), MaxValueValidator(20000.0)]
    )
    water_temperature_start_c = models.FloatField(
        "water at start (°C)", validators=[MinValueValidator(-2.0), MaxValueValidator(50.0)]
    )
    water_temperature_end_c = models.FloatField(
        "water at end (°C)", validators=[MinValueValidator(-2.0), MaxValueValidator(50.0)]
    )
    ingress_found = models.BooleanField("ingress found", default=False)
    facility = models.CharField(max_length=80)

    kind_label = "pressure test"

    class Meta:
        ordering = ["-tested_on"]

    def __str__(self) -> str:
        return f"pressure test {self.test_pressure_dbar:g} dbar on {self.tested_on}"

    def clean(self) -> None:
        super().clean()
        errors: dict[str, str] = {}
        _not_future_date(self.tested_on, "tested_on", errors)
        if errors:
            raise ValidationError(errors)


class ReleaseTest(Entry):
    class Kind(models.TextChoices):
        BENCH = "bench", "Bench (no load)"
        WET = "wet", "Wet (in tank or alongside)"
        LOAD = "load", "Under load"

    record = models.ForeignKey(
        ServiceRecord, on_delete=models.CASCADE, related_name="release_tests"
    )
    tested_on = models.DateField()
    kind = models.CharField(max_length=8, choices=Kind.choices)
    load_kg = models.FloatField(
        "load (kg)",
        null=True,
        blank=True,
        validators=[MinValueValidator(0.0), MaxValueValidator(20000.0)],
    )
    seconds_to_release = models.FloatField(
        "time to release (s)", validators=[MinValueValidator(0.0), MaxValueValidator(3600.0)]
    )
    motor_current_a = models.FloatField(
        "peak motor current (A)", validators=[MinValueValidator(0.0), MaxValueValidator(50.0)]
    )
    limit_switch_ok = models.BooleanField("limit switch ok", default=False)
    acoustic_command_ok = models.BooleanField("acoustic command ok", default=False)

    kind_label = "release test"

    class Meta:
        ordering = ["-tested_on"]

    def __str__(self) -> str:
        return f"{self.get_kind_display()} release test on {self.tested_on}"

    def clean(self) -> None:
        super().clean()
        errors: dict[str, str] = {}
        _not_future_date(self.tested_on, "tested_on", errors)
        if self.kind == self.Kind.LOAD and not self.load_kg:
            errors["load_kg"] = "A test under load needs the load in kg."
        if errors:
            raise ValidationError(errors)


class SensorCheck(Entry):
    class Sensor(models.TextChoices):
        TEMPERATURE = "temperature", "Temperature (°C)"
        PRESSURE = "pressure", "Pressure (dbar)"
        TILT = "tilt", "Tilt (°)"

    record = models.ForeignKey(
        ServiceRecord, on_delete=models.CASCADE, related_name="sensor_checks"
    )
    checked_on = models.DateField()
    sensor = models.CharField(max_length=12, choices=Sensor.choices)
    reference_value = models.FloatField(
        help_text="Reference instrument's value in the sensor's unit (°C, dbar or degrees)."
    )
    unit_reading = models.FloatField(help_text="What the unit reported, same unit.")
    raw_resistance_ohm = models.FloatField(
        "raw resistance (Ω)",
        null=True,
        blank=True,
        validators=[MinValueValidator(10.0), MaxValueValidator(500.0)],
        help_text="Temperature only: the PT100 element's resistance, read at the connector.",
    )

    kind_label = "sensor check"

    class Meta:
        ordering = ["-checked_on", "sensor"]

    def __str__(self) -> str:
        return f"{self.get_sensor_display()} check on {self.checked_on}"

    @property
    def error(self) -> float:
        return self.unit_reading - self.reference_value

    def clean(self) -> None:
        super().clean()
        errors: dict[str, str] = {}
        _not_future_date(self.checked_on, "checked_on", errors)
        if self.raw_resistance_ohm is not None and self.sensor != self.Sensor.TEMPERATURE:
            errors["raw_resistance_ohm"] = "Raw resistance applies to temperature checks only."
        ranges = {
            self.Sensor.TEMPERATURE: (-5.0, 50.0),
            self.Sensor.PRESSURE: (0.0, 12000.0),
            self.Sensor.TILT: (-90.0, 90.0),
        }
        if self.sensor in ranges:
            lo, hi = ranges[self.sensor]
            for field in ("reference_value", "unit_reading"):
                value = getattr(self, field)
                if value is not None and not lo <= value <= hi:
                    errors[field] = f"Allowed {lo:g} to {hi:g} for a {self.sensor} check."
        if errors:
            raise ValidationError(errors)


class HousingOpening(Entry):
    record = models.ForeignKey(
        ServiceRecord, on_delete=models.CASCADE, related_name="housing_openings"
    )
    opened_at = models.DateTimeField("opened")
    closed_at = models.DateTimeField("closed", null=True, blank=True)
    vented_before_opening = models.BooleanField("vented before opening", default=False)
    internal_pressure_found = models.BooleanField("internal pressure or gas found", default=False)
    reason = models.CharField(max_length=200)

    kind_label = "housing opening"

    class Meta:
        ordering = ["-opened_at"]

    def __str__(self) -> str:
        return f"housing opened {self.opened_at:%Y-%m-%d %H:%M}"

    def clean(self) -> None:
        super().clean()
        errors: dict[str, str] = {}
        now = timezone.now()
        if self.opened_at and self.opened_at > now:
            errors["opened_at"] = "This time is in the future."
        if self.closed_at:
            if self.closed_at > now:
                errors["closed_at"] = "This time is in the future."
            elif self.opened_at and self.closed_at < self.opened_at:
                errors["closed_at"] = "The housing must be closed after it was opened."
        if errors:
            raise ValidationError(errors)


ENTRY_MODELS: tuple[type[Entry], ...] = (
    AnodeReading,
    SealChange,
    BatteryInstall,
    PressureTest,
    ReleaseTest,
    SensorCheck,
    HousingOpening,
)
