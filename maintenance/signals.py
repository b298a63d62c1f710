"""The duty of a meter changes -> its derived maintenance tasks follow (maintenance/sync.py)."""
from django.db.models.signals import post_save
from django.dispatch import Signal, receiver

from plant.models import Fluid, Device, Position
from plant.signals import devices_registered

# Tasks were added or changed by hand (a reviewer's form, the demo builder): their stored due dates are stale.
# Keyword arguments: devices (device ids, or anything `meter_id__in` accepts; None: every device).
tasks_changed = Signal()


@receiver(post_save, sender=Device, dispatch_uid="maintenance-meter-tasks")
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

    for device in Device.objects.filter(position__fluid=instance).select_related("position"):
        device.position.fluid = instance
        sync_tasks(device)


@receiver(post_save, sender=Position, dispatch_uid="maintenance-position-tasks")
def position_saved(sender, instance, raw=False, created=False, **kwargs):
    """A position's duty changed (fluid, flows, diameter): the installed device's derived tasks follow."""
    if raw or created:
        return
    device = instance.installed_device()
    if device is not None:
        from maintenance.sync import sync_tasks

        device.position = instance
        sync_tasks(device)


@receiver(devices_registered, dispatch_uid="maintenance-registered-tasks")
def devices_registered_in_bulk(sender, devices, duty_findings, user=None, **kwargs):
    """New devices written in bulk (the register import): their derived tasks, written in bulk too."""
    from maintenance.sync import add_tasks_in_bulk

    add_tasks_in_bulk(devices, duty_findings, user)
