"""Service records: one visit of a unit to the bench, and the entries made during it.

A record is open while the technician works on it and read-only once a supervisor closes it.
Corrections to a closed record are ``Amendment`` rows that keep the original value. Every
housing opening counts against seal intervals and voids the last pressure test; the due
engine reads them from here.
"""

import datetime as dt
import functools
import math
import operator
from collections.abc import Mapping
from dataclasses import dataclass
from typing import Any, ClassVar, Self, cast

from django.apps import apps
from django.conf import settings
from django.core.exceptions import ValidationError
from django.core.validators import MaxLengthValidator, MaxValueValidator, MinValueValidator
from django.db import models
from django.db.models import Q, QuerySet
from django.urls import reverse
from django.utils import timezone
from django.utils.text import capfirst

from fleet.calc.seawater import pressure_dbar
from fleet.formatting import quantity, signed, yes_no

from .kits import Stamped, origin_field, uid_field
from .places import Place
from .units import Transponder
from .validators import (
    DATE_VALIDATORS,
    SUMMARY_MAX_CHARS,
    RangeCheck,
    finite,
    range_checks,
)
from .variants import AnodePosition, Chemistry, Elastomer, SealPosition, Variant


def _today() -> dt.date:
    return timezone.localdate()


def _not_future_date(value: dt.date | None, field: str, errors: dict[str, str]) -> None:
    if value is not None and value > _today():
        errors[field] = "This date is in the future."


class ServiceRecord(Stamped):
    unit = models.ForeignKey(Transponder, on_delete=models.PROTECT, related_name="service_records")
    opened_at = models.DateTimeField("opened", validators=[*DATE_VALIDATORS])
    closed_at = models.DateTimeField("closed", null=True, blank=True)
    technician = models.ForeignKey(
        settings.AUTH_USER_MODEL, on_delete=models.PROTECT, related_name="records_worked"
    )
    place = models.ForeignKey(Place, on_delete=models.PROTECT, related_name="service_records")
    summary = models.TextField(
        blank=True,
        max_length=SUMMARY_MAX_CHARS,
        validators=[MaxLengthValidator(SUMMARY_MAX_CHARS)],
    )

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
    uid = uid_field()
    origin = origin_field()

    class Meta:
        ordering = ["-opened_at", "-pk"]
        # The overview's open visits, oldest first, read from the few open rows alone.
        indexes = [
            models.Index(
                fields=["opened_at"], condition=Q(closed_at__isnull=True), name="record_open_by_age"
            ),
            # A unit's visits newest first (its latest reading at each position, the chart's
            # newest readings), read without sorting the unit's whole history.
            models.Index(fields=["unit", "opened_at"], name="record_by_unit_age"),
        ]
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

    def clean(self) -> None:
        super().clean()
        if self.opened_at and self.opened_at > timezone.now():
            raise ValidationError({"opened_at": "The visit cannot start in the future."})


