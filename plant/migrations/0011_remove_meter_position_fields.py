from django.db import migrations


class Migration(migrations.Migration):
    """The meters' tag, duty and flows now live on their positions (0010 copied them)."""

    dependencies = [
        ('plant', '0010_split_meters_into_positions_and_devices'),
    ]

    operations = [
        migrations.RemoveField(
            model_name='historicalmeter',
            name='area',
        ),
        migrations.RemoveField(
            model_name='historicalmeter',
            name='fluid',
        ),
        migrations.RemoveField(
            model_name='historicalmeter',
            name='internal_diameter_mm',
        ),
        migrations.RemoveField(
            model_name='historicalmeter',
            name='line_size',
        ),
        migrations.RemoveField(
            model_name='historicalmeter',
            name='min_flow',
        ),
        migrations.RemoveField(
            model_name='historicalmeter',
            name='normal_flow',
        ),
        migrations.RemoveField(
            model_name='historicalmeter',
            name='tag',
        ),
        migrations.RemoveField(
            model_name='meter',
            name='area',
        ),
        migrations.RemoveField(
            model_name='meter',
            name='fluid',
        ),
        migrations.RemoveField(
            model_name='meter',
            name='internal_diameter_mm',
        ),
        migrations.RemoveField(
            model_name='meter',
            name='line_size',
        ),
        migrations.RemoveField(
            model_name='meter',
            name='min_flow',
        ),
        migrations.RemoveField(
            model_name='meter',
            name='normal_flow',
        ),
        migrations.RemoveField(
            model_name='meter',
            name='tag',
        ),
    ]
