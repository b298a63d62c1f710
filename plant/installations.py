"""Installing, removing and swapping devices at positions: the only path that moves a device.

Each step checks everything first and writes in one transaction, so a refused swap changes nothing. The
device's calibration and maintenance history stay with the device; the position keeps its tag, duty and
installations; the duty history (DutyPeriod) of the device gains a period for each position it serves.
"""
from __future__ import annotations

import datetime as dt
from dataclasses import dataclass

from django.db import transaction

from plant import units
from plant import fit
from plant.models import Installation, Device, Position, flows_above_range
from plant.signals import device_moved, devices_changed

UNFIT_PERMISSION = "plant.accept_unfit_device"


class InstallationError(Exception):
    """A step refused, with {field: [messages]} for the form that asked for it."""

    def __init__(self, errors: dict[str, list[str]]):
        self.errors = errors
        super().__init__("; ".join(m for ms in errors.values() for m in ms))


class Removal:
    """Where a removed device goes."""
    SHELF = "spare"      # back to stores as a spare (it may be installed again)
    RETIRED = "removed"  # scrapped or returned: never installed again


POSITION_FIELDS = ("tag", "area", "fluid", "line_size", "internal_diameter_mm", "flow_units", "normal_flow",
                   "min_flow", "required_accuracy_pct")


# What an installation keeps as the device's starting point is read from its calibration records, which plant
# does not know: the calibration app registers the reader (CalibrationConfig.ready()).
_starting_point_readers = []


def read_starting_point_with(reader):
    """Register `reader(device) -> dict` (the as-left of the device's last calibration; {} when none)."""
    if reader not in _starting_point_readers:
        _starting_point_readers.append(reader)


def starting_point(device: Device) -> dict:
    """The device's state when it was put away, which is where its drift starts again at the new position (the
    registered reader's; empty when it was never calibrated or no reader is registered)."""
    for reader in _starting_point_readers:
        found = reader(device)
        if found:
            return found
    return {}


def refresh_due(device: Device):
    """The device's stored due date recomputed from its signed records (by whoever listens to devices_changed),
    so the check below trusts no stale value."""
    devices_changed.send(sender=Device, devices=Device.objects.filter(pk=device.pk))
    device.refresh_from_db(fields=["last_calibrated", "next_due_date", "due_rationale", "risk_severity"])


def install_problems(device: Device, position: Position, on_date: dt.date, *, new_device: bool = False,
                     replacing: bool = False) -> list[str]:
    """Why `device` may not be installed at `position` on `on_date` (empty = it may), from its stored due
    date (steps that install call refresh_due first)."""
    found = []
    if device.status == Device.Status.REMOVED:
        found.append(f"Device {device.device_label} is retired and cannot be installed again.")
    if device.position_id and device.position_id != position.pk:
        found.append(f"Device {device.device_label} is installed at {device.position.tag}; remove it there first.")
    occupant = None if replacing else position.installed_device()  # a swap takes the occupant out first
    if occupant is not None and occupant.pk != device.pk:
        found.append(f"{position.tag} already holds device {occupant.device_label}; swap or remove it first.")
    if not new_device:
        if device.last_calibrated is None:
            found.append(f"Device {device.device_label} has no signed calibration: calibrate it on the bench "
                         "before it is installed.")
        elif device.next_due_date is not None and device.next_due_date < on_date:
            found.append(f"Device {device.device_label} was due for calibration on {device.next_due_date:%d %b %Y}; "
                         "calibrate it on the bench before it is installed.")
    for message in flows_above_range(position, device).values():
        found.append(message)
    return found


def unfit_findings(device: Device, position: Position) -> list:
    """The principle×fluid findings that make `device` not fit for the duty at `position` (plant/risk.py's
    misapplied findings: an electromagnetic device on a non-conductive liquid, say)."""
    if not position.fluid_id:
        return []
    return [f for f in position.assess(device.principle, device.wetted_material) if f.severity == "misapplied"]


def unfit_sentence(device: Device, position: Position, findings) -> str:
    what = "; ".join(f"{f.title} ({f.reason.rstrip('.')})" for f in findings)
    return f"Device {device.device_label} is not fit for the duty at {position.tag}: {what}."


def _accept_unfit(device: Device, position: Position, user, unfit_reason: str) -> dict:
    """Refuse a device not fit for the duty unless a reviewer gives a written reason; the fields the installation
    keeps when one is given. A step run with no user (a management command) is the operator's: the reason is
    still required."""
    findings = unfit_findings(device, position)
    if not findings:
        return {}
    sentence = unfit_sentence(device, position, findings)
    reason = (unfit_reason or "").strip()
    if user is not None and not user.has_perm(UNFIT_PERMISSION):
        raise InstallationError({"unfit_reason": [
            f"{sentence} Only a reviewer may install it, with a written reason; choose another device or ask one."]})
    if not reason:
        raise InstallationError({"unfit_reason": [
            f"{sentence} To install it all the same, write why (the reason is kept with the installation)."]})
    return unfit_fields(findings, reason, user)


def unfit_fields(findings, reason: str, user) -> dict:
    """The fields an Installation keeps of a device installed though not fit for the duty."""
    return {"unfit_reason": reason, "unfit_findings": ", ".join(f.code for f in findings)[:300],
            "unfit_accepted_by": user}


def range_warnings(device: Device, position: Position) -> list[str]:
    """How the position's normal and minimum flow sit in the device's range (plant/fit.py), in the device's units."""
    high = device.range_max
    if not isinstance(high, (int, float)) or isinstance(high, bool) or not high > 0 or device.principle not in fit.USABLE_MINIMUM_FRACTION:
        return []
    return fit.range_fit_warnings(
        device.principle, high, position.flow_in(position.normal_flow, device.flow_units),
        position.flow_in(position.min_flow, device.flow_units), units_label=units.label_for(device.flow_units))


