"""A pack removal is its own entry; closed records are guarded by database triggers; an
amendment behind an issued release certificate makes it not valid.

1. ``PackRemoval``: a later visit that takes a pack out writes a removal entry in its own
   record instead of editing the (closed) record that fitted the pack. Existing removal dates
   on ``BatteryInstall`` move into removal entries, each in the unit's last visit opened on or
   before the removal date (the visit during which the pack came out), and the old columns and
   the partial unique index on them go: the fitted pack is the install no removal points at.
2. ``ReleaseCertificate``: a new status, not valid, and the amendment that caused it.
3. Closed means closed, in the database (``fleet/integrity.py`` holds the SQL and the design):
   on PostgreSQL and SQLite, triggers refuse UPDATE and DELETE of a closed service record's
   row and of the rows of its entries. An amendment opens a per-transaction door for the
   amendable columns only (PostgreSQL: ``set_config('holdfast.amending', 'on', true)``, read
   with ``current_setting``; SQLite: a row in the marker table ``fleet_amendment_marker``,
   created here, checked with ``EXISTS``); purging (the demo loader, the test flush) opens
   another for deletion. The SQL is chosen per vendor from ``schema_editor.connection.vendor``
   in ``RunPython``; other vendors get no guard.
"""

import django.core.validators
import django.db.models.deletion
from django.db import migrations, models
from django.utils import timezone

import fleet.models.validators
from fleet.integrity import guard_entry_table_operation, guard_record_table_operation

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


def _immediate_constraints(schema_editor):
    # Rows written here must not leave deferred foreign-key checks pending before the
    # ALTER TABLEs that follow (PostgreSQL refuses those while trigger events are pending).
    if schema_editor.connection.vendor == "postgresql":
        schema_editor.execute("SET CONSTRAINTS ALL IMMEDIATE", params=None)


def removals_to_entries(apps, schema_editor):
    _immediate_constraints(schema_editor)
    BatteryInstall = apps.get_model("fleet", "BatteryInstall")
    PackRemoval = apps.get_model("fleet", "PackRemoval")
    ServiceRecord = apps.get_model("fleet", "ServiceRecord")
    for install in BatteryInstall.objects.filter(removed_on__isnull=False).order_by("pk"):
        visits = ServiceRecord.objects.filter(unit_id=install.unit_id).order_by("-opened_at", "-pk")
        record_id = install.record_id
        for visit in visits:
            if timezone.localdate(visit.opened_at) <= install.removed_on:
                record_id = visit.pk
                break
        PackRemoval.objects.create(
            record_id=record_id,
            install_id=install.pk,
            removed_on=install.removed_on,
            ocv_removal_v=install.ocv_removal_v,
        )


def entries_to_removals(apps, schema_editor):
    _immediate_constraints(schema_editor)
    BatteryInstall = apps.get_model("fleet", "BatteryInstall")
    PackRemoval = apps.get_model("fleet", "PackRemoval")
    for removal in PackRemoval.objects.order_by("pk"):
        BatteryInstall.objects.filter(pk=removal.install_id).update(
            removed_on=removal.removed_on, ocv_removal_v=removal.ocv_removal_v
        )
    PackRemoval.objects.all().delete()


class Migration(migrations.Migration):
    dependencies = [
        ("fleet", "0013_numeric_and_date_gates_in_the_database"),
    ]

    operations = [
        migrations.CreateModel(
            name="PackRemoval",
            fields=[
                (
                    "id",
                    models.BigAutoField(
                        auto_created=True, primary_key=True, serialize=False, verbose_name="ID"
                    ),
                ),
                (
                    "removed_on",
                    models.DateField(
                        validators=[fleet.models.validators.not_before_1980],
                        verbose_name="removed on",
                    ),
                ),
                (
                    "ocv_removal_v",
                    models.FloatField(
                        blank=True,
                        null=True,
                        validators=[
                            fleet.models.validators.finite,
                            django.core.validators.MinValueValidator(0.0),
                            django.core.validators.MaxValueValidator(300.0),
                        ],
                        verbose_name="open-circuit volts at removal",
                    ),
                ),
            ],
            options={
                "ordering": ["-removed_on"],
            },
        ),
        migrations.AddField(
            model_name="packremoval",
            name="install",
            field=models.OneToOneField(
                help_text="The pack taken out (fitted at this or an earlier visit).",
                on_delete=django.db.models.deletion.CASCADE,
                related_name="removal",
                to="fleet.batteryinstall",
                verbose_name="pack",
            ),
        ),
        migrations.AddField(
            model_name="packremoval",
            name="record",
            field=models.ForeignKey(
                on_delete=django.db.models.deletion.CASCADE,
                related_name="pack_removals",
                to="fleet.servicerecord",
            ),
        ),
        migrations.RunPython(removals_to_entries, entries_to_removals),
        migrations.RemoveConstraint(
            model_name="batteryinstall",
            name="one_fitted_pack_per_unit",
        ),
        migrations.RemoveConstraint(
            model_name="batteryinstall",
            name="batteryinstall_ocv_removal_v_range",
        ),
        migrations.RemoveField(
            model_name="batteryinstall",
            name="ocv_removal_v",
        ),
        migrations.RemoveField(
            model_name="batteryinstall",
            name="removed_on",
        ),
        migrations.AddField(
            model_name="releasecertificate",
            name="invalidated_by",
            field=models.ForeignKey(
                blank=True,
                help_text="The amendment that made this certificate not valid.",
                null=True,
                on_delete=django.db.models.deletion.PROTECT,
                related_name="invalidated_certificates",
                to="fleet.amendment",
            ),
        ),
        migrations.AlterField(
            model_name="releasecertificate",
            name="status",
            field=models.CharField(
                choices=[
                    ("issued", "Issued"),
                    ("superseded", "Superseded"),
                    ("withdrawn", "Withdrawn"),
                    ("not_valid", "Not valid: test amended"),
                ],
                default="issued",
                max_length=12,
            ),
        ),
        guard_record_table_operation(),
        *(guard_entry_table_operation(table, columns) for table, columns in AMENDABLE.items()),
    ]
