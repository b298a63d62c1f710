"""Findings about a device from what was found on it, supplied by the apps above plant.

Plant judges a device's risk from its duty; what technicians found on it (fouled again and again, say) is
known to the apps that keep those records. They register a source here from their AppConfig.ready() — a
function taking a device and returning findings (plant/risk.py `Finding`) — so plant asks without importing
them.
"""
_sources = []


def add_source(source):
    """Register `source(device) -> [Finding]` (once; registering again changes nothing)."""
    if source not in _sources:
        _sources.append(source)


def findings_of(device) -> list:
    found = []
    for source in _sources:
        found += source(device)
    return found