def fit_warnings(device: Device, position: Position) -> list[str]:
    """What the technician should know before fitting `device` at `position` (not refusals): units that differ,
    an MPE wider than the accuracy the position needs, flows low in its range, and the principle×fluid findings
    of high risk it would meet there (findings that make it unfit are refusals: unfit_findings)."""
    warnings = []
    if units.code_for(device.flow_units) != units.code_for(position.flow_units):
        warnings.append(f"The device reads in {units.label_for(device.flow_units)}; the position's flows are stated "
                        f"in {units.label_for(position.flow_units)}.")
    if (position.required_accuracy_pct and device.mpe_basis == Device.MpeBasis.PERCENT_READING
            and device.mpe_value > position.required_accuracy_pct):
        warnings.append(f"The device's MPE (±{device.mpe_value:g} % of reading) is wider than the ±"
                        f"{position.required_accuracy_pct:g} % {position.tag} requires.")
    findings = position.assess(device.principle, device.wetted_material)
    warnings += range_warnings(device, position)
    warnings += [f"{f.title}: {f.reason}" for f in findings if f.severity == "high"]
    return warnings


def _after_move(device: Device, on_date: dt.date, recompute=True):
    """The duty history follows the move; the listeners recompute the due date with the new duty's risk (the
    stored risk and the derived maintenance tasks followed at device.save())."""
    device.record_duty_change(on_date)
    device_moved.send(sender=Device, device=device, on_date=on_date, settle_due=recompute)


def _install(device, position, on_date, user, *, new_device=False, recompute=True,
             due_refreshed=False, unfit_reason="") -> Installation:
    if not new_device and not due_refreshed:
        refresh_due(device)
    problems = install_problems(device, position, on_date, new_device=new_device)
    if problems:
        raise InstallationError({"device": problems})
    accepted = _accept_unfit(device, position, user, unfit_reason)
    installation = Installation.objects.create(device=device, position=position, since=on_date, installed_by=user,
                                               starting_point=starting_point(device), **accepted)
    device.position = position
    device.status = Device.Status.IN_SERVICE
    device.save()
    _after_move(device, on_date, recompute)
    return installation


def _remove(device, on_date, user, reason, to=Removal.SHELF) -> Installation:
    if not device.position_id:
        raise InstallationError({"device": [f"Device {device.device_label} is not installed anywhere."]})
    if not (reason or "").strip():
        raise InstallationError({"reason": ["Say why the device is removed."]})
    installation = Installation.objects.select_for_update().get(device=device, until__isnull=True)
    if on_date < installation.since:
        raise InstallationError({"on_date": [f"The removal date cannot be before the device was installed "
                                             f"({installation.since:%d %b %Y})."]})
    installation.until, installation.removed_by, installation.removal_reason = on_date, user, reason.strip()
    installation.save()
    device.position = None
    device.status = to
    device.save()
    _after_move(device, on_date)
    return installation


def install(device: Device, position: Position, on_date: dt.date, user=None, *, new_device=False,
            recompute=True, unfit_reason="") -> Installation:
    with transaction.atomic():
        return _install(device, position, on_date, user, new_device=new_device, recompute=recompute,
                        unfit_reason=unfit_reason)


def remove(device: Device, on_date: dt.date, reason: str, user=None, to=Removal.SHELF) -> Installation:
    with transaction.atomic():
        return _remove(device, on_date, user, reason, to)


@dataclass
class SwapResult:
    removed: Installation
    installed: Installation


def swap(position: Position, new_device: Device, on_date: dt.date, reason: str, user=None,
         to=Removal.SHELF, *, brand_new=False, unfit_reason="") -> SwapResult:
    """Remove the device at `position` (reason; to the shelf or retired) and install `new_device` there."""
    with transaction.atomic():
        old = position.installed_device()
        if old is None:
            raise InstallationError({"device": [f"No device is installed at {position.tag}; install one instead."]})
        if old.pk == new_device.pk:
            raise InstallationError({"device": [f"Device {old.device_label} is already installed at {position.tag}."]})
        # refuse before anything is written (the removal below would otherwise free the position first)
        if not brand_new:
            refresh_due(new_device)
        problems = install_problems(new_device, position, on_date, new_device=brand_new, replacing=True)
        if problems:
            raise InstallationError({"device": problems})
        _accept_unfit(new_device, position, user, unfit_reason)
        removed = _remove(old, on_date, user, reason, to)
        position.refresh_from_db()
        installed = _install(new_device, position, on_date, user, new_device=brand_new, due_refreshed=True,
                             unfit_reason=unfit_reason)
        return SwapResult(removed, installed)


def commission(*, since: dt.date | None = None, user=None, unfit_reason="", **fields) -> Device:
    """A new position and a new device installed there at once (the register's "new meter"): position fields
    (tag, area, fluid, line size, flows...) go to the position, the rest to the device. A device not fit for the
    duty needs `unfit_reason`, as at a swap."""
    position_fields = {k: fields.pop(k) for k in POSITION_FIELDS if k in fields and k != "flow_units"}
    position_fields["flow_units"] = units.code_for(fields.get("flow_units", "m3/h"))
    with transaction.atomic():
        position = Position.objects.create(**position_fields)
        status = fields.pop("status", Device.Status.IN_SERVICE)
        device = Device.objects.create(**fields, status=Device.Status.SPARE)
        if status == Device.Status.IN_SERVICE:
            # a new device's due fields are set by the next recompute, as for any new register entry
            _install(device, position, since or position.area.site.today(), user, new_device=True, recompute=False,
                     unfit_reason=unfit_reason)
        else:
            device.status = status
            device.save()
        return device