class Entry(Stamped):
    """Common part of every entry: the record it belongs to.

    Each concrete subclass is an entry kind and declares, once, what the pages, the amendment
    form, the report and the demo need to know about it (see ``entry_kinds()``): its labels are
    the model's ``verbose_name`` and ``verbose_name_plural``; its place on ServiceRecord is the
    ``related_name`` of its ``record`` key; the rest are the class attributes below.
    """

    record = models.ForeignKey(ServiceRecord, on_delete=models.CASCADE, related_name="+")
    uid = uid_field()
    origin = origin_field()

    kind_label = "entry"
    # Formset prefix on the bench-visit page (it names the posted fields: keep it stable).
    bench_prefix: ClassVar[str] = ""
    # Blank rows offered on a new record (an edited record always offers one).
    bench_extra: ClassVar[int] = 1
    # Heading on the bench-visit page; empty means the plural label.
    bench_title: ClassVar[str] = ""
    # Fields an amendment may correct on a closed record. The record link, the unit and
    # photos are structural and are never amended.
    amendable_fields: ClassVar[tuple[str, ...]] = ()
    # Foreign keys that ``describe()`` and ``__str__`` read, fetched with the entries.
    list_select_related: ClassVar[tuple[str, ...]] = ()
    # The field (a lookup path) whose date the entry is dated by.
    dated_by: ClassVar[str] = "record__opened_at"

    class Meta:
        abstract = True

    def describe(self) -> str:
        """The entry in one line of plain text."""
        return str(self)

    def history_line(self) -> str:
        """The entry's line in the unit's history."""
        return self.describe()

    def warning(self) -> str:
        """A recorded finding the history stresses after the line (empty when none)."""
        return ""

    def dated_on(self) -> dt.date:
        value: object = self
        for part in self.dated_by.split("__"):
            value = getattr(value, part)
        if isinstance(value, dt.datetime):
            return timezone.localdate(value)
        if not isinstance(value, dt.date):
            raise TypeError(f"{type(self).__name__}.dated_by ({self.dated_by}) is not a date.")
        return value

    @classmethod
    def related_name(cls) -> str:
        """The name of this kind's entries on a ServiceRecord (``record.<related_name>``)."""
        record = cast("models.ForeignKey[Any, Any]", cls._meta.get_field("record"))
        return str(record.remote_field.related_name)

    @classmethod
    def shown_fields(cls) -> tuple[str, ...]:
        """The fields a page or report prints for an entry of this kind, in model order: every
        recorded value (not the record link, the unit beside it, nor a photo)."""
        return tuple(
            f.name
            for f in cls._meta.concrete_fields
            if not f.primary_key
            and f.name not in ("record", "unit", "uid", "origin")
            and not isinstance(f, models.FileField)
        )

    @classmethod
    def plural_title(cls) -> str:
        return str(capfirst(cls._meta.verbose_name_plural))

    @classmethod
    def bench_heading(cls) -> str:
        return cls.bench_title or cls.plural_title()

    @classmethod
    def with_list_related(cls, queryset: QuerySet[Self] | None = None) -> QuerySet[Self]:
        """``queryset`` (default: all of this kind) with the keys its lines read."""
        queryset = cls._default_manager.all() if queryset is None else queryset
        if cls.list_select_related:
            queryset = queryset.select_related(*cls.list_select_related)
        return queryset

    @classmethod
    def fits(cls, variant: Variant) -> bool:
        """Whether a unit of ``variant`` can carry an entry of this kind (every kind but one
        fits every variant: a release test needs a release)."""
        return True

    def owning_record(self) -> "ServiceRecord | None":
        """The record, saved or not yet saved (forms attach an unsaved one to validate against)."""
        try:
            return self.record
        except ServiceRecord.DoesNotExist:
            return None

    def unit_variant_id(self) -> int | None:
        record = self.owning_record()
        return record.unit.variant_id if record is not None and record.unit_id else None

    @classmethod
    def value_errors(
        cls, values: Mapping[str, Any], *, unit_variant_id: int | None
    ) -> dict[str, str]:
        """The rules of the kind's ``clean()`` on plain values (by field name, each key the
        row it names), one message per field, for a kind whose ``clean()`` reads nothing but
        its own values and its unit's variant: such a kind's ``clean()`` calls the same
        function, and a bulk write may check its entries without building them
        (``check_entry_values``). A kind that does not define it is checked as a model."""
        raise NotImplementedError(f"{cls.__name__} is checked as a model (full_clean).")

    @classmethod
    def checked_as_values(cls) -> bool:
        """Whether ``check_entry_values`` checks an entry of this kind as ``full_clean``
        does: the kind defines ``value_errors``, and ``full_clean`` would check nothing
        beyond the fields and ``clean()``: no unique field but the key and the ``uid`` (left
        to the unique index, ``Stamped.validate_unique``), no constraint but range checks
        (whose ``validate`` does nothing, ``RangeCheck``)."""
        return _checked_as_values(cls)


def _photo_path(instance: "AnodeReading", filename: str) -> str:
    return f"anodes/{instance.record.unit.serial}/{filename}"


