"""Variants: the designs units are built to, with their anode and seal positions.

A variant carries everything the due engine needs that is the same for every unit built to it:
depth rating, battery arrangement, duty currents, and the maintenance intervals the operator
sets. Intervals left empty fall back to the defaults in ``settings.HOLDFAST``.
"""

from django.conf import settings
from django.core.exceptions import ValidationError
from django.core.validators import MaxLengthValidator, MaxValueValidator, MinValueValidator
from django.db import models

from fleet.calc.seals import AS568
from fleet.calc.seawater import MAX_PRESSURE_DBAR, pressure_dbar

from .validators import SUMMARY_MAX_CHARS, finite, range_checks


class HousingAlloy(models.TextChoices):
    ALUMINIUM_6061 = "al6061", "Aluminium 6061-T6, hard anodised"
    ALUMINIUM_7075 = "al7075", "Aluminium 7075-T6, hard anodised"
    DUPLEX = "duplex", "Duplex stainless steel"
    SUPER_DUPLEX = "super_duplex", "Super duplex stainless steel"
    TITANIUM = "ti_gr5", "Titanium grade 5"
    ACETAL = "acetal", "Acetal (POM) with metal fittings"


class AnodeAlloy(models.TextChoices):
    AL_ZN_IN = "al_zn_in", "Al-Zn-In"
    ZINC = "zn", "Zinc"
    MAGNESIUM = "mg", "Magnesium"

    @property
    def calc_name(self) -> str:
        """The alloy's name in ``fleet.calc.anodes`` (its ``alloy()`` lookup), e.g. "Al-Zn-In"."""
        return _CALC_ALLOY_NAMES[self.value]


# The one mapping from a stored alloy code to the calc core's alloy name.
_CALC_ALLOY_NAMES: dict[str, str] = {
    AnodeAlloy.AL_ZN_IN: "Al-Zn-In",
    AnodeAlloy.ZINC: "Zn",
    AnodeAlloy.MAGNESIUM: "Mg",
}


class Elastomer(models.TextChoices):
    NBR = "NBR", "NBR (nitrile)"
    HNBR = "HNBR", "HNBR (hydrogenated nitrile)"
    FKM = "FKM", "FKM (fluorocarbon)"
    EPDM = "EPDM", "EPDM"
    VMQ = "VMQ", "VMQ (silicone)"
    CR = "CR", "CR (chloroprene)"


class GlandKind(models.TextChoices):
    RADIAL = "radial", "Static radial (ring on the groove bottom, squeezed by the bore)"
    FACE = "face", "Static face (axial)"


_GLAND_FIELDS = ("bore_diameter_mm", "groove_diameter_mm", "groove_depth_mm", "groove_width_mm")
_GLAND_FIELDS_BY_KIND = {
    GlandKind.RADIAL: {"bore_diameter_mm", "groove_diameter_mm", "groove_width_mm"},
    GlandKind.FACE: {"groove_depth_mm", "groove_width_mm"},
}


class Chemistry(models.TextChoices):
    ALKALINE = "alkaline", "Alkaline Zn/MnO₂"
    LI_SOCL2 = "li_socl2", "Lithium thionyl chloride Li/SOCl₂"
    LI_MNO2 = "li_mno2", "Lithium manganese dioxide Li/MnO₂"


def _validate_chemistry_list(value: object) -> None:
    if not isinstance(value, list) or not value:
        raise ValidationError("List at least one battery chemistry.", code="empty")
    allowed = set(Chemistry.values)
    unknown = [item for item in value if item not in allowed]
    if unknown:
        raise ValidationError(
            "Unknown chemistry %(unknown)s; allowed: %(allowed)s.",
            params={"unknown": ", ".join(map(str, unknown)), "allowed": ", ".join(sorted(allowed))},
            code="unknown_chemistry",
        )


