"""Calibrations entered offline: the same form and rules as the tablet page online (calibration.forms),
plus what only matters for an entry that waited on a tablet (the meter taken out of service meanwhile, a
signed calibration already on record for that meter and day)."""
from django.urls import reverse

from calibration.forms import CalibrationEntry
from calibration.models import CalibrationEvent
from offline.kinds import RecordKind, Refused
from offline.rules import entry_rules


def entry_errors(entry):
    """Every message of a refused CalibrationEntry, by the name of the input it belongs to."""
    errors = {}

    def add(name, messages):
        if messages:
            errors.setdefault(name, []).extend(str(m) for m in messages)

    add("__all__", entry.non_field_errors)
    forms = [entry.event_form]
    for grid in (entry.as_found, entry.as_left):
        add("__all__", grid.non_form_errors())
        forms.extend(grid.kept_forms())
    for form in forms:
        for field, messages in form.errors.items():
            add("__all__" if field == "__all__" else form.add_prefix(field), messages)
    return errors


class CalibrationKind(RecordKind):
    model = CalibrationEvent
    name = "calibration"
    title = "Calibration"
    permission = "calibration.add_calibrationevent"

    def client_rules(self, device):
        return entry_rules(device)

    def pages(self, user, devices):
        return [reverse("plant:position-calibrate", args=[m.tag]) for m in devices if m.position_id]

    def receive(self, user, client_id, target, data):
        known = self.known(user, client_id)
        if known is not None:
            return known
        device = self.meter_for(target, data)  # the device installed at the tag now (never a retired one)
        entry = CalibrationEntry(device, data, user=user)
        if not entry.is_valid():
            raise Refused(entry_errors(entry))
        performed_on = entry.event_form.cleaned_data["performed_on"]
        covering = CalibrationEvent.objects.filter(device=device, performed_on=performed_on,
                                                   state=CalibrationEvent.State.SIGNED).first()
        if covering is not None:
            raise Refused({entry.event_form.add_prefix("performed_on"): [
                f"A signed calibration of {device.tag} on {performed_on} is already on record "
                f"(calibration {covering.pk}); check the date, or discard this entry if it is the same work."]})
        entry.event_form.instance.client_id = client_id
        return self.saved_once(user, client_id, entry.save)
