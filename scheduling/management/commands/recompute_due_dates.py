from django.core.management import BaseCommand
from tqdm import tqdm

from scheduling.fleet import recompute_due_dates
from plant.models import Device


class Command(BaseCommand):
    help = "Recompute every meter's next due date (risk, drift crossing, interval method) with a progress bar."

    def handle(self, *args, **options):
        total = Device.objects.count()
        with tqdm(total=total, unit="device", file=self.stderr, disable=None) as bar:
            count = recompute_due_dates(progress=bar.update)
        self.stdout.write(self.style.SUCCESS(f"Due dates recomputed for {count} meters."))
