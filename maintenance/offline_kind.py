"""Maintenance records entered offline: the same form and rules as the tablet page online (maintenance.forms).

Photos do not travel in the tablet's queue (the queue keeps text fields only): an entry kept offline is sent
without them, and the entry page says so.
"""
from django.core.exceptions import ValidationError
from django.db import IntegrityError, transaction
from django.urls import reverse

from maintenance.forms import RecordForm
from maintenance.models import MaintenanceRecord
from offline.kinds import Received, Refused
from plant.models import Meter


def form_errors(form):
    """Every message of a refused RecordForm, by the name of the input it belongs to."""
    return {field: [str(m) for m in messages] for field, messages in form.errors.items()}


class MaintenanceKind:
    name = "maintenance"
    title = "Maintenance"
    permission = "maintenance.add_maintenancerecord"

    def client_rules(self, meter):
        """Required fields with the server form's own messages, the date input and each field's label."""
        fields = RecordForm(meter=meter).fields
        return {
            "required": {name: str(field.error_messages["required"])
                         for name, field in fields.items() if field.required},
            "date_field": "performed_on",
            "labels": {name: str(field.label) for name, field in fields.items()},
            "messages": {"future_date": "The date of the work is in the future."},
        }

    def find(self, client_id):
        return MaintenanceRecord.objects.select_related("meter").filter(client_id=client_id).first()

    def pages(self, user, meters):
        return [reverse("plant:meter-maintain", args=[m.tag]) for m in meters]

    def _received(self, record, user, created):
        if record.created_by_id != user.pk:
            # an id is random; this only happens if a tablet reuses one. Say nothing about the other record.
            raise Refused({"__all__": ["This entry's id is already used by another record; discard it and "
                                       "enter it again."]})
        return Received(url=record.get_absolute_url(), label=f"{record.meter.tag} {record.performed_on}",
                        created=created)

    def receive(self, user, client_id, target, data):
        existing = self.find(client_id)
        if existing is not None:
            return self._received(existing, user, created=False)
        meter = Meter.objects.select_related("area__site", "fluid").filter(tag=target).first()
        if meter is None:
            raise Refused({"__all__": [f"Meter {target} is not in the register any more."]})
        form = RecordForm(data, meter=meter, user=user)  # no files: photos are not sent from the queue
        if not form.is_valid():
            raise Refused(form_errors(form))
        form.instance.client_id = client_id
        try:
            with transaction.atomic():
                record = form.save()
        except (IntegrityError, ValidationError):
            # the same id arrived at the same moment from another send, which won: return its record
            existing = self.find(client_id)
            if existing is None:
                raise
            return self._received(existing, user, created=False)
        return self._received(record, user, created=True)
