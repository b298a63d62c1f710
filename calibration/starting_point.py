"""What an installation keeps of a device's calibration: the as-left of its last signed, not superseded
calibration (plant/installations.py asks for it through the reader registered in CalibrationConfig.ready())."""
from calibration.models import CalibrationEvent, CalibrationPoint, in_force


def as_left_of_last_calibration(device) -> dict:
    """The device's state when it was put away; empty when it was never calibrated."""
    event = (CalibrationEvent.objects.filter(in_force(), device=device, state=CalibrationEvent.State.SIGNED)
             .order_by("-performed_on", "-id").prefetch_related("points").first())
    if event is None:
        return {}
    as_left = event.points_of(CalibrationPoint.Kind.AS_LEFT) or event.points_of(CalibrationPoint.Kind.AS_FOUND)
    return {
        "event_id": event.pk, "performed_on": event.performed_on.isoformat(),
        "in_tolerance": event.as_left_in_tolerance,
        "points": [{"nominal_pct": p.nominal_pct, "error": p.error, "mpe": p.mpe} for p in as_left],
    }
