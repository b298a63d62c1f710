"""The foreign keys of maintenance tasks and records to their device are called `device` (Meter became Device,
issue 28); renamed in place (the columns), and in the audit trails too. Signed records keep their ledger hashes:
the layout kept with each ledger entry names the field as it was, and the maintenance kind says that `meter` is now
`device` (maintenance/ledger_kinds.py). The indexes on the field are made again on the renamed field, under their
names (SQLite rebuilds a table with the indexes the model states)."""
import django.db.models.deletion
from django.db import migrations, models


class Migration(migrations.Migration):

    dependencies = [
        ("maintenance", "0003_review_indexes"),
        ("plant", "0016_meter_renamed_device"),
    ]

    operations = [
        migrations.RemoveIndex(model_name="maintenancerecord", name="maint_record_meter_day_idx"),
        migrations.RemoveIndex(model_name="maintenancetask", name="maint_task_meter_due_idx"),
        migrations.RenameField("MaintenanceTask", "meter", "device"),
        migrations.RenameField("HistoricalMaintenanceTask", "meter", "device"),
        migrations.RenameField("MaintenanceRecord", "meter", "device"),
        migrations.RenameField("HistoricalMaintenanceRecord", "meter", "device"),
        migrations.AlterModelOptions(
            name="maintenancetask",
            options={"ordering": ["device", "code", "id"],
                     "permissions": [("review_maintenance", "Can add, change and retire maintenance tasks")]},
        ),
        migrations.AddIndex(
            model_name="maintenancerecord",
            index=models.Index(fields=["device", "performed_on"], name="maint_record_meter_day_idx"),
        ),
        migrations.AddIndex(
            model_name="maintenancetask",
            index=models.Index(fields=["device", "active", "next_due_date", "code"], include=("id",),
                               name="maint_task_meter_due_idx"),
        ),
        # the database has these already: the renamed columns keep their constraints to the renamed table
        migrations.SeparateDatabaseAndState(state_operations=[
            migrations.AlterField(
                model_name="maintenancetask", name="device",
                field=models.ForeignKey(on_delete=django.db.models.deletion.PROTECT, related_name="maintenance_tasks",
                                        to="plant.device")),
            migrations.AlterField(
                model_name="historicalmaintenancetask", name="device",
                field=models.ForeignKey(blank=True, db_constraint=False, null=True,
                                        on_delete=django.db.models.deletion.DO_NOTHING, related_name="+",
                                        to="plant.device")),
            migrations.AlterField(
                model_name="maintenancerecord", name="device",
                field=models.ForeignKey(on_delete=django.db.models.deletion.PROTECT,
                                        related_name="maintenance_records", to="plant.device")),
            migrations.AlterField(
                model_name="historicalmaintenancerecord", name="device",
                field=models.ForeignKey(blank=True, db_constraint=False, null=True,
                                        on_delete=django.db.models.deletion.DO_NOTHING, related_name="+",
                                        to="plant.device")),
        ]),
    ]
