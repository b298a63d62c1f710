"""What the register tells the apps above it, sent inside the transaction that wrote the change.

Plant knows nothing of calibration, maintenance or scheduling: it says what happened, and those apps connect
their receivers in their AppConfig.ready(). A receiver's writes belong to the sender's transaction, so a
refused step leaves nothing behind.
"""
from django.dispatch import Signal

# A device was installed, removed or swapped (plant/installations.py), its duty history already following.
# Keyword arguments: device (the Meter), on_date, settle_due (False when the caller leaves the stored due fields to
# a later recompute: a new device entered with others).
device_moved = Signal()

# The register changed under some devices (an import, a fluid's properties), or a step needs their stored due
# fields current before it judges them. Keyword arguments: devices (a Meter queryset; None: the whole fleet).
devices_changed = Signal()

# New devices were written in bulk, bypassing save() (the register import). Keyword arguments: devices (saved,
# with their positions and fluids attached), duty_findings (a list aligned with devices: each device's
# principle×fluid findings), user.
devices_registered = Signal()