class Variant(models.Model):
    name = models.CharField(max_length=80, unique=True)
    description = models.TextField(
        blank=True,
        max_length=SUMMARY_MAX_CHARS,
        validators=[MaxLengthValidator(SUMMARY_MAX_CHARS)],
    )
    # Inside calc.seawater.pressure_dbar (0..11000 m) as fed to
    # calc.pressure.required_test_pressure_dbar; clean() keeps the proof pressure inside
    # calc.pressure.evaluate_hold's 12000 dbar.
    depth_rating_m = models.FloatField(
        "depth rating (m)", validators=[finite, MinValueValidator(1.0), MaxValueValidator(11000.0)]
    )
    housing_alloy = models.CharField(max_length=16, choices=HousingAlloy.choices)
    release_fitted = models.BooleanField(default=False)
    has_temperature_sensor = models.BooleanField("temperature sensor", default=True)
    has_pressure_sensor = models.BooleanField("pressure (depth) sensor", default=True)
    has_tilt_sensor = models.BooleanField("tilt sensor", default=False)

    # Battery arrangement
    allowed_chemistries = models.JSONField(
        default=list,
        validators=[_validate_chemistry_list],
        help_text='Chemistries the battery bay accepts, e.g. ["alkaline", "li_socl2"].',
    )
    cells_in_series = models.PositiveSmallIntegerField(
        validators=[MinValueValidator(1), MaxValueValidator(60)]
    )
    parallel_strings = models.PositiveSmallIntegerField(
        default=1, validators=[MinValueValidator(1), MaxValueValidator(20)]
    )

    # Duty: calc.battery.charge_used_ah takes listen_current_a in 0..10 A and
    # charge_per_release_as from 0 up.
    listen_current_a = models.FloatField(
        "listen-mode current (A)",
        validators=[finite, MinValueValidator(0.0), MaxValueValidator(1.0)],
        help_text="Quiescent current while listening, in amperes (0.0002 = 200 µA).",
    )
    release_charge_as = models.FloatField(
        "charge per release operation (A·s)",
        default=0.0,
        validators=[finite, MinValueValidator(0.0), MaxValueValidator(100000.0)],
    )

    # Recovery buoyancy (in air mass and displaced volume with flotation collar fitted);
    # calc.buoyancy.BuoyancyPart takes both from 0 up.
    mass_in_air_kg = models.FloatField(
        "mass in air (kg)",
        null=True,
        blank=True,
        validators=[finite, MinValueValidator(0.0), MaxValueValidator(5000.0)],
    )
    displaced_volume_m3 = models.FloatField(
        "displaced volume (m³)",
        null=True,
        blank=True,
        validators=[finite, MinValueValidator(0.0), MaxValueValidator(10.0)],
    )

    # Maintenance intervals and limits (empty: settings default)
    pressure_test_valid_months = models.PositiveSmallIntegerField(
        null=True, blank=True, validators=[MinValueValidator(1), MaxValueValidator(120)]
    )
    # calc.pressure.required_test_pressure_dbar takes a proof factor in 1..3.
    proof_factor = models.FloatField(
        null=True,
        blank=True,
        validators=[finite, MinValueValidator(1.0), MaxValueValidator(3.0)],
        help_text="Test pressure as a multiple of the site pressure (workshop practice).",
    )
    release_test_valid_days = models.PositiveSmallIntegerField(
        null=True, blank=True, validators=[MinValueValidator(1), MaxValueValidator(3650)]
    )
    sensor_check_interval_months = models.PositiveSmallIntegerField(
        null=True, blank=True, validators=[MinValueValidator(1), MaxValueValidator(120)]
    )
    bond_resistance_limit_ohm = models.FloatField(
        "bond resistance limit (Ω)",
        null=True,
        blank=True,
        validators=[finite, MinValueValidator(0.0), MaxValueValidator(100.0)],
    )
    # Acceptance limits within the ranges a release test can be entered with (ReleaseTest).
    release_max_seconds = models.FloatField(
        "release acceptance: longest time to release (s)",
        null=True,
        blank=True,
        validators=[finite, MinValueValidator(0.1), MaxValueValidator(600.0)],
    )
    release_max_motor_current_a = models.FloatField(
        "release acceptance: highest motor current (A)",
        null=True,
        blank=True,
        validators=[finite, MinValueValidator(0.01), MaxValueValidator(20.0)],
    )
    battery_reserve_fraction = models.FloatField(
        "battery reserve (fraction of usable charge)",
        null=True,
        blank=True,
        validators=[finite, MinValueValidator(0.0), MaxValueValidator(0.9)],
    )

    class Meta:
        ordering = ["name"]

    Meta.constraints = range_checks(locals())

    def __str__(self) -> str:
        return self.name

    def clean(self) -> None:
        super().clean()
        errors: dict[str, str] = {}
        if (self.mass_in_air_kg is None) != (self.displaced_volume_m3 is None):
            errors["displaced_volume_m3"] = (
                "Give both mass in air and displaced volume, or neither."
            )
        holdfast = settings.HOLDFAST
        factor = holdfast["PROOF_FACTOR"] if self.proof_factor is None else self.proof_factor
        top = holdfast["PRESSURE_TEST_MAX_OVER_RATING"]
        if self.proof_factor is not None and self.proof_factor > top:
            errors["proof_factor"] = (
                f"A proof factor above {top:g} would ask for tests that are refused at entry "
                f"(test pressure at most {top:g} × the rating)."
            )
        try:
            # At the pole, where a depth gives the highest pressure: the due engine takes the
            # site's latitude, and calc.pressure.evaluate_hold refuses a required pressure
            # above calc.seawater.MAX_PRESSURE_DBAR.
            proof = factor * pressure_dbar(self.depth_rating_m, 90.0)
        except (TypeError, ValueError):
            proof = None  # the field validators report the rating itself
        if proof is not None and proof > MAX_PRESSURE_DBAR:
            errors["depth_rating_m"] = (
                f"A proof test at {factor:g} × this rating needs {proof:.0f} dbar, above the "
                f"{MAX_PRESSURE_DBAR:.0f} dbar the pressure-test checks cover; lower the rating "
                "or the proof factor."
            )
        if errors:
            raise ValidationError(errors)


