"""A calibration's foreign key to its device is called `device` (Meter became Device, issue 28); renamed in place
(the column), and in the audit trail too. Signed records keep their ledger hashes: the layout kept with each
ledger entry names the field as it was, and the calibration kind says that `meter` is now `device`
(calibration/ledger_kinds.py). The drafts' index is made again on the renamed field (SQLite rebuilds the table
with the indexes the model states)."""
import django.db.models.deletion
from django.db import migrations, models


class Migration(migrations.Migration):

    dependencies = [
        ("calibration", "0017_standard_principle"),
        ("plant", "0016_meter_renamed_device"),
    ]

    operations = [
        migrations.RemoveIndex(model_name="calibrationevent", name="calibration_draft_idx"),
        migrations.RenameField("CalibrationEvent", "meter", "device"),
        migrations.RenameField("HistoricalCalibrationEvent", "meter", "device"),
        migrations.AddIndex(
            model_name="calibrationevent",
            index=models.Index(condition=models.Q(("state", "draft")), fields=["device"], name="calibration_draft_idx"),
        ),
        # the database has these already: the renamed column keeps its constraint to the renamed table
        migrations.SeparateDatabaseAndState(state_operations=[
            migrations.AlterField(
                model_name="calibrationevent", name="device",
                field=models.ForeignKey(on_delete=django.db.models.deletion.PROTECT, related_name="calibrations",
                                        to="plant.device")),
            migrations.AlterField(
                model_name="historicalcalibrationevent", name="device",
                field=models.ForeignKey(blank=True, db_constraint=False, null=True,
                                        on_delete=django.db.models.deletion.DO_NOTHING, related_name="+",
                                        to="plant.device")),
        ]),
    ]
