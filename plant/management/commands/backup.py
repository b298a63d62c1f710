"""Write every record (keys kept; register, calibrations incl. signed ones, the record chain, history, accounts)
and every file the records keep under MEDIA_ROOT (maintenance photos) into one zip archive (plant.backups)."""
from django.core.management import BaseCommand

from plant import backups


class Command(BaseCommand):
    help = ("Back up the whole database and the files its records name (maintenance photos) to one zip archive; "
            "restore it with `manage.py restore FILE`.")

    def add_arguments(self, parser):
        parser.add_argument("path")

    def handle(self, *args, path, **options):
        size, files = backups.write_backup(path, warn=lambda text: self.stderr.write(self.style.WARNING(text)))
        self.stdout.write(self.style.SUCCESS(f"Backup written to {path}: {size / 1e6:.1f} MB of records and "
                                             f"{files} files."))
