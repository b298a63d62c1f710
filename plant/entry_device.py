"""An entry's readings belong to the device they were taken on: the entry pages carry that device (a hidden
``device`` field), and an entry arriving after the position's device was swapped is refused, online
(calibration's entry page) or sent from a tablet (offline kinds)."""
from plant.models import Device


def device_mismatch(device, data) -> str:
    """A message when the entry was written for another device than `meter` (swapped since), else ""."""
    written_for = (data or {}).get("device", "")
    if isinstance(written_for, list):
        written_for = written_for[0] if written_for else ""
    written_for = str(written_for).strip()
    if not written_for or written_for == str(device.pk):
        return ""
    other = Device.objects.filter(pk=written_for).first() if written_for.isdigit() else None
    named = other.device_label if other else f"device #{written_for}"
    return (f"This entry was written for {named}, but {device.tag} now holds {device.device_label} (the devices were "
            f"swapped). Nothing was saved: enter the readings against the device they were taken on.")

