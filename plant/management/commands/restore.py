"""Load a backup into an empty, migrated database and an empty media folder, all or nothing (plant.backups)."""
from django.core.management import BaseCommand, CommandError

from plant import backups


class Command(BaseCommand):
    help = ("Restore a backup written by `manage.py backup` (or an older plain-JSON one) into a new, migrated "
            "database with an empty media folder. Every value is checked as the models check it and the record "
            "chain is verified; anything wrong refuses the whole backup, naming the file, record and field.")

    def add_arguments(self, parser):
        parser.add_argument("path")

    def handle(self, *args, path, **options):
        try:
            count = backups.restore(path)
        except backups.RestoreError as exc:
            raise CommandError(str(exc))
        self.stdout.write(self.style.SUCCESS(f"Restored {count} records from {path}; the record chain is intact."))
