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

Register a handler once, from its app's ``AppConfig.ready()``: ``kinds.register(MyKind())``.
"""
from dataclasses import dataclass

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


def register(handler):
    _KINDS[handler.name] = handler


def get(name):
    return _KINDS.get(name)


def all_kinds():
    return list(_KINDS.values())
