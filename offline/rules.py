"""The checks a tablet runs on a calibration entry before keeping it offline, taken from the server's own form.

The messages come from the form classes in calibration.forms (their fields' messages, and what the row form
answers for a few probing inputs), so the tablet says what the server would say, and a change of wording
or of the range rule there reaches the tablet without a second copy here. The server checks everything again
when the entry is sent.
"""
from calibration import plausibility
from plant import units
from calibration.forms import EventForm, PointRowForm, density_required_message
from calibration.models import ReferenceStandard

# Same wording as CalibrationEntry.is_valid (form-wide messages, not reachable by probing a single row).
AS_FOUND_REQUIRED = "Enter at least one as-found point."
AS_LEFT_REQUIRED = "An adjustment was made: enter the as-left points."


def _row_message(device, field, **values):
    row = {"nominal_pct": "50", "reference_value": "", "indicated_value": "", "repeats": "", "resolution": ""}
    row.update({k: str(v) for k, v in values.items()})
    form = PointRowForm(row, device=device)
    form.is_valid()
    messages = form.errors.get(field)
    return str(messages[0]) if messages else ""


def entry_rules(device):
    event_fields = EventForm().fields
    required = {
        f"ev-{name}": str(field.error_messages["required"])
        for name, field in event_fields.items() if field.required
    }
    inside = device.range_min + (device.range_max - device.range_min) / 2
    probe = device.range_max + (device.range_max - device.range_min) + 1
    outside = _row_message(device, "reference_value", reference_value=probe, indicated_value=probe)
    row = PointRowForm.base_fields
    # readings are entered in the ticked standard's units: the tablet checks the meter's range only when those
    # are the meter's, and asks for the density where the server would (CalibrationEntry._conversion)
    standard_units = {str(pk): code for pk, code in ReferenceStandard.offered_for(device).values_list("pk", "units")}
    density_required = {pk: density_required_message(code, device.flow_units) for pk, code in standard_units.items()
                        if "density" in units.conversion_needs(code, device.flow_units)}
    return {
        "required": required,
        "range_min": device.range_min,
        "range_max": device.range_max,
        "mpe_basis": device.mpe_basis,
        "grids": ["af", "al"],
        "meter_units": device.flow_units,
        "standard_units": standard_units,
        "messages": {
            "reference_invalid": str(row["reference_value"].error_messages["invalid"]),
            "indicated_invalid": str(row["indicated_value"].error_messages["invalid"]),
            "reference_required": _row_message(device, "reference_value", indicated_value=inside),
            "indicated_required": _row_message(device, "indicated_value", reference_value=inside),
            "negative": _row_message(device, "reference_value", reference_value=-1, indicated_value=1),
            # the value is put back in by the tablet
            "outside_range": outside.replace(f"{probe:g}", "{value}", 1),
            "zero_of_reading": (_row_message(device, "reference_value", reference_value=0, indicated_value=0)
                                if device.mpe_basis == "pct_reading" and device.range_min <= 0 else ""),
            "blank_as_found_row": "Enter the reference flow at this point, or tick Remove on its row.",
            "as_found_required": AS_FOUND_REQUIRED,
            "as_left_required": AS_LEFT_REQUIRED,
            "future_date": "The date of calibration is in the future.",
            "density_required": density_required,  # by standard id
            # the server's sentence names the distance and the MPE; the tablet holds the same rows in general words
            "check_value": ("Check this value: it is further from the reference than the meter could explain "
                            f"(more than {plausibility.MPE_FACTOR:g} times the MPE, or off its scale). If it is right "
                            "as typed, tick “Readings held are right as typed” and save again."),
        },
        "hold": {"mpe_factor": plausibility.MPE_FACTOR, "range_factor": plausibility.RANGE_FACTOR,
                 "mpe_value": device.mpe_value},
        # the physical bounds of the conditions, with the server's sentence ({value} put back in by the tablet)
        "conditions": {f"ev-{name}": [low, high, _bound_message(name, high)]
                       for name, (low, high, _unit, _why) in plausibility.CONDITION_BOUNDS.items()},
    }


def _bound_message(name, high):
    probe = high * 2 + 7
    return plausibility.condition_out_of_bounds(name, probe).replace(f"{probe:g}", "{value}", 1)