class AnodeReading(Entry):
    record = models.ForeignKey(
        ServiceRecord, on_delete=models.CASCADE, related_name="anode_readings"
    )
    position = models.ForeignKey(AnodePosition, on_delete=models.PROTECT, related_name="readings")
    # Mass and remaining percent feed calc.anodes.WearSums.add (mass_kg >= 0); the upper
    # bound of the mass is the position's new net mass, checked in clean(); the field's own
    # bound is the heaviest new anode a position may declare (AnodePosition.new_net_mass_g).
    mass_g = models.FloatField(
        "net mass (g)",
        null=True,
        blank=True,
        validators=[finite, MinValueValidator(0.0), MaxValueValidator(100000.0)],
    )
    remaining_percent = models.FloatField(
        "estimated remaining (%)",
        null=True,
        blank=True,
        validators=[finite, MinValueValidator(0.0), MaxValueValidator(100.0)],
    )
    bond_resistance_ohm = models.FloatField(
        "bond resistance (Ω)",
        null=True,
        blank=True,
        validators=[finite, MinValueValidator(0.0), MaxValueValidator(1000.0)],
    )
    replaced = models.BooleanField(
        "replaced", default=False, help_text="A new anode was fitted after this reading."
    )
    photo = models.ImageField(upload_to=_photo_path, null=True, blank=True)
    note = models.CharField(max_length=200, blank=True)

    kind_label = "anode reading"
    bench_prefix = "anodes"
    bench_extra = 0
    amendable_fields = ("mass_g", "remaining_percent", "bond_resistance_ohm", "replaced", "note")
    list_select_related = ("position",)

    class Meta:
        ordering = ["position__name"]

    Meta.constraints = range_checks(locals())

    def __str__(self) -> str:
        return f"{self.position.name}: {self.describe()}"

    def history_line(self) -> str:
        return f"Anode {self.position.name}: {self.describe()}"

    def describe(self) -> str:
        parts = []
        if self.mass_g is not None:
            parts.append(quantity(self.mass_g, "g"))
        if self.remaining_percent is not None:
            parts.append(f"{quantity(self.remaining_percent, '%')} remaining")
        if self.bond_resistance_ohm is not None:
            parts.append(f"bond {quantity(self.bond_resistance_ohm, 'Ω')}")
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
        position: AnodePosition | None = None
        missing = False
        if self.position_id:
            try:
                position = self.position
            except AnodePosition.DoesNotExist:
                missing = True
        errors = anode_reading_errors(
            mass_g=self.mass_g,
            remaining_percent=self.remaining_percent,
            position=position,
            unit_variant_id=self.unit_variant_id(),
        )
        if missing:
            errors["position"] = f"No anode position has the id {self.position_id}."
        if errors:
            raise ValidationError(errors)

    @classmethod
    def value_errors(
        cls, values: Mapping[str, Any], *, unit_variant_id: int | None
    ) -> dict[str, str]:
        return anode_reading_errors(
            mass_g=values.get("mass_g"),
            remaining_percent=values.get("remaining_percent"),
            position=values.get("position"),
            unit_variant_id=unit_variant_id,
        )


