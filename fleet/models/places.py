"""Places where units are kept (workshop, store, vessel) and sites where they are deployed."""

from django.core.validators import MaxLengthValidator, MaxValueValidator, MinValueValidator
from django.db import models
from django.urls import reverse

from .validators import SUMMARY_MAX_CHARS, finite, range_checks


class Place(models.Model):
    class Kind(models.TextChoices):
        WORKSHOP = "workshop", "Workshop"
        STORE = "store", "Store"
        VESSEL = "vessel", "Vessel"

    name = models.CharField(max_length=80, unique=True)
    kind = models.CharField(max_length=16, choices=Kind.choices)

    class Meta:
        ordering = ["name"]

    def __str__(self) -> str:
        return self.name


class Site(models.Model):
    """A deployment site; its depth, temperature and salinity feed the seawater checks."""

    name = models.CharField(max_length=80, unique=True)
    # Every number lies inside calc.seawater's guards (pressure_dbar, density_kg_m3): latitude
    # -90..90 °, longitude -180..360 °, depth 0..11000 m, temperature -2.5..40 °C, practical
    # salinity 0..42. The bottom temperature also feeds calc.battery.temperature_factor, whose
    # narrowest chemistry curve (alkaline, Li/MnO2) starts at -20 °C, and the depth
    # calc.anodes.design_current_density_a_m2 (0..11000 m). A site is under at least 1 m of water.
    latitude_deg = models.FloatField(
        "latitude (°)", validators=[finite, MinValueValidator(-90.0), MaxValueValidator(90.0)]
    )
    longitude_deg = models.FloatField(
        "longitude (°)",
        validators=[finite, MinValueValidator(-180.0), MaxValueValidator(180.0)],
    )
    water_depth_m = models.FloatField(
        "water depth (m)",
        validators=[finite, MinValueValidator(1.0), MaxValueValidator(11000.0)],
    )
    bottom_temperature_c = models.FloatField(
        "bottom temperature (°C)",
        validators=[finite, MinValueValidator(-2.5), MaxValueValidator(40.0)],
        help_text="In-situ temperature at the seabed, −2.5 to 40 °C.",
    )
    practical_salinity = models.FloatField(
        "practical salinity",
        default=35.0,
        validators=[finite, MinValueValidator(0.0), MaxValueValidator(42.0)],
        help_text="PSS-78, 0 to 42.",
    )
    surface_temperature_c = models.FloatField(
        "surface water temperature (°C)",
        null=True,
        blank=True,
        # Inside calc.buoyancy.least_favourable_density's surface_temperature_c domain.
        validators=[finite, MinValueValidator(-2.0), MaxValueValidator(40.0)],
        help_text="The warmest surface water expected; empty: the workshop's default. "
        "Recovery buoyancy is judged where the water is least dense.",
    )
    notes = models.TextField(
        blank=True,
        max_length=SUMMARY_MAX_CHARS,
        validators=[MaxLengthValidator(SUMMARY_MAX_CHARS)],
    )

    class Meta:
        ordering = ["name"]

    Meta.constraints = range_checks(locals())

    def __str__(self) -> str:
        return self.name

    def get_absolute_url(self) -> str:
        return reverse("site-detail", args=[self.pk])
