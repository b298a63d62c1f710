from django.db import migrations, models


def events_at_their_positions(apps, schema_editor):
    """Before positions and devices were kept apart every meter was its own position (same id, see plant
    0010): each existing record was calibrated at that position. Signed rows are locked by the model's
    own manager, not by the table; this fills a new column and changes nothing that was signed."""
    Event = apps.get_model("calibration", "CalibrationEvent")
    Event.objects.update(position_id=models.F("meter_id"))
    HistoricalEvent = apps.get_model("calibration", "HistoricalCalibrationEvent")
    HistoricalEvent.objects.update(position_id=models.F("meter_id"))



class Migration(migrations.Migration):

    dependencies = [
        ('calibration', '0007_calibration_position'),
        ('plant', '0010_split_meters_into_positions_and_devices'),
    ]

    operations = [
        migrations.RunPython(events_at_their_positions, migrations.RunPython.noop),
    ]