def anode_reading_errors(
    *,
    mass_g: float | None,
    remaining_percent: float | None,
    position: AnodePosition | None,
    unit_variant_id: int | None,
) -> dict[str, str]:
    """An anode reading's rules across its fields, one message per field, on plain values
    (``position``: the position read from the database, None when none is given). The one
    copy of them: ``AnodeReading.clean()`` and the bulk check of plain values
    (``check_entry_values``) both call it."""
    errors: dict[str, str] = {}
    if mass_g is None and remaining_percent is None:
        errors["mass_g"] = "Give the net mass, the estimated remaining percentage, or both."
    if position is not None and mass_g is not None:
        new_mass = position.new_net_mass_g
        if mass_g > new_mass:
            errors["mass_g"] = (
                f"{mass_g:g} g is heavier than a new anode at this position "
                f"({new_mass:g} g); allowed 0 to {new_mass:g} g."
            )
    if position is not None and unit_variant_id and position.variant_id != unit_variant_id:
        errors["position"] = "This anode position belongs to another variant."
    return errors


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
        "cure date",
        validators=[*DATE_VALIDATORS],
        help_text="From the packet; the first day of the cure quarter if only that.",
    )
    lot = models.CharField(max_length=40, blank=True)
    reason = models.CharField(max_length=16, choices=Reason.choices)

    kind_label = "seal change"
    bench_prefix = "seals"
    bench_extra = 0
    amendable_fields = ("material", "cure_date", "lot", "reason")
    list_select_related = ("position",)

    class Meta:
        ordering = ["position__name"]

    def __str__(self) -> str:
        return f"{self.position.name}: {self.get_material_display()}, cured {self.cure_date}"

    def describe(self) -> str:
        return f"Seal {self.position.name} changed ({self.get_reason_display().lower()})"

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
        "nominal voltage (V)",
        validators=[finite, MinValueValidator(0.5), MaxValueValidator(200.0)],
    )
    # Inside calc.battery.PackSpec's cell_capacity_ah (0, 1000] Ah: the due engine divides
    # the pack's capacity by the variant's parallel strings (at least 1).
    capacity_ah = models.FloatField(
        "rated capacity (Ah)",
        validators=[finite, MinValueValidator(0.01), MaxValueValidator(1000.0)],
    )
    made_on = models.DateField("pack made on", validators=[*DATE_VALIDATORS])
    installed_on = models.DateField("installed on", validators=[*DATE_VALIDATORS])
    ocv_install_v = models.FloatField(
        "open-circuit volts at install",
        validators=[finite, MinValueValidator(0.0), MaxValueValidator(300.0)],
    )

    kind_label = "battery install"
    bench_prefix = "battery"
    bench_title = "Battery install"
    amendable_fields = (
        "pack_serial",
        "chemistry",
        "nominal_voltage_v",
        "capacity_ah",
        "made_on",
        "installed_on",
        "ocv_install_v",
    )
    dated_by = "installed_on"
    list_select_related = ("removal",)

    class Meta:
        ordering = ["-installed_on"]

    Meta.constraints = range_checks(locals())

    def __str__(self) -> str:
        return f"pack {self.pack_serial} ({self.get_chemistry_display()})"

    def describe(self) -> str:
        line = f"Battery {self.pack_serial} installed {self.installed_on:%Y-%m-%d}"
        if self.removed_on:
            line += f", removed {self.removed_on:%Y-%m-%d}"
        return line

    def _removal(self) -> "PackRemoval | None":
        if self.pk is None:
            return None
        try:
            return self.removal
        except PackRemoval.DoesNotExist:
            return None

    # A pack's removal is an entry of the visit that took it out (``PackRemoval``), never an
    # edit of the (possibly closed) record that fitted it; these read it back.
    @property
    def removed_on(self) -> dt.date | None:
        removal = self._removal()
        return removal.removed_on if removal is not None else None

    @property
    def ocv_removal_v(self) -> float | None:
        removal = self._removal()
        return removal.ocv_removal_v if removal is not None else None

    @property
    def is_fitted(self) -> bool:
        return self._removal() is None

    def clean(self) -> None:
        super().clean()
        errors: dict[str, str] = {}
        for field in ("made_on", "installed_on"):
            _not_future_date(getattr(self, field), field, errors)
        if self.made_on and self.installed_on and self.installed_on < self.made_on:
            errors["installed_on"] = "A pack cannot be installed before it was made."
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
    tested_on = models.DateField(validators=[*DATE_VALIDATORS])
    # Every number here lies inside calc.pressure.evaluate_hold's domain: pressures 0 to
    # 12000 dbar (calc.seawater.MAX_PRESSURE_DBAR), a hold above 0 min, water -2.5 to 40 °C.
    # The test pressure is compared with calc.pressure.required_test_pressure_dbar, which is
    # above 0 dbar. A 0 dbar test or a 0 min hold is no test: both start at 1.
    hold_ended_at = models.TimeField(
        "hold ended at",
        null=True,
        blank=True,
        help_text="Local time. A housing opening after this voids the test; without a time, "
        "any opening that day does.",
    )
    test_pressure_dbar = models.FloatField(
        "test pressure (dbar)",
        validators=[finite, MinValueValidator(1.0), MaxValueValidator(12000.0)],
    )
    hold_minutes = models.FloatField(
        "hold (min)", validators=[finite, MinValueValidator(1.0), MaxValueValidator(10080.0)]
    )
    start_pressure_dbar = models.FloatField(
        "start of hold (dbar)",
        validators=[finite, MinValueValidator(0.0), MaxValueValidator(12000.0)],
    )
    end_pressure_dbar = models.FloatField(
        "end of hold (dbar)",
        validators=[finite, MinValueValidator(0.0), MaxValueValidator(12000.0)],
    )
    water_temperature_start_c = models.FloatField(
        "water at start (°C)",
        validators=[finite, MinValueValidator(-2.0), MaxValueValidator(40.0)],
    )
    water_temperature_end_c = models.FloatField(
        "water at end (°C)", validators=[finite, MinValueValidator(-2.0), MaxValueValidator(40.0)]
    )
    ingress_found = models.BooleanField("ingress found", default=False)
    facility = models.CharField(max_length=80)

    kind_label = "pressure test"
    bench_prefix = "pressure"
    bench_title = "Pressure test"
    amendable_fields = (
        "tested_on",
        "hold_ended_at",
        "test_pressure_dbar",
        "hold_minutes",
        "start_pressure_dbar",
        "end_pressure_dbar",
        "water_temperature_start_c",
        "water_temperature_end_c",
        "ingress_found",
        "facility",
    )
    dated_by = "tested_on"

    class Meta:
        ordering = ["-tested_on"]

    Meta.constraints = range_checks(locals())

    def __str__(self) -> str:
        return f"pressure test {self.test_pressure_dbar:g} dbar on {self.tested_on}"

    def describe(self) -> str:
        return (
            f"Pressure test at {quantity(self.test_pressure_dbar, 'dbar')}: "
            f"{quantity(self.start_pressure_dbar, 'dbar')} to "
            f"{quantity(self.end_pressure_dbar, 'dbar')} over "
            f"{quantity(self.hold_minutes, 'min')}, water "
            f"{quantity(self.water_temperature_start_c, '°C')} to "
            f"{quantity(self.water_temperature_end_c, '°C')}, ingress "
            f"{yes_no(self.ingress_found).lower()}"
        )

    def warning(self) -> str:
        return "ingress found" if self.ingress_found else ""

    def clean(self) -> None:
        super().clean()
        errors: dict[str, str] = {}
        _not_future_date(self.tested_on, "tested_on", errors)
        test, start, end = self.test_pressure_dbar, self.start_pressure_dbar, self.end_pressure_dbar
        # Only compare numbers the field validators accept; they report the rest.
        if not all(isinstance(v, int | float) and math.isfinite(v) for v in (test, start, end)):
            if errors:
                raise ValidationError(errors)
            return
        tolerance_pct = settings.HOLDFAST["PRESSURE_GAUGE_TOLERANCE_PERCENT"]
        tolerance = tolerance_pct / 100.0
        lo, hi = test * (1.0 - tolerance), test * (1.0 + tolerance)
        if not lo <= start <= hi:
            errors["start_pressure_dbar"] = (
                f"The hold must start at the test pressure {test:g} dbar within the gauge "
                f"tolerance of ±{tolerance_pct:g} % ({lo:.1f} to {hi:.1f} dbar); "
                f"{start:g} dbar is outside it. Check the gauge reading and the test pressure."
            )
        if end > start * (1.0 + tolerance):
            errors["end_pressure_dbar"] = (
                f"The pressure rose from {start:g} to {end:g} dbar during the hold, more than "
                f"the gauge tolerance of ±{tolerance_pct:g} %. A rise means a gauge or "
                "temperature effect or a leak in the rig: repeat the test."
            )
        record = self.owning_record()
        if record is not None and record.unit_id:
            rating_m = record.unit.variant.depth_rating_m
            factor = settings.HOLDFAST["PRESSURE_TEST_MAX_OVER_RATING"]
            try:
                rated = pressure_dbar(rating_m, settings.HOLDFAST["DEFAULT_LATITUDE_DEG"])
            except ValueError:
                rated = None  # a rating outside the ocean: the variant's own check says so
            if rated is not None and test > factor * rated:
                errors["test_pressure_dbar"] = (
                    f"{test:g} dbar is more than {factor:g} × the {rated:.0f} dbar of this "
                    f"variant's {rating_m:g} m rating (at most {factor * rated:.0f} dbar): the "
                    "housing is not rated for it. Check the value and the unit."
                )
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
    tested_on = models.DateField(validators=[*DATE_VALIDATORS])
    kind = models.CharField(max_length=8, choices=Kind.choices)
    # Physical ranges for a transponder's release (common practice, no published source):
    # a load test hangs at most a few tonnes on the hook (5000 kg); a motorised release opens
    # in seconds, so 0.1 s is the stopwatch's floor and 10 min means it never ran; a small
    # DC gear motor draws tens of mA to a few A, so 20 A can only be a meter error.
    load_kg = models.FloatField(
        "load (kg)",
        null=True,
        blank=True,
        validators=[finite, MinValueValidator(0.0), MaxValueValidator(5000.0)],
    )
    seconds_to_release = models.FloatField(
        "time to release (s)",
        validators=[finite, MinValueValidator(0.1), MaxValueValidator(600.0)],
    )
    motor_current_a = models.FloatField(
        "peak motor current (A)",
        validators=[finite, MinValueValidator(0.01), MaxValueValidator(20.0)],
    )
    limit_switch_ok = models.BooleanField("limit switch ok", default=False)
    acoustic_command_ok = models.BooleanField("acoustic command ok", default=False)

    kind_label = "release test"
    bench_prefix = "release"
    bench_title = "Release test"
    amendable_fields = (
        "tested_on",
        "kind",
        "load_kg",
        "seconds_to_release",
        "motor_current_a",
        "limit_switch_ok",
        "acoustic_command_ok",
    )
    dated_by = "tested_on"

    class Meta:
        ordering = ["-tested_on"]

    Meta.constraints = range_checks(locals())

    def __str__(self) -> str:
        return f"{self.get_kind_display()} release test on {self.tested_on}"

    def describe(self) -> str:
        load = f" under {quantity(self.load_kg, 'kg')}" if self.load_kg else ""
        return (
            f"{self.get_kind_display()} release test{load}: released in "
            f"{quantity(self.seconds_to_release, 's')} at "
            f"{quantity(self.motor_current_a, 'A')}, limit switch "
            f"{yes_no(self.limit_switch_ok).lower()}, acoustic command "
            f"{yes_no(self.acoustic_command_ok).lower()}"
        )

    @classmethod
    def fits(cls, variant: Variant) -> bool:
        return variant.release_fitted

    def clean(self) -> None:
        super().clean()
        errors: dict[str, str] = {}
        _not_future_date(self.tested_on, "tested_on", errors)
        record = self.owning_record()
        if record is not None and record.unit_id and not self.fits(record.unit.variant):
            errors["kind"] = (
                f"{record.unit.serial} is a {record.unit.variant.name}, which has no release "
                "fitted: there is no release to test."
            )
        if self.kind == self.Kind.LOAD and not self.load_kg:
            errors["load_kg"] = "A test under load needs the load in kg."
        if errors:
            raise ValidationError(errors)