class ReplyChargeStep(models.Model):
    """Charge drawn from the pack by one reply at one transmit power step."""

    variant = models.ForeignKey(Variant, on_delete=models.CASCADE, related_name="reply_steps")
    step = models.PositiveSmallIntegerField(validators=[MinValueValidator(1), MaxValueValidator(9)])
    # calc.battery.charge_used_ah takes the charge per reply from 0 up; the source level lies
    # inside calc.ranging.reply_margin_db's 0..250 dB.
    charge_per_reply_as = models.FloatField(
        "charge per reply (A·s)",
        validators=[finite, MinValueValidator(0.0), MaxValueValidator(100.0)],
    )
    source_level_db = models.FloatField(
        "source level (dB re 1 µPa at 1 m)",
        null=True,
        blank=True,
        validators=[finite, MinValueValidator(100.0), MaxValueValidator(230.0)],
    )

    class Meta:
        ordering = ["variant", "step"]
        constraints = [
            models.UniqueConstraint(fields=["variant", "step"], name="uniq_variant_power_step")
        ]

    def __str__(self) -> str:
        return f"{self.variant} step {self.step}"


class AnodePosition(models.Model):
    """One separately bonded metal part's anode on a variant."""

    variant = models.ForeignKey(Variant, on_delete=models.CASCADE, related_name="anode_positions")
    name = models.CharField(max_length=60)
    alloy = models.CharField(max_length=12, choices=AnodeAlloy.choices, default=AnodeAlloy.AL_ZN_IN)
    # The new mass and replace-at percent set the wear threshold for
    # calc.anodes.WearFit.days_to_mass (mass_kg from 0 up); utilisation factor in (0, 1] as
    # calc.anodes.replacement_mass_kg takes it; design current from 0 up for
    # calc.anodes.design_wear_rate_kg_per_day.
    new_net_mass_g = models.FloatField(
        "new net mass (g)", validators=[finite, MinValueValidator(0.1), MaxValueValidator(100000.0)]
    )
    utilisation_factor = models.FloatField(
        default=0.80,
        validators=[finite, MinValueValidator(0.01), MaxValueValidator(1.0)],
        help_text="DNV-RP-B401 Table 10-8; 0.80 for bracelets and short flush-mounted anodes.",
    )
    replace_at_remaining_percent = models.FloatField(
        "replace at remaining (%)",
        default=50.0,
        validators=[finite, MinValueValidator(0.0), MaxValueValidator(100.0)],
    )
    design_current_a = models.FloatField(
        "design mean current (A)",
        null=True,
        blank=True,
        validators=[finite, MinValueValidator(0.0), MaxValueValidator(100.0)],
        help_text="Mean protection current this anode is sized for; sets the design wear rate.",
    )

    class Meta:
        ordering = ["variant", "name"]
        constraints = [
            models.UniqueConstraint(fields=["variant", "name"], name="uniq_anode_position_name")
        ]

    def __str__(self) -> str:
        return f"{self.name} ({self.get_alloy_display()})"

    @property
    def calc_alloy_name(self) -> str:
        """This position's alloy as ``fleet.calc.anodes.alloy()`` names it, e.g. "Al-Zn-In"."""
        return AnodeAlloy(self.alloy).calc_name


