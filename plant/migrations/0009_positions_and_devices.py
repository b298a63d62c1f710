import django.core.validators
import django.db.models.deletion
import simple_history.models
from django.conf import settings
from django.db import migrations, models


class Migration(migrations.Migration):
    """Positions and installations, and the fields that tie devices to them (data in 0010, meters' old columns
    dropped in 0011: PostgreSQL refuses to alter a table in the transaction that changed its rows)."""

    dependencies = [
        ('plant', '0008_flow_units_codes'),
        migrations.swappable_dependency(settings.AUTH_USER_MODEL),
    ]

    operations = [
        migrations.AlterModelOptions(
            name='meter',
            options={'ordering': ['position__tag', 'serial', 'pk'], 'permissions': [('swap_device', 'Can install, remove and swap devices at positions')]},
        ),
        migrations.CreateModel(
            name='HistoricalPosition',
            fields=[
                ('id', models.BigIntegerField(auto_created=True, blank=True, db_index=True, verbose_name='ID')),
                ('tag', models.CharField(db_index=True, error_messages={'unique': 'A position with this tag already exists.'}, max_length=40)),
                ('line_size', models.CharField(max_length=20, verbose_name='line size (e.g. DN50)')),
                ('internal_diameter_mm', models.FloatField(validators=[django.core.validators.MinValueValidator(0.1, 'Internal diameter must be positive.')], verbose_name='internal diameter (mm)')),
                ('flow_units', models.CharField(choices=[('m3/h', 'm³/h'), ('L/s', 'L/s'), ('L/min', 'L/min'), ('USgpm', 'US gal/min'), ('kg/h', 'kg/h'), ('kg/s', 'kg/s'), ('t/h', 't/h'), ('lb/h', 'lb/h'), ('Nm3/h', 'Nm³/h (0 °C, 101.325 kPa)'), ('Sm3/h', 'Sm³/h (15 °C, 101.325 kPa)')], default='m3/h', error_messages={'invalid_choice': '"%(value)s" is not one of the flow units in use; choose one of m3/h, L/s, L/min, USgpm, kg/h, kg/s, t/h, lb/h, Nm3/h, Sm3/h (e.g. m3/h for m³/h).'}, max_length=20, verbose_name='units of the process flows')),
                ('normal_flow', models.FloatField(blank=True, null=True, verbose_name='normal process flow')),
                ('min_flow', models.FloatField(blank=True, null=True, verbose_name='minimum process flow')),
                ('required_accuracy_pct', models.FloatField(blank=True, help_text='What the process needs of the measurement here; a device whose MPE is wider is flagged.', null=True, validators=[django.core.validators.MinValueValidator(1e-06, 'The required accuracy must be greater than zero.')], verbose_name='required accuracy (± % of reading)')),
                ('history_id', models.AutoField(primary_key=True, serialize=False)),
                ('history_date', models.DateTimeField(db_index=True)),
                ('history_change_reason', models.CharField(max_length=100, null=True)),
                ('history_type', models.CharField(choices=[('+', 'Created'), ('~', 'Changed'), ('-', 'Deleted')], max_length=1)),
                ('area', models.ForeignKey(blank=True, db_constraint=False, null=True, on_delete=django.db.models.deletion.DO_NOTHING, related_name='+', to='plant.area')),
                ('fluid', models.ForeignKey(blank=True, db_constraint=False, null=True, on_delete=django.db.models.deletion.DO_NOTHING, related_name='+', to='plant.fluid')),
                ('history_user', models.ForeignKey(null=True, on_delete=django.db.models.deletion.SET_NULL, related_name='+', to=settings.AUTH_USER_MODEL)),
            ],
            options={
                'verbose_name': 'historical position',
                'verbose_name_plural': 'historical positions',
                'ordering': ('-history_date', '-history_id'),
                'get_latest_by': ('history_date', 'history_id'),
            },
            bases=(simple_history.models.HistoricalChanges, models.Model),
        ),
        migrations.CreateModel(
            name='Position',
            fields=[
                ('id', models.BigAutoField(auto_created=True, primary_key=True, serialize=False, verbose_name='ID')),
                ('tag', models.CharField(error_messages={'unique': 'A position with this tag already exists.'}, max_length=40, unique=True)),
                ('line_size', models.CharField(max_length=20, verbose_name='line size (e.g. DN50)')),
                ('internal_diameter_mm', models.FloatField(validators=[django.core.validators.MinValueValidator(0.1, 'Internal diameter must be positive.')], verbose_name='internal diameter (mm)')),
                ('flow_units', models.CharField(choices=[('m3/h', 'm³/h'), ('L/s', 'L/s'), ('L/min', 'L/min'), ('USgpm', 'US gal/min'), ('kg/h', 'kg/h'), ('kg/s', 'kg/s'), ('t/h', 't/h'), ('lb/h', 'lb/h'), ('Nm3/h', 'Nm³/h (0 °C, 101.325 kPa)'), ('Sm3/h', 'Sm³/h (15 °C, 101.325 kPa)')], default='m3/h', error_messages={'invalid_choice': '"%(value)s" is not one of the flow units in use; choose one of m3/h, L/s, L/min, USgpm, kg/h, kg/s, t/h, lb/h, Nm3/h, Sm3/h (e.g. m3/h for m³/h).'}, max_length=20, verbose_name='units of the process flows')),
                ('normal_flow', models.FloatField(blank=True, null=True, verbose_name='normal process flow')),
                ('min_flow', models.FloatField(blank=True, null=True, verbose_name='minimum process flow')),
                ('required_accuracy_pct', models.FloatField(blank=True, help_text='What the process needs of the measurement here; a device whose MPE is wider is flagged.', null=True, validators=[django.core.validators.MinValueValidator(1e-06, 'The required accuracy must be greater than zero.')], verbose_name='required accuracy (± % of reading)')),
                ('area', models.ForeignKey(on_delete=django.db.models.deletion.PROTECT, related_name='positions', to='plant.area')),
                ('fluid', models.ForeignKey(on_delete=django.db.models.deletion.PROTECT, related_name='positions', to='plant.fluid')),
            ],
            options={
                'ordering': ['tag'],
            },
        ),
        migrations.CreateModel(
            name='HistoricalInstallation',
            fields=[
                ('id', models.BigIntegerField(auto_created=True, blank=True, db_index=True, verbose_name='ID')),
                ('since', models.DateField()),
                ('until', models.DateField(blank=True, null=True)),
                ('removal_reason', models.CharField(blank=True, max_length=200)),
                ('starting_point', models.JSONField(blank=True, default=dict)),
                ('history_id', models.AutoField(primary_key=True, serialize=False)),
                ('history_date', models.DateTimeField(db_index=True)),
                ('history_change_reason', models.CharField(max_length=100, null=True)),
                ('history_type', models.CharField(choices=[('+', 'Created'), ('~', 'Changed'), ('-', 'Deleted')], max_length=1)),
                ('device', models.ForeignKey(blank=True, db_constraint=False, null=True, on_delete=django.db.models.deletion.DO_NOTHING, related_name='+', to='plant.meter')),
                ('history_user', models.ForeignKey(null=True, on_delete=django.db.models.deletion.SET_NULL, related_name='+', to=settings.AUTH_USER_MODEL)),
                ('installed_by', models.ForeignKey(blank=True, db_constraint=False, null=True, on_delete=django.db.models.deletion.DO_NOTHING, related_name='+', to=settings.AUTH_USER_MODEL)),
                ('removed_by', models.ForeignKey(blank=True, db_constraint=False, null=True, on_delete=django.db.models.deletion.DO_NOTHING, related_name='+', to=settings.AUTH_USER_MODEL)),
                ('position', models.ForeignKey(blank=True, db_constraint=False, null=True, on_delete=django.db.models.deletion.DO_NOTHING, related_name='+', to='plant.position')),
            ],
            options={
                'verbose_name': 'historical installation',
                'verbose_name_plural': 'historical installations',
                'ordering': ('-history_date', '-history_id'),
                'get_latest_by': ('history_date', 'history_id'),
            },
            bases=(simple_history.models.HistoricalChanges, models.Model),
        ),
        migrations.AddField(
            model_name='dutyperiod',
            name='position',
            field=models.ForeignKey(blank=True, null=True, on_delete=django.db.models.deletion.PROTECT, related_name='duties', to='plant.position'),
        ),
        migrations.AddField(
            model_name='historicalmeter',
            name='position',
            field=models.ForeignKey(blank=True, db_constraint=False, editable=False, null=True, on_delete=django.db.models.deletion.DO_NOTHING, related_name='+', to='plant.position'),
        ),
        migrations.AddField(
            model_name='meter',
            name='position',
            field=models.OneToOneField(blank=True, editable=False, null=True, on_delete=django.db.models.deletion.PROTECT, related_name='device', to='plant.position'),
        ),
        migrations.CreateModel(
            name='Installation',
            fields=[
                ('id', models.BigAutoField(auto_created=True, primary_key=True, serialize=False, verbose_name='ID')),
                ('since', models.DateField()),
                ('until', models.DateField(blank=True, null=True)),
                ('removal_reason', models.CharField(blank=True, max_length=200)),
                ('starting_point', models.JSONField(blank=True, default=dict)),
                ('device', models.ForeignKey(on_delete=django.db.models.deletion.PROTECT, related_name='installations', to='plant.meter')),
                ('installed_by', models.ForeignKey(blank=True, null=True, on_delete=django.db.models.deletion.PROTECT, related_name='+', to=settings.AUTH_USER_MODEL)),
                ('removed_by', models.ForeignKey(blank=True, null=True, on_delete=django.db.models.deletion.PROTECT, related_name='+', to=settings.AUTH_USER_MODEL)),
                ('position', models.ForeignKey(on_delete=django.db.models.deletion.PROTECT, related_name='installations', to='plant.position')),
            ],
            options={
                'ordering': ['position__tag', '-since', '-id'],
                'constraints': [models.UniqueConstraint(condition=models.Q(('until__isnull', True)), fields=('device',), name='one_open_installation_per_device'), models.UniqueConstraint(condition=models.Q(('until__isnull', True)), fields=('position',), name='one_open_installation_per_position')],
            },
        ),
    ]
