"""Build a large invented fleet with ten years of signed calibrations into the configured database."""
import time

from django.core.management import BaseCommand, CommandError
from django.db import connection
from tqdm import tqdm

from scheduling.fleet import recompute_due_dates
from scheduling.synthetic import FleetBuilder
from ledger import chain


class Command(BaseCommand):
    help = ("Build a synthetic fleet (fixed seed) of N meters with about 50 calibration points per meter over ten "
            "years, then compute every due date. Use an empty database: e.g. "
            "DATABASE_URL=sqlite:////tmp/fleet.sqlite3 python manage.py migrate && ... make_fleet --meters 20000")

    def add_arguments(self, parser):
        parser.add_argument("--meters", type=int, default=20000)
        parser.add_argument("--seed", type=int, default=20261202)

    def handle(self, *args, meters, seed, **options):
        if meters < 1:
            raise CommandError("--meters must be at least 1.")
        builder = FleetBuilder(meters, seed=seed)
        started = time.perf_counter()
        try:
            with tqdm(total=meters, unit="device", desc="history", file=self.stderr, disable=None) as bar:
                totals = builder.build(progress=bar.update)
        except ValueError as exc:
            raise CommandError(str(exc))
        built = time.perf_counter() - started
        with tqdm(total=meters, unit="device", desc="due dates", file=self.stderr, disable=None) as bar:
            recompute_due_dates(progress=bar.update)
        # the history is written in bulk, not signed one by one: its records are sealed in the chain now, with a
        # note saying so, so that `verify_records` holds on the synthetic fleet too
        sealed = chain.seal_unsealed("by make_fleet (the synthetic fleet is written in bulk, not signed one by one)")
        with connection.cursor() as cursor:  # planner statistics for the new rows
            cursor.execute("ANALYZE")
        self.stdout.write(self.style.SUCCESS(
            f"{totals['meters']} meters, {totals['events']} calibrations ({totals['drafts']} drafts), "
            f"{totals['points']} points, {totals['tasks']} maintenance tasks and {totals['maintenance']} maintenance "
            f"records written in {built:.0f} s; due dates computed; {sealed} signed records sealed in the record "
            "chain."))
