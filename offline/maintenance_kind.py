"""Maintenance records entered offline: the same form and rules as the tablet page online (maintenance.forms).

Photos do not travel in the tablet's queue (the queue keeps text fields only): an entry kept offline is sent
without them, and the entry page says so.
"""
from django.core.exceptions import ValidationError
from django.urls import reverse

from maintenance.forms import RecordForm
from maintenance.models import MaintenanceRecord
from offline.kinds import RecordKind, Refused


def form_errors(form):
    """Every message of a refused RecordForm, by the name of the input it belongs to."""
    return {field: [str(m) for m in messages] for field, messages in form.errors.items()}


class MaintenanceKind(RecordKind):
    model = MaintenanceRecord
    name = "maintenance"
    title = "Maintenance"
    permission = "maintenance.add_maintenancerecord"

    def client_rules(self, device):
        """Required fields with the server form's own messages, the date input and each field's label."""
        fields = RecordForm(device=device).fields
        return {
            "required": {name: str(field.error_messages["required"])
                         for name, field in fields.items() if field.required},
            "date_field": "performed_on",
            "labels": {name: str(field.label) for name, field in fields.items()},
            "messages": {"future_date": "The date of the work is in the future."},
        }

    def pages(self, user, devices):
        return [reverse("plant:position-maintain", args=[m.tag]) for m in devices if m.position_id]

    def receive(self, user, client_id, target, data):
        known = self.known(user, client_id)
        if known is not None:
            return known
        device = self.meter_for(target, data)
        form = RecordForm(data, device=device, user=user)  # no files: photos are not sent from the queue
        if not form.is_valid():
            raise Refused(form_errors(form))
        form.instance.client_id = client_id
        # the record's save() runs full_clean, so a lost race may also come back as a ValidationError
        return self.saved_once(user, client_id, form.save, lost_race=(ValidationError,))
