"""Units as codes on reference standards, and what a calibration entered in another unit keeps.

Reference standards' free-text units are mapped onto the codes of calibration/units.py exactly as plant 0008 maps
the meters' (the same frozen spellings): an unknown text stops the migration, naming the standard, and nothing is
changed. Events and points recorded before keep blank units and no entered value: their readings were in the
meter's units (CalibrationEvent.entered_units, CalibrationPoint.reference_as_entered). Sign-off snapshots keep the
text they were signed with (the pages show a known spelling by its label).
"""
import importlib

from django.db import migrations, models


# the frozen spellings and the mapping rule of plant 0008, so both registers are read the same way
_plant_units = importlib.import_module("plant.migrations.0008_flow_units_codes")
UnknownUnits, map_units, map_history = _plant_units.UnknownUnits, _plant_units.map_units, _plant_units.map_history


def forwards(apps, schema_editor):
    map_units(apps.get_model("calibration", "ReferenceStandard"), "units", "identification", "reference standard")
    map_history(apps.get_model("calibration", "HistoricalReferenceStandard"), "units")


class Migration(migrations.Migration):

    dependencies = [
        ('calibration', '0005_merge_20261204_1629'),
    ]

    operations = [
        migrations.AddField(
            model_name='calibrationevent',
            name='density_kg_m3',
            field=models.FloatField(blank=True, help_text='needed when the reference standard measures mass and the meter volume, or the other way round', null=True, verbose_name='fluid density at the calibration (kg/m³)'),
        ),
        migrations.AddField(
            model_name='calibrationevent',
            name='meter_units',
            field=models.CharField(blank=True, choices=[('m3/h', 'm³/h'), ('L/s', 'L/s'), ('L/min', 'L/min'), ('USgpm', 'US gal/min'), ('kg/h', 'kg/h'), ('kg/s', 'kg/s'), ('t/h', 't/h'), ('lb/h', 'lb/h'), ('Nm3/h', 'Nm³/h (0 °C, 101.325 kPa)'), ('Sm3/h', 'Sm³/h (15 °C, 101.325 kPa)')], editable=False, max_length=20, verbose_name="meter's units at the calibration"),
        ),
        migrations.AddField(
            model_name='calibrationevent',
            name='reference_units',
            field=models.CharField(blank=True, choices=[('m3/h', 'm³/h'), ('L/s', 'L/s'), ('L/min', 'L/min'), ('USgpm', 'US gal/min'), ('kg/h', 'kg/h'), ('kg/s', 'kg/s'), ('t/h', 't/h'), ('lb/h', 'lb/h'), ('Nm3/h', 'Nm³/h (0 °C, 101.325 kPa)'), ('Sm3/h', 'Sm³/h (15 °C, 101.325 kPa)')], editable=False, max_length=20, verbose_name='units of the reference readings'),
        ),
        migrations.AddField(
            model_name='calibrationpoint',
            name='reference_entered',
            field=models.FloatField(blank=True, null=True, verbose_name="reference value as entered (standard's units)"),
        ),
        migrations.AddField(
            model_name='historicalcalibrationevent',
            name='density_kg_m3',
            field=models.FloatField(blank=True, help_text='needed when the reference standard measures mass and the meter volume, or the other way round', null=True, verbose_name='fluid density at the calibration (kg/m³)'),
        ),
        migrations.AddField(
            model_name='historicalcalibrationevent',
            name='meter_units',
            field=models.CharField(blank=True, choices=[('m3/h', 'm³/h'), ('L/s', 'L/s'), ('L/min', 'L/min'), ('USgpm', 'US gal/min'), ('kg/h', 'kg/h'), ('kg/s', 'kg/s'), ('t/h', 't/h'), ('lb/h', 'lb/h'), ('Nm3/h', 'Nm³/h (0 °C, 101.325 kPa)'), ('Sm3/h', 'Sm³/h (15 °C, 101.325 kPa)')], editable=False, max_length=20, verbose_name="meter's units at the calibration"),
        ),
        migrations.AddField(
            model_name='historicalcalibrationevent',
            name='reference_units',
            field=models.CharField(blank=True, choices=[('m3/h', 'm³/h'), ('L/s', 'L/s'), ('L/min', 'L/min'), ('USgpm', 'US gal/min'), ('kg/h', 'kg/h'), ('kg/s', 'kg/s'), ('t/h', 't/h'), ('lb/h', 'lb/h'), ('Nm3/h', 'Nm³/h (0 °C, 101.325 kPa)'), ('Sm3/h', 'Sm³/h (15 °C, 101.325 kPa)')], editable=False, max_length=20, verbose_name='units of the reference readings'),
        ),
        migrations.AlterField(
            model_name='historicalreferencestandard',
            name='units',
            field=models.CharField(choices=[('m3/h', 'm³/h'), ('L/s', 'L/s'), ('L/min', 'L/min'), ('USgpm', 'US gal/min'), ('kg/h', 'kg/h'), ('kg/s', 'kg/s'), ('t/h', 't/h'), ('lb/h', 'lb/h'), ('Nm3/h', 'Nm³/h (0 °C, 101.325 kPa)'), ('Sm3/h', 'Sm³/h (15 °C, 101.325 kPa)')], default='m3/h', error_messages={'invalid_choice': '"%(value)s" is not one of the flow units in use; choose one of m3/h, L/s, L/min, USgpm, kg/h, kg/s, t/h, lb/h, Nm3/h, Sm3/h (e.g. m3/h for m³/h).'}, help_text='the unit its readings and its range are stated in', max_length=20),
        ),
        migrations.AlterField(
            model_name='referencestandard',
            name='units',
            field=models.CharField(choices=[('m3/h', 'm³/h'), ('L/s', 'L/s'), ('L/min', 'L/min'), ('USgpm', 'US gal/min'), ('kg/h', 'kg/h'), ('kg/s', 'kg/s'), ('t/h', 't/h'), ('lb/h', 'lb/h'), ('Nm3/h', 'Nm³/h (0 °C, 101.325 kPa)'), ('Sm3/h', 'Sm³/h (15 °C, 101.325 kPa)')], default='m3/h', error_messages={'invalid_choice': '"%(value)s" is not one of the flow units in use; choose one of m3/h, L/s, L/min, USgpm, kg/h, kg/s, t/h, lb/h, Nm3/h, Sm3/h (e.g. m3/h for m³/h).'}, help_text='the unit its readings and its range are stated in', max_length=20),
        ),
        migrations.RunPython(forwards, migrations.RunPython.noop),
    ]
