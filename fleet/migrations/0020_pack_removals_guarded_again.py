"""Closed records' pack removals are guarded again on SQLite: 0015 added a constraint to
``fleet_packremoval``, and SQLite rebuilds a table to add one, dropping the triggers 0014 put
on it. Dropping and creating them again is harmless where they survived (PostgreSQL)."""

from django.db import migrations

from fleet.integrity import reguard_entry_table_operation


class Migration(migrations.Migration):
    dependencies = [("fleet", "0019_import_batches")]

    operations = [
        reguard_entry_table_operation("fleet_packremoval", ("removed_on", "ocv_removal_v"))
    ]