# What a sensor check may read, per sensor, in its unit: °C, dbar (calc.seawater's
# MAX_PRESSURE_DBAR) and degrees of tilt.
SENSOR_RANGES: dict[str, tuple[float, float]] = {
    "temperature": (-5.0, 50.0),
    "pressure": (0.0, 12000.0),
    "tilt": (-90.0, 90.0),
}


# The unit each sensor's readings are in.
SENSOR_UNITS: dict[str, str] = {"temperature": "°C", "pressure": "dbar", "tilt": "°"}


def _sensor_range_check() -> models.CheckConstraint:
    """Both values of a sensor check inside their sensor's range (NaN is above every number in
    PostgreSQL and NULL in SQLite, so both refuse it)."""
    per_sensor = [
        Q(
            sensor=sensor,
            reference_value__gte=lo,
            reference_value__lte=hi,
            unit_reading__gte=lo,
            unit_reading__lte=hi,
        )
        for sensor, (lo, hi) in SENSOR_RANGES.items()
    ]
    return models.CheckConstraint(
        condition=functools.reduce(operator.or_, per_sensor),
        name="sensorcheck_values_in_sensor_range",
        violation_error_message="The values lie outside the range of this sensor.",
    )


class SensorCheck(Entry):
    class Sensor(models.TextChoices):
        TEMPERATURE = "temperature", "Temperature (°C)"
        PRESSURE = "pressure", "Pressure (dbar)"
        TILT = "tilt", "Tilt (°)"

    record = models.ForeignKey(
        ServiceRecord, on_delete=models.CASCADE, related_name="sensor_checks"
    )
    checked_on = models.DateField(validators=[*DATE_VALIDATORS])
    sensor = models.CharField(max_length=12, choices=Sensor.choices)
    # Ranges per sensor (SENSOR_RANGES) in clean() and in a CHECK; a temperature reference
    # feeds calc.rtd.tolerance_c, whose narrowest wire-wound class (AA) covers -50 to 250 °C.
    reference_value = models.FloatField(
        validators=[finite],
        help_text="Reference instrument's value in the sensor's unit (°C, dbar or degrees).",
    )
    unit_reading = models.FloatField(
        validators=[finite], help_text="What the unit reported, same unit."
    )
    # Inside calc.rtd.temperature_c's domain for a Pt100: R0 x CVD(-200 °C) = 18.52 ohm to
    # R0 x CVD(850 °C) = 390.48 ohm (IEC 60751).
    raw_resistance_ohm = models.FloatField(
        "raw resistance (Ω)",
        null=True,
        blank=True,
        validators=[finite, MinValueValidator(20.0), MaxValueValidator(390.0)],
        help_text="Temperature only: the PT100 element's resistance, read at the connector.",
    )

    kind_label = "sensor check"
    bench_prefix = "sensors"
    bench_extra = 2
    amendable_fields = (
        "checked_on",
        "sensor",
        "reference_value",
        "unit_reading",
        "raw_resistance_ohm",
    )
    dated_by = "checked_on"

    class Meta:
        ordering = ["-checked_on", "sensor"]

    Meta.constraints = [*range_checks(locals()), _sensor_range_check()]

    def __str__(self) -> str:
        return f"{self.get_sensor_display()} check on {self.checked_on}"

    def describe(self) -> str:
        unit = self.unit_for("unit_reading")
        return (
            f"{self.get_sensor_display()} check: reads {quantity(self.unit_reading, unit)} "
            f"against {quantity(self.reference_value, unit)} "
            f"(error {signed(self.error, unit)})"
        )

    def unit_for(self, field_name: str) -> str:
        """The unit of one of this check's numbers: the sensor's for its two readings."""
        if field_name == "raw_resistance_ohm":
            return "Ω"
        return SENSOR_UNITS.get(self.sensor, "")

    @property
    def error(self) -> float:
        return self.unit_reading - self.reference_value

    def clean(self) -> None:
        super().clean()
        errors: dict[str, str] = {}
        _not_future_date(self.checked_on, "checked_on", errors)
        if self.raw_resistance_ohm is not None and self.sensor != self.Sensor.TEMPERATURE:
            errors["raw_resistance_ohm"] = "Raw resistance applies to temperature checks only."
        if self.sensor in SENSOR_RANGES:
            lo, hi = SENSOR_RANGES[self.sensor]
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
    opened_at = models.DateTimeField("opened", validators=[*DATE_VALIDATORS])
    closed_at = models.DateTimeField("closed", null=True, blank=True, validators=[*DATE_VALIDATORS])
    vented_before_opening = models.BooleanField("vented before opening", default=False)
    internal_pressure_found = models.BooleanField("internal pressure or gas found", default=False)
    reason = models.CharField(max_length=200)

    kind_label = "housing opening"
    bench_prefix = "openings"
    amendable_fields = (
        "opened_at",
        "closed_at",
        "vented_before_opening",
        "internal_pressure_found",
        "reason",
    )
    dated_by = "opened_at"

    class Meta:
        ordering = ["-opened_at"]

    def __str__(self) -> str:
        return f"housing opened {self.opened_at:%Y-%m-%d %H:%M}"

    def describe(self) -> str:
        return f"Housing opened: {self.reason}"

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


