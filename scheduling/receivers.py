"""The engine listens: signing, moves, register changes and task edits send signals inside their transaction;
the due dates they touch are recomputed here, in that same transaction. No app below calls the engine."""
from django.dispatch import receiver

from calibration.models import CalibrationEvent
from ledger.signals import record_signed
from maintenance.models import MaintenanceRecord
from maintenance.signals import tasks_changed
from plant.models import Device
from plant.signals import device_moved, devices_changed
from scheduling import fleet, maintenance_due  # through the modules, so a test may replace the functions

# a signed maintenance record moves its task's due date and, through the fouling finding, the calibration's
DATED_RECORDS = (CalibrationEvent, MaintenanceRecord)


@receiver(record_signed, dispatch_uid="scheduling-record-signed")
def record_signed_(sender, record, **kwargs):
    if sender in DATED_RECORDS:
        # the calibration recompute refreshes the device's maintenance due dates first
        fleet.recompute_due_dates(Device.objects.filter(pk=record.device_id))


@receiver(device_moved, dispatch_uid="scheduling-device-moved")
def device_moved_(sender, device, settle_due=True, **kwargs):
    if settle_due:  # with the new duty's risk
        fleet.recompute_due_dates(Device.objects.filter(pk=device.pk))


@receiver(devices_changed, dispatch_uid="scheduling-devices-changed")
def devices_changed_(sender, devices, **kwargs):
    fleet.recompute_due_dates(devices)


@receiver(tasks_changed, dispatch_uid="scheduling-tasks-changed")
def tasks_changed_(sender, devices, **kwargs):
    maintenance_due.recompute_maintenance(devices)
