"""Vessel kits, and the identity rows need to merge back from one.

1. ``Kit``: a copy of part of the fleet taken to sea (``fleet/models/kits.py``).
2. ``uid`` and ``origin`` on every row a kit may write (service records, every entry kind,
   amendments, deployments, release certificates, hold changes). Rows written before this
   migration keep ``uid`` NULL: they are identified by primary key, which a kit copy keeps.
   Adding a field with a callable default gives every existing row the same value, so ``uid``
   is added nullable without a default first, then altered to unique with ``uuid4`` for new
   rows.
3. SQLite rebuilds a table to alter a field and drops its triggers with it, and cannot rebuild
   the record table at all while the entry tables' triggers name it: every guard is dropped
   first and created again at the end, the closed-record
   guards of the service record table and of every entry table are created again, now also
   freezing ``uid`` and ``origin`` on closed rows (PostgreSQL's guard compares every column
   but the amendable ones, so it freezes the new columns as they are; re-creating it there is
   harmless).
"""

import uuid

import django.core.validators
import django.db.models.deletion
from django.conf import settings
from django.db import migrations, models

from fleet.integrity import (
    reguard_entry_table_operation,
    reguard_record_table_operation,
    unguard_tables_operation,
)

STAMPED = (
    "servicerecord",
    "anodereading",
    "sealchange",
    "batteryinstall",
    "pressuretest",
    "releasetest",
    "sensorcheck",
    "housingopening",
    "packremoval",
    "amendment",
    "deployment",
    "releasecertificate",
    "holdchange",
)

# Amendable columns at this migration (each entry kind's ``amendable_fields``).
AMENDABLE = {
    "fleet_anodereading": (
        "mass_g",
        "remaining_percent",
        "bond_resistance_ohm",
        "replaced",
        "note",
    ),
    "fleet_sealchange": ("material", "cure_date", "lot", "reason"),
    "fleet_batteryinstall": (
        "pack_serial",
        "chemistry",
        "nominal_voltage_v",
        "capacity_ah",
        "made_on",
        "installed_on",
        "ocv_install_v",
    ),
    "fleet_pressuretest": (
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
    ),
    "fleet_releasetest": (
        "tested_on",
        "kind",
        "load_kg",
        "seconds_to_release",
        "motor_current_a",
        "limit_switch_ok",
        "acoustic_command_ok",
    ),
    "fleet_sensorcheck": (
        "checked_on",
        "sensor",
        "reference_value",
        "unit_reading",
        "raw_resistance_ohm",
    ),
    "fleet_housingopening": (
        "opened_at",
        "closed_at",
        "vented_before_opening",
        "internal_pressure_found",
        "reason",
    ),
    "fleet_packremoval": ("removed_on", "ocv_removal_v"),
}


def _identity_fields() -> list[migrations.operations.base.Operation]:
    operations: list[migrations.operations.base.Operation] = []
    for model in STAMPED:
        operations += [
            migrations.AddField(
                model_name=model,
                name="origin",
                field=models.CharField(blank=True, default="", editable=False, max_length=12),
            ),
            migrations.AddField(
                model_name=model, name="uid", field=models.UUIDField(editable=False, null=True)
            ),
            migrations.AlterField(
                model_name=model,
                name="uid",
                field=models.UUIDField(default=uuid.uuid4, editable=False, null=True, unique=True),
            ),
        ]
    return operations


class Migration(migrations.Migration):
    dependencies = [
        ("fleet", "0021_anode_state_base_sums"),
        migrations.swappable_dependency(settings.AUTH_USER_MODEL),
    ]

    operations = [
        # Every guard goes first: SQLite cannot rebuild the record table while triggers name it.
        unguard_tables_operation(["fleet_servicerecord", *AMENDABLE]),
        *_identity_fields(),
        migrations.CreateModel(
            name="Kit",
            fields=[
                (
                    "id",
                    models.BigAutoField(
                        auto_created=True, primary_key=True, serialize=False, verbose_name="ID"
                    ),
                ),
                ("code", models.CharField(max_length=12, unique=True)),
                (
                    "job",
                    models.CharField(
                        max_length=200, validators=[django.core.validators.MaxLengthValidator(200)]
                    ),
                ),
                ("created_at", models.DateTimeField()),
                ("here", models.BooleanField(default=False)),
                (
                    "status",
                    models.CharField(
                        choices=[
                            ("exported", "At sea"),
                            ("returned_partly", "Partly merged"),
                            ("merged", "Merged back"),
                            ("withdrawn", "Withdrawn"),
                        ],
                        default="exported",
                        max_length=16,
                    ),
                ),
                ("certificate_year", models.PositiveSmallIntegerField()),
                ("certificate_first", models.PositiveIntegerField()),
                ("certificate_last", models.PositiveIntegerField()),
                ("certificate_next_first", models.PositiveIntegerField(blank=True, null=True)),
                ("certificate_next_last", models.PositiveIntegerField(blank=True, null=True)),
                ("exported_sha256", models.CharField(blank=True, max_length=64)),
                (
                    "created_by",
                    models.ForeignKey(
                        on_delete=django.db.models.deletion.PROTECT,
                        related_name="+",
                        to=settings.AUTH_USER_MODEL,
                    ),
                ),
                ("sites", models.ManyToManyField(blank=True, related_name="+", to="fleet.site")),
                (
                    "units",
                    models.ManyToManyField(blank=True, related_name="+", to="fleet.transponder"),
                ),
                (
                    "users",
                    models.ManyToManyField(
                        blank=True, related_name="+", to=settings.AUTH_USER_MODEL
                    ),
                ),
            ],
            options={
                "ordering": ["-created_at", "-pk"],
                "constraints": [
                    models.UniqueConstraint(
                        condition=models.Q(("here", True)), fields=("here",), name="one_kit_here"
                    ),
                    models.CheckConstraint(
                        condition=models.Q(
                            ("certificate_last__gte", models.F("certificate_first"))
                        ),
                        name="kit_certificate_range_ordered",
                    ),
                ],
            },
        ),
        reguard_record_table_operation(),
        *(
            reguard_entry_table_operation(table, amendable)
            for table, amendable in AMENDABLE.items()
        ),
    ]