def amendable_field(
    target: models.Model | type[models.Model], field_name: str
) -> models.Field[Any, Any]:
    """The model field behind an amendable field name (``Entry.amendable_fields``, the
    record's summary): always a concrete field, which ``get_field`` cannot promise in
    general (it also returns relations)."""
    return cast("models.Field[Any, Any]", target._meta.get_field(field_name))


class PackRemoval(Entry):
    """A battery pack taken out during this visit. The pack's install stays as it was written in
    its own (often closed) record; the fitted pack is the one no removal points at."""

    record = models.ForeignKey(
        ServiceRecord, on_delete=models.CASCADE, related_name="pack_removals"
    )
    install = models.OneToOneField(
        BatteryInstall,
        on_delete=models.CASCADE,
        related_name="removal",
        verbose_name="pack",
        help_text="The pack taken out (fitted at this or an earlier visit).",
    )
    removed_on = models.DateField("removed on", validators=[*DATE_VALIDATORS])
    ocv_removal_v = models.FloatField(
        "open-circuit volts at removal",
        null=True,
        blank=True,
        validators=[finite, MinValueValidator(0.0), MaxValueValidator(300.0)],
    )

    kind_label = "pack removal"
    bench_prefix = "packremovals"
    bench_extra = 0
    bench_title = "Pack removed"
    amendable_fields = ("removed_on", "ocv_removal_v")
    list_select_related = ("install",)
    dated_by = "removed_on"

    class Meta:
        ordering = ["-removed_on"]

    Meta.constraints = range_checks(locals())

    def __str__(self) -> str:
        line = f"pack {self.install.pack_serial} removed on {self.removed_on}"
        if self.ocv_removal_v is not None:
            line += f" at {self.ocv_removal_v:g} V"
        return line

    def describe(self) -> str:
        return f"Battery {self.install.pack_serial} removed {self.removed_on:%Y-%m-%d}"

    def clean(self) -> None:
        super().clean()
        errors: dict[str, str] = {}
        _not_future_date(self.removed_on, "removed_on", errors)
        if self.install_id and self.removed_on and self.removed_on < self.install.installed_on:
            errors["removed_on"] = (
                "Removal must be on or after the install date. Pack "
                f"{self.install.pack_serial} went in on {self.install.installed_on}."
            )
        record = self.owning_record()
        if self.install_id and record is not None and record.unit_id:
            if self.install.unit_id != record.unit_id:
                errors["install"] = "This pack was fitted to another unit."
        if errors:
            raise ValidationError(errors)


