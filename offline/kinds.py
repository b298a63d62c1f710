"""The kinds of entry a tablet can keep while offline and send later, each with its handler.

A handler is an object with:

- ``name``: the kind, as the tablet stores it with each queued entry ("calibration", ...);
- ``title``: how the tablet's list names an entry of this kind ("Calibration");
- ``permission``: the permission needed to send entries of this kind;
- ``pages(user, meters)``: the URLs of the entry pages to keep on the tablet for these meters;
- ``receive(user, client_id, target, data)``: validate and save one entry, returning a ``Received``;
  raise ``Refused`` with messages by field name when the entry cannot be saved (nothing is saved then).
  The same ``client_id`` sent again must return the record made the first time (``created=False``): keep it
  in a unique field of the record, and answer an IntegrityError on it with the record already there.
- optionally ``client_rules(meter)``: the checks the tablet runs before keeping an entry (see rules.py).

In the entry form's template, inside the <form>: ``{% load offline %}{% offline_entry "<name>" meter %}``.

Register a handler once, from ``OfflineConfig.ready()`` (offline sits above the apps whose records it keeps):
``kinds.register(MyKind())``.
"""
from dataclasses import dataclass

from plant.entry_device import device_mismatch

_KINDS = {}


@dataclass
class Received:
    url: str  # where the saved record is shown (sign-off happens there, online)
    label: str
    created: bool  # False: this client id had been received before, nothing new was saved


class Refused(Exception):
    """The entry cannot be saved; ``errors`` maps the form's field names (or "__all__") to messages."""

    def __init__(self, errors):
        super().__init__("; ".join(m for ms in errors.values() for m in ms))
        self.errors = errors


class RecordKind:
    """What every kind shares: a record model with ``client_id``, ``created_by``, ``meter`` and ``performed_on``.

    A kind sets ``model`` and writes ``receive``; ``known``, ``meter_for`` and ``saved_once`` keep the rules
    of an id (returned once saved, never another account's) and of a lost race in one place.
    """
    model = None

    def find(self, client_id):
        return self.model.objects.select_related("device").filter(client_id=client_id).first()

    def _received(self, record, user, created):
        if record.created_by_id != user.pk:
            # an id is random; this only happens if a tablet reuses one. Say nothing about the other record.
            raise Refused({"__all__": ["This entry's id is already used by another record; discard it and "
                                       "enter it again."]})
        return Received(url=record.get_absolute_url(), label=f"{record.device} {record.performed_on}",
                        created=created)

    def known(self, user, client_id):
        """The Received of an id saved before, or None."""
        existing = self.find(client_id)
        return None if existing is None else self._received(existing, user, created=False)

    @staticmethod
    def meter_for(target, data=None):
        """The device installed at the position `target` (a tag). When the entry names the device it was
        written for (the entry page's hidden ``device``), a device swapped out since is refused: the readings
        belong to that device, not to the one installed now."""
        from plant.models import Device, Position

        device = (Device.objects.select_related("position__area__site", "position__fluid")
                 .filter(position__tag=target).first())
        if device is None:
            if not Position.objects.filter(tag=target).exists():
                raise Refused({"__all__": [f"Position {target} is not in the register any more."]})
            raise Refused({"__all__": [f"No device is installed at {target} now; the entry cannot be saved to it."]})
        written_for = device_mismatch(device, data)
        if written_for:
            raise Refused({"__all__": [written_for]})
        return device

    def saved_once(self, user, client_id, save, lost_race=()):
        """save() in its own transaction; when the same id arrived at the same moment from another send,
        which won (an IntegrityError, or one of ``lost_race``), return that send's record."""
        from django.db import IntegrityError, transaction

        try:
            with transaction.atomic():
                record = save()
        except (IntegrityError, *lost_race):
            existing = self.find(client_id)
            if existing is None:
                raise
            return self._received(existing, user, created=False)
        return self._received(record, user, created=True)


def register(handler):
    _KINDS[handler.name] = handler


def get(name):
    return _KINDS.get(name)


def all_kinds():
    return list(_KINDS.values())
