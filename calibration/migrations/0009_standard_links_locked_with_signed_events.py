"""CalibrationEvent.reference_standards gets a through model of its own, StandardLink, on the table Django had
made for the link (same table, columns and unique pair), so that the links of a signed calibration can be locked
like its rows. Nothing changes in the database: the state follows the tables as they are."""
import django.db.models.deletion
from django.db import migrations, models


class Migration(migrations.Migration):

    dependencies = [
        ('calibration', '0008_events_at_their_positions'),
    ]

    operations = [
        migrations.SeparateDatabaseAndState(
            database_operations=[],
            state_operations=[
                # the audit trail's link rows: the same table; only the state's copy of the link fields changes
                migrations.AlterField(
                    model_name='historicalcalibrationevent_reference_standards',
                    name='calibrationevent',
                    field=models.ForeignKey(blank=True, db_constraint=False, null=True, on_delete=django.db.models.deletion.DO_NOTHING, related_name='+', to='calibration.calibrationevent'),
                ),
                migrations.AlterField(
                    model_name='historicalcalibrationevent_reference_standards',
                    name='referencestandard',
                    field=models.ForeignKey(blank=True, db_constraint=False, null=True, on_delete=django.db.models.deletion.DO_NOTHING, related_name='+', to='calibration.referencestandard'),
                ),
                migrations.CreateModel(
                    name='StandardLink',
                    fields=[
                        ('id', models.BigAutoField(auto_created=True, primary_key=True, serialize=False, verbose_name='ID')),
                        ('calibrationevent', models.ForeignKey(on_delete=django.db.models.deletion.CASCADE, related_name='+', to='calibration.calibrationevent')),
                        ('referencestandard', models.ForeignKey(on_delete=django.db.models.deletion.CASCADE, related_name='+', to='calibration.referencestandard')),
                    ],
                    options={
                        'db_table': 'calibration_calibrationevent_reference_standards',
                        'unique_together': {('calibrationevent', 'referencestandard')},
                    },
                ),
                migrations.AlterField(
                    model_name='calibrationevent',
                    name='reference_standards',
                    field=models.ManyToManyField(related_name='events', through='calibration.StandardLink', to='calibration.referencestandard'),
                ),
            ],
        ),
    ]