@functools.cache
def _checked_as_values(kind: type[Entry]) -> bool:
    meta = kind._meta
    return (
        "value_errors" in vars(kind)
        and not meta.unique_together
        and all(isinstance(c, RangeCheck) for c in meta.constraints)
        and all(f.primary_key or f.name == "uid" for f in meta.fields if f.unique)
        and not any(
            getattr(f, f"unique_for_{period}", None)
            for f in meta.fields
            for period in ("date", "month", "year")
        )
    )


@dataclass(slots=True)
class EntryValues:
    """A new entry of ``kind`` held as plain values by field name (a key as the row it names,
    read from the database; the record is given when it is written), for a bulk write that
    checks and inserts many without a model instance each (``check_entry_values``,
    ``fleet/services/bulk.py``'s ``insert_rows``). ``pk`` is set once it is written."""

    kind: type[Entry]
    values: dict[str, Any]
    pk: int | None = None

    def get(self, name: str) -> Any:
        return self.values.get(name)

    def instance(self) -> Entry:
        """The same entry as a model instance (unsaved)."""
        return self.kind(**self.values)


def check_entry_values(
    kind: type[Entry], values: dict[str, Any], *, unit_variant_id: int | None
) -> None:
    """``full_clean`` of an entry of ``kind`` (``checked_as_values``) holding ``values``,
    without building it: raises the ``ValidationError`` it would raise, message for message.

    A field not in ``values`` takes its default there, as a new instance would (a fresh
    ``uid``). Then, as ``clean_fields``, each field but a key is put through its own
    ``clean`` (its validators: finite, in range) unless blank and allowed blank, the cleaned
    value kept; the keys are rows read from the database, which ``full_clean`` leaves to the
    foreign key constraint too (``Stamped.clean_fields``). Then the kind's ``value_errors``,
    the rule its ``clean()`` applies, with every field's value."""
    errors: dict[str, list[ValidationError]] = {}
    for f in kind._meta.fields:
        if f.name not in values and not f.primary_key:
            values[f.name] = f.get_default()
        if f.is_relation or f.primary_key or f.generated:
            continue
        raw = values[f.name]
        if f.blank and raw in f.empty_values:
            continue
        try:
            values[f.name] = f.clean(raw, None)
        except ValidationError as exc:
            errors[f.name] = exc.error_list
    rule = kind.value_errors(values, unit_variant_id=unit_variant_id)
    if rule:
        errors = ValidationError(rule).update_error_dict(errors)
    if errors:
        raise ValidationError(errors)


def entry_kinds() -> tuple[type[Entry], ...]:
    """Every entry kind, in the order the pages list them: the concrete ``Entry`` subclasses of
    the installed apps, in app order and then in the order they are defined. Django's app
    registry is the registration: defining the model is enough, no list to extend."""
    return tuple(model for model in apps.get_models() if issubclass(model, Entry))
