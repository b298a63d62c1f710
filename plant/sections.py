"""Sections that apps above plant add to a device's part of the position and device pages.

plant sits at the bottom of the dependency order, so its views cannot call the apps that know about
maintenance or drift charts. Those apps register here from their AppConfig.ready() instead, and the page
renders what is registered, in ``order``. A provider takes the device (a ``Device``) and returns the context
its template reads as ``section``; the template is included in the page's ``slot``:

- ``"due"``: inside the next-due-date card, under the due-date reasoning;
- ``"history"``: after the risk findings, before the device's calibrations.
"""
from __future__ import annotations

from dataclasses import dataclass
from typing import Any, Callable

SLOTS = ("due", "history")


@dataclass(frozen=True)
class Section:
    name: str
    order: int
    provider: Callable[[Any], Any]
    template: str
    slot: str = "history"


_SECTIONS: dict[str, Section] = {}


def register(name, order, provider, template, slot="history"):
    """Add (or replace, so that a ready() run twice adds nothing) the section called ``name``."""
    if slot not in SLOTS:
        raise ValueError(f"unknown slot {slot!r}: one of {', '.join(SLOTS)}")
    _SECTIONS[name] = Section(name, order, provider, template, slot)


def registered():
    return sorted(_SECTIONS.values(), key=lambda s: (s.order, s.name))


def render_context(device):
    """Each registered section with its context for this device, by slot, in order."""
    by_slot = {slot: [] for slot in SLOTS}
    for section in registered():
        by_slot[section.slot].append({"name": section.name, "template": section.template,
                                      "context": section.provider(device)})
    return by_slot
