"""Derived state, one row per maintenance item, kept current by the write services.

A whole-fleet evaluation reads these rows instead of every reading ever taken. Each row is
rewritten for its unit inside the same transaction as any write that can change it (a bench
visit, an amendment, a deployment or a recovery), and ``manage.py rebuild_state`` recomputes
every row from the records. Nothing here is entered by hand.
"""

from django.db import models

from .deployments import Deployment
from .places import Site
from .records import BatteryInstall, PressureTest, ReleaseTest, SensorCheck
from .units import Transponder
from .variants import AnodePosition, SealPosition


class UnitState(models.Model):
    unit = models.OneToOneField(
        Transponder, on_delete=models.CASCADE, primary_key=True, related_name="state"
    )
    refreshed_at = models.DateTimeField()
    # The unit's last event (a deployment over the side or back, a bench visit opened): every
    # projection runs from this moment, so stored due dates do not drift with the clock.
    as_of = models.DateTimeField(null=True, blank=True)

    # Time in the water: closed deployments summed; an open one is added at evaluation time.
    immersed_days_closed = models.FloatField(default=0.0)
    first_over_side_at = models.DateTimeField(null=True, blank=True)
    open_deployment = models.ForeignKey(
        Deployment, on_delete=models.SET_NULL, null=True, blank=True, related_name="+"
    )
    # The duty the unit last worked at: replies per day and power step of its last deployment.
    duty_deployment = models.ForeignKey(
        Deployment, on_delete=models.SET_NULL, null=True, blank=True, related_name="+"
    )
    duty_replies_per_day = models.FloatField(null=True, blank=True)
    duty_site = models.ForeignKey(
        Site, on_delete=models.SET_NULL, null=True, blank=True, related_name="+"
    )

    # Battery: the fitted pack and the charge it gave over closed deployments since install.
    pack = models.ForeignKey(
        BatteryInstall, on_delete=models.SET_NULL, null=True, blank=True, related_name="+"
    )
    pack_charge_used_ah = models.FloatField(default=0.0)
    pack_releases = models.PositiveIntegerField(default=0)

    # Pressure tests and openings
    last_pressure_test = models.ForeignKey(
        PressureTest, on_delete=models.SET_NULL, null=True, blank=True, related_name="+"
    )
    last_opening_at = models.DateTimeField(null=True, blank=True)
    test_voided_by_opening = models.BooleanField(default=False)

    last_release_test = models.ForeignKey(
        ReleaseTest, on_delete=models.SET_NULL, null=True, blank=True, related_name="+"
    )
    last_temperature_check = models.ForeignKey(
        SensorCheck, on_delete=models.SET_NULL, null=True, blank=True, related_name="+"
    )
    last_pressure_check = models.ForeignKey(
        SensorCheck, on_delete=models.SET_NULL, null=True, blank=True, related_name="+"
    )
    last_tilt_check = models.ForeignKey(
        SensorCheck, on_delete=models.SET_NULL, null=True, blank=True, related_name="+"
    )

    def __str__(self) -> str:
        return f"state of {self.unit_id}"


class AnodeState(models.Model):
    """The anode now fitted at one position of one unit, with its wear-fit running sums.

    x is immersed days since this anode was fitted, y its net mass in kg.
    """

    unit = models.ForeignKey(Transponder, on_delete=models.CASCADE, related_name="anode_states")
    position = models.ForeignKey(AnodePosition, on_delete=models.CASCADE, related_name="+")
    fitted_at = models.DateTimeField(null=True, blank=True)
    immersed_days_at_fit = models.FloatField(default=0.0)
    n = models.PositiveIntegerField(default=0)
    sum_x = models.FloatField(default=0.0)
    sum_y = models.FloatField(default=0.0)
    sum_xx = models.FloatField(default=0.0)
    sum_xy = models.FloatField(default=0.0)
    sum_yy = models.FloatField(default=0.0)
    last_read_at = models.DateTimeField(null=True, blank=True)
    last_mass_kg = models.FloatField(null=True, blank=True)
    last_bond_resistance_ohm = models.FloatField(null=True, blank=True)

    # The same, over every visit but the unit's latest one (``base_visit_pk``): a save of that
    # visit starts from here and adds only its own readings (``fleet/due/state.py``). A plain
    # number, not a key: a deleted visit simply stops matching, and the next write rebuilds.
    base_visit_pk = models.PositiveBigIntegerField(null=True, blank=True)
    base_fitted_at = models.DateTimeField(null=True, blank=True)
    base_immersed_days_at_fit = models.FloatField(default=0.0)
    base_n = models.PositiveIntegerField(default=0)
    base_sum_x = models.FloatField(default=0.0)
    base_sum_y = models.FloatField(default=0.0)
    base_sum_xx = models.FloatField(default=0.0)
    base_sum_xy = models.FloatField(default=0.0)
    base_sum_yy = models.FloatField(default=0.0)
    base_last_read_at = models.DateTimeField(null=True, blank=True)
    base_last_mass_kg = models.FloatField(null=True, blank=True)
    base_last_bond_resistance_ohm = models.FloatField(null=True, blank=True)

    class Meta:
        constraints = [
            models.UniqueConstraint(fields=["unit", "position"], name="uniq_anode_state")
        ]

    def __str__(self) -> str:
        return f"anode state {self.unit_id}/{self.position_id}"


class SealState(models.Model):
    """The ring now fitted at one seal position of one unit."""

    unit = models.ForeignKey(Transponder, on_delete=models.CASCADE, related_name="seal_states")
    position = models.ForeignKey(SealPosition, on_delete=models.CASCADE, related_name="+")
    fitted_at = models.DateTimeField(null=True, blank=True)
    cure_date = models.DateField(null=True, blank=True)
    material = models.CharField(max_length=8, blank=True)
    openings_since_fit = models.PositiveIntegerField(default=0)

    class Meta:
        constraints = [models.UniqueConstraint(fields=["unit", "position"], name="uniq_seal_state")]

    def __str__(self) -> str:
        return f"seal state {self.unit_id}/{self.position_id}"


class DueRow(models.Model):
    """One due item, as the engine derives it from the unit's records.

    Rewritten for a unit by every write that touches one of its inputs; its due date runs
    from the unit's last event, so it stays exact on later days with no write. Every page,
    feed, export and PDF reads these rows and classifies them against the day in SQL.
    """

    unit = models.ForeignKey(Transponder, on_delete=models.CASCADE, related_name="due_rows")
    kind = models.CharField(max_length=16)
    key = models.CharField(max_length=40)
    item = models.CharField(max_length=160)
    due_on = models.DateField(null=True, blank=True)
    basis = models.TextField()
    flags = models.TextField(blank=True, help_text="One flag per line.")
    failed = models.BooleanField(default=False, help_text="Due because of a fault found.")
    position = models.PositiveSmallIntegerField(default=0, help_text="Order on the unit page.")

    class Meta:
        ordering = ["due_on", "unit_id", "item"]
        indexes = [
            models.Index(fields=["due_on"], name="duerow_due_on"),
            # A unit's condition asks whether it has a row due by a day (or undated): read
            # from this index alone, for every unit of the fleet at once on the overview.
            models.Index(fields=["unit", "due_on"], name="duerow_unit_due_on"),
        ]
        constraints = [models.UniqueConstraint(fields=["unit", "key"], name="uniq_due_row_key")]

    def __str__(self) -> str:
        return f"{self.item} due {self.due_on}"
