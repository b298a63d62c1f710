"""Walk the record chain: recompute every sealed record's content hash and every link (ledger.chain.verify)."""
from django.core.management import BaseCommand, CommandError

from ledger import chain


class Command(BaseCommand):
    help = ("Check every signed calibration, countersignature and maintenance record against the record chain. "
            "Exits 0 when all is intact; otherwise names each record (kind and id) whose content no longer "
            "matches, each broken link, each signed record missing from the chain and each entry whose record is "
            "gone, and exits 1. Each run is recorded; the weekly review shows the last one if it failed.")

    def handle(self, *args, **options):
        problems, run = chain.verify_and_record()
        head = chain.head_summary()
        if not problems:
            self.stdout.write(self.style.SUCCESS(f"Record chain intact: {head}."))
            return
        for problem in problems:
            self.stderr.write(problem.text)
        raise CommandError(f"{len(problems)} problem(s) found, {run.records_named} record(s) named; {head}.",
                           returncode=1)
