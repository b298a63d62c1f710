"""Load a backup into an empty, migrated database, all or nothing."""
from django.core.management import BaseCommand, CommandError, call_command
from django.contrib.auth.models import Group
from django.db import transaction
from django.test.utils import override_settings

from calibration.models import CalibrationEvent
from plant.models import Fluid, Meter, Site


class Command(BaseCommand):
    help = "Restore a backup written by `manage.py backup` into an empty database (after `migrate`)."

    def add_arguments(self, parser):
        parser.add_argument("path")

    def handle(self, *args, path, **options):
        if Meter.objects.exists() or Fluid.objects.exists() or Site.objects.exists() or CalibrationEvent.objects.exists():
            raise CommandError("The database is not empty: restore only into a new, migrated database.")
        # The backup carries the audit trail itself; recording the restore's own writes (loaddata sets the
        # many-to-many links through the ORM) would add history rows that never happened.
        with transaction.atomic(), override_settings(SIMPLE_HISTORY_ENABLED=False):
            # the role groups made by migrate are replaced by the backed-up ones (same names, their own keys)
            Group.objects.all().delete()
            call_command("loaddata", path, verbosity=0)
        self.stdout.write(self.style.SUCCESS(f"Restored {Meter.objects.count()} meters and "
                                             f"{CalibrationEvent.objects.count()} calibrations from {path}"))
