from django.db import migrations

from calibration import signed_content


def freeze_signed_content(apps, schema_editor):
    """Every record signed before certificates were frozen at sign-off gets its content rebuilt from the audit
    trail as of its signing time (calibration/signed_content.py, `rebuilt`): the device's, position's, fluid's and
    standards' versions then, the register as it stands where the trail has none, and the content names those
    parts. The same code rebuilds a record stored without content at printing, so both agree."""
    signed_content.fill_missing(apps)


class Migration(migrations.Migration):

    dependencies = [
        ("calibration", "0009_signed_content_and_correction_reason"),
        ("plant", "0012_review_indexes"),
    ]

    operations = [
        migrations.RunPython(freeze_signed_content, migrations.RunPython.noop),
    ]