class SealPosition(models.Model):
    """An O-ring seal on a variant, by AS568 dash number or ISO 3601 inside diameter × section."""

    variant = models.ForeignKey(Variant, on_delete=models.CASCADE, related_name="seal_positions")
    name = models.CharField(max_length=60)
    as568_dash = models.CharField(
        "AS568 dash number",
        max_length=4,
        blank=True,
        help_text="For example 240 for AS568-240. Leave empty for a metric ring.",
    )
    iso_inner_diameter_mm = models.FloatField(
        "ISO 3601 inside diameter d1 (mm)",
        null=True,
        blank=True,
        validators=[finite, MinValueValidator(0.5), MaxValueValidator(2000.0)],
    )
    iso_cross_section_mm = models.FloatField(
        "ISO 3601 cross-section d2 (mm)",
        null=True,
        blank=True,
        validators=[finite, MinValueValidator(0.5), MaxValueValidator(20.0)],
    )
    material = models.CharField(max_length=8, choices=Elastomer.choices, default=Elastomer.NBR)
    count = models.PositiveSmallIntegerField(
        default=1, validators=[MinValueValidator(1), MaxValueValidator(50)]
    )
    interval_months = models.PositiveSmallIntegerField(
        "replace every (months)", validators=[MinValueValidator(1), MaxValueValidator(240)]
    )
    max_openings = models.PositiveSmallIntegerField(
        "replace after openings",
        validators=[MinValueValidator(1), MaxValueValidator(100)],
        help_text="Housing openings a fitted ring may see before it is replaced.",
    )
    # The gland as drawn, checked against the AS568 ring by calc.seals (squeeze, stretch, fill).
    gland_kind = models.CharField(
        "gland", max_length=8, choices=GlandKind.choices, blank=True, default=""
    )
    bore_diameter_mm = models.FloatField(
        "bore diameter (mm)",
        null=True,
        blank=True,
        validators=[finite, MinValueValidator(1.0), MaxValueValidator(2000.0)],
        help_text="Radial gland: the bore the ring is squeezed against.",
    )
    groove_diameter_mm = models.FloatField(
        "groove diameter (mm)",
        null=True,
        blank=True,
        validators=[finite, MinValueValidator(0.5), MaxValueValidator(2000.0)],
        help_text="Radial gland: the groove bottom the ring is stretched over.",
    )
    groove_depth_mm = models.FloatField(
        "groove depth (mm)",
        null=True,
        blank=True,
        validators=[finite, MinValueValidator(0.1), MaxValueValidator(20.0)],
        help_text="Face gland: the groove depth.",
    )
    groove_width_mm = models.FloatField(
        "groove width (mm)",
        null=True,
        blank=True,
        validators=[finite, MinValueValidator(0.1), MaxValueValidator(50.0)],
    )

    class Meta:
        ordering = ["variant", "name"]
        constraints = [
            models.UniqueConstraint(fields=["variant", "name"], name="uniq_seal_position_name")
        ]

    Meta.constraints = [*Meta.constraints, *range_checks(locals())]

    def __str__(self) -> str:
        return f"{self.name} ({self.size_label})"

    @property
    def size_label(self) -> str:
        if self.as568_dash:
            return f"AS568-{self.as568_dash}"
        d1, d2 = self.iso_inner_diameter_mm, self.iso_cross_section_mm
        if d1 is None or d2 is None:
            # Shown while the admin reports the missing size (clean() says what to give).
            return "size not given"
        return f"{d1:g} × {d2:g} mm"

    def clean(self) -> None:
        super().clean()
        metric = self.iso_inner_diameter_mm is not None or self.iso_cross_section_mm is not None
        if self.as568_dash:
            self.as568_dash = self.as568_dash.strip().removeprefix("AS568").lstrip("-")
            if not self.as568_dash.isdigit():
                raise ValidationError({"as568_dash": "Give the dash number as digits, e.g. 240."})
            if metric:
                raise ValidationError(
                    {"as568_dash": "Give either an AS568 dash number or ISO 3601 sizes, not both."}
                )
        elif not (self.iso_inner_diameter_mm and self.iso_cross_section_mm):
            raise ValidationError(
                {"as568_dash": "Give an AS568 dash number, or both ISO 3601 d1 and d2."}
            )
        self._clean_gland()

    def _clean_gland(self) -> None:
        """The gland's dimensions are complete for its kind, and only its kind's are given.
        Whether they suit the ring (squeeze, stretch, fill) is ``fleet.due.glands``' call."""
        given = {name for name in _GLAND_FIELDS if getattr(self, name) is not None}
        if not self.gland_kind:
            if given:
                raise ValidationError({"gland_kind": "Say which kind of gland these sizes are."})
            return
        needed = _GLAND_FIELDS_BY_KIND[GlandKind(self.gland_kind)]
        errors = {name: "Give this for the gland check." for name in needed - given}
        errors |= {
            name: f"Not used by a {self.gland_kind} gland; leave it empty."
            for name in given - needed
        }
        if not self.as568_dash:
            errors["gland_kind"] = "The gland check works from an AS568 size; give its dash number."
        elif int(self.as568_dash) not in AS568:
            errors["as568_dash"] = f"AS568-{self.as568_dash} is not a size in SAE AS568 Table 1."
        bore, groove = self.bore_diameter_mm, self.groove_diameter_mm
        if bore is not None and groove is not None and groove >= bore:
            errors["groove_diameter_mm"] = "The groove diameter must be smaller than the bore."
        if errors:
            raise ValidationError(errors)
