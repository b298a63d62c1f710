"""Import the register (meters or fluids) from a CSV or XLSX file: the import page's code path (plant/importer.py)
from the command line, for loading a plant's whole register."""
from pathlib import Path

from django.contrib.auth import get_user_model
from django.core.management import BaseCommand, CommandError

from plant import importer


def summary(plan) -> str:
    counts = plan.counts
    return f"{counts['create']} to create, {counts['update']} to change, {counts['unchanged']} unchanged"


class Command(BaseCommand):
    help = ("Check a register file (CSV or XLSX) and import it: all rows or none. With --dry-run it only checks. "
            "Each refused cell is printed on its own line and the command ends with a non-zero status.")

    def add_arguments(self, parser):
        parser.add_argument("file", help="a .csv or .xlsx file in the register's columns (as the export writes)")
        parser.add_argument("--kind", choices=list(importer.KINDS), default="meters",
                            help="which register the file holds (default meters; import fluids first)")
        parser.add_argument("--dry-run", action="store_true", help="check every row and save nothing")
        parser.add_argument("--user", help="username recorded in the audit trail as who made the import")

    def handle(self, *args, file, kind, dry_run, user, **options):
        path = Path(file)
        if not path.is_file():
            raise CommandError(f"No such file: {path}.")
        account = None
        if user:
            account = get_user_model().objects.filter(username=user).first()
            if account is None:
                raise CommandError(f"No user named {user}.")
        try:
            rows = importer.read_table(path.read_bytes(), path.name)
        except importer.ImportFileError as exc:
            raise CommandError(str(exc)) from exc

        if dry_run:
            plan = importer.plan_import(kind, rows)
        else:
            plan = importer.apply_rows(kind, rows, user=account)  # checked once, inside the transaction
        for warning in plan.warnings:
            self.stderr.write(self.style.WARNING(warning))
        if not plan.ok:
            for error in plan.errors:
                self.stderr.write(str(error))
            rows_refused = len({error.row_number for error in plan.errors})
            raise CommandError(f"{path.name}: {len(plan.errors)} problem(s) on {rows_refused} row(s); "
                               "nothing was saved.")
        for created in plan.creates:
            self.stdout.write(f"creates {created}")
        if dry_run:
            self.stdout.write(f"{path.name} ({kind}): {summary(plan)}. Dry run: nothing was saved.")
        else:
            counts = plan.counts
            self.stdout.write(self.style.SUCCESS(
                f"Imported {path.name} ({kind}): {counts['create']} created, {counts['update']} changed, "
                f"{counts['unchanged']} unchanged."))
