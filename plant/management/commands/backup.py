"""Write every record, keeping primary keys, (register, calibrations incl. signed ones, history, accounts) to one JSON file."""
from django.core.management import BaseCommand, call_command

EXCLUDED = ["contenttypes", "auth.permission", "sessions", "admin.logentry"]


class Command(BaseCommand):
    help = "Back up the whole database to a JSON file (restore it with `manage.py restore FILE`)."

    def add_arguments(self, parser):
        parser.add_argument("path")

    def handle(self, *args, path, **options):
        call_command("dumpdata", natural_foreign=True, exclude=EXCLUDED, indent=1,
                     output=path, verbosity=0)
        self.stdout.write(self.style.SUCCESS(f"Backup written to {path}"))
