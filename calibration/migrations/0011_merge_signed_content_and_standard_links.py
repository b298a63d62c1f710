"""Joins two lines of migrations made side by side: the signed content frozen into each record (0009, 0010) and the
standards' link model locked with signed events (0009). Neither touches the other's tables."""
from django.db import migrations


class Migration(migrations.Migration):
    dependencies = [
        ("calibration", "0010_freeze_signed_content"),
        ("calibration", "0009_standard_links_locked_with_signed_events"),
    ]

    operations = []
