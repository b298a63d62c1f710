"""Meter becomes Device (issue 28): the model, its audit trail and the foreign key of the duty periods, renamed in
place (tables and the column), so that no row is copied. The permissions of the model keep their groups and users:
their codenames follow the model's name (add_meter becomes add_device) rather than being created anew."""
from django.db import migrations

ACTIONS = ("add", "change", "delete", "view")


def rename_permissions(apps, schema_editor, old="meter", new="device"):
    Permission = apps.get_model("auth", "Permission")
    for prefix in ("", "historical "):
        for action in ACTIONS:
            codename = f"{action}_{prefix.strip()}{old}"
            Permission.objects.filter(content_type__app_label="plant", codename=codename).update(
                codename=f"{action}_{prefix.strip()}{new}", name=f"Can {action} {prefix}{new}")


def restore_permissions(apps, schema_editor):
    rename_permissions(apps, schema_editor, old="device", new="meter")


class Migration(migrations.Migration):

    dependencies = [
        ("auth", "0012_alter_user_first_name_max_length"),
        ("contenttypes", "0002_remove_content_type_name"),
        ("plant", "0015_meter_conformity_risk_fields"),
        # after every migration that names plant.Meter in a model it makes or changes, so that they run first
        ("calibration", "0017_standard_principle"),
        ("maintenance", "0003_review_indexes"),
        ("ledger", "0002_seal_records_signed_before_the_ledger"),
    ]

    operations = [
        migrations.RenameModel("Meter", "Device"),
        migrations.RenameModel("HistoricalMeter", "HistoricalDevice"),
        migrations.AlterModelOptions(
            name="historicaldevice",
            options={"get_latest_by": ("history_date", "history_id"), "ordering": ("-history_date", "-history_id"),
                     "verbose_name": "historical device", "verbose_name_plural": "historical devices"},
        ),
        migrations.RenameField("DutyPeriod", "meter", "device"),
        migrations.AlterModelOptions(name="dutyperiod", options={"ordering": ["device", "-since", "-id"]}),
        migrations.RunPython(rename_permissions, restore_permissions),
    ]
