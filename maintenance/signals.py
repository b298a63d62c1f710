"""The duty of a meter changes -> its derived maintenance tasks follow (maintenance/sync.py)."""
from django.db.models.signals import post_save
from django.dispatch import receiver

from plant.models import Fluid, Meter


@receiver(post_save, sender=Meter, dispatch_uid="maintenance-meter-tasks")
def meter_saved(sender, instance, raw=False, **kwargs):
    if raw:  # loaddata: the fixture brings its own tasks
        return
    from maintenance.sync import sync_tasks

    sync_tasks(instance)


@receiver(post_save, sender=Fluid, dispatch_uid="maintenance-fluid-tasks")
def fluid_saved(sender, instance, raw=False, created=False, **kwargs):
    if raw or created:
        return
    from maintenance.sync import sync_tasks

    for meter in instance.meters.select_related("fluid"):
        meter.fluid = instance
        sync_tasks(meter)
