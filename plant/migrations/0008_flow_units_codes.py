"""Flow units become codes (calibration/units.py): the meter's free-text units are mapped onto them.

The mapping is frozen here (a copy of calibration.units.LEGACY_SPELLINGS and the codes as of this migration, read the
way calibration.units.code_for reads them: exact, then ignoring case), so this migration means the same whenever it
runs; tests/test_unit_migration.py checks that it agrees with code_for.

A unit that is not one of those spellings is not guessed: the migration stops, naming every such meter and its
text, and changes nothing. Correct those meters (e.g. in the admin, to one of the codes) and migrate again. The
audit trail's older versions are mapped where their text is a known spelling and otherwise left as written.
Backwards, the codes stay (a code is valid free text).
"""
from django.db import migrations, models


CODES = ("m3/h", "L/s", "L/min", "USgpm", "kg/h", "kg/s", "t/h", "lb/h", "Nm3/h", "Sm3/h")
LEGACY_SPELLINGS = {
    "m³/h": "m3/h", "m3/h": "m3/h", "m^3/h": "m3/h", "cu m/h": "m3/h",
    "l/s": "L/s", "L/s": "L/s", "l/min": "L/min", "L/min": "L/min", "lpm": "L/min",
    "gpm": "USgpm", "US gal/min": "USgpm", "usgpm": "USgpm",
    "kg/h": "kg/h", "kg/s": "kg/s", "t/h": "t/h", "lb/h": "lb/h", "lb/hr": "lb/h",
    "Nm³/h": "Nm3/h", "Nm3/h": "Nm3/h", "Sm³/h": "Sm3/h", "Sm3/h": "Sm3/h",
}


def code_for(text):
    """The unit code for a code or a legacy spelling, or None."""
    text = (text or "").strip()
    if text in CODES:
        return text
    if text in LEGACY_SPELLINGS:
        return LEGACY_SPELLINGS[text]
    return {k.lower(): v for k, v in LEGACY_SPELLINGS.items()}.get(text.lower())


class UnknownUnits(Exception):
    pass


def map_units(model, field, key, what):
    """Map every row's `field` onto a code; stop, naming the rows, when any text is not a known spelling."""
    unknown = []
    for pk, name, text in model.objects.values_list("pk", key, field):
        code = code_for(text)
        if code is None:
            unknown.append(f"{what} {name} ({text!r})")
        elif code != text:
            model.objects.filter(pk=pk).update(**{field: code})
    if unknown:
        raise UnknownUnits(
            f"These flow units are not one of the codes ({', '.join(CODES)}) nor a known spelling of one: "
            f"{'; '.join(unknown)}. Nothing was changed: correct them to one of the codes and migrate again.")


def map_history(model, field):
    for pk, text in model.objects.values_list("pk", field):
        code = code_for(text)
        if code is not None and code != text:
            model.objects.filter(pk=pk).update(**{field: code})


def forwards(apps, schema_editor):
    map_units(apps.get_model("plant", "Meter"), "flow_units", "tag", "meter")
    map_history(apps.get_model("plant", "HistoricalMeter"), "flow_units")


class Migration(migrations.Migration):

    dependencies = [
        ('plant', '0007_merge_20261204_1610'),
    ]

    operations = [
        migrations.AlterField(
            model_name='historicalmeter',
            name='flow_units',
            field=models.CharField(choices=[('m3/h', 'm³/h'), ('L/s', 'L/s'), ('L/min', 'L/min'), ('USgpm', 'US gal/min'), ('kg/h', 'kg/h'), ('kg/s', 'kg/s'), ('t/h', 't/h'), ('lb/h', 'lb/h'), ('Nm3/h', 'Nm³/h (0 °C, 101.325 kPa)'), ('Sm3/h', 'Sm³/h (15 °C, 101.325 kPa)')], default='m3/h', error_messages={'invalid_choice': '"%(value)s" is not one of the flow units in use; choose one of m3/h, L/s, L/min, USgpm, kg/h, kg/s, t/h, lb/h, Nm3/h, Sm3/h (e.g. m3/h for m³/h).'}, max_length=20),
        ),
        migrations.AlterField(
            model_name='meter',
            name='flow_units',
            field=models.CharField(choices=[('m3/h', 'm³/h'), ('L/s', 'L/s'), ('L/min', 'L/min'), ('USgpm', 'US gal/min'), ('kg/h', 'kg/h'), ('kg/s', 'kg/s'), ('t/h', 't/h'), ('lb/h', 'lb/h'), ('Nm3/h', 'Nm³/h (0 °C, 101.325 kPa)'), ('Sm3/h', 'Sm³/h (15 °C, 101.325 kPa)')], default='m3/h', error_messages={'invalid_choice': '"%(value)s" is not one of the flow units in use; choose one of m3/h, L/s, L/min, USgpm, kg/h, kg/s, t/h, lb/h, Nm3/h, Sm3/h (e.g. m3/h for m³/h).'}, max_length=20),
        ),
        migrations.RunPython(forwards, migrations.RunPython.noop),
    ]
