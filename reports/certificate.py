"""Calibration certificate (ISO/IEC 17025:2017 §7.8.2.1 and §7.8.4.1): context, HTML and PDF.

Only signed (locked) events get a certificate. Everything shown is read from the stored, signed
records, and the drift history is limited to what was signed by the time this event was signed,
so rendering the same certificate again gives the same content.
"""
from __future__ import annotations

import io
import zipfile

from django.conf import settings
from django.db.models import Q
from django.template.loader import render_to_string
from django.utils import timezone
from django.utils.safestring import mark_safe

from calibration import decision, uncertainty
from calibration.errors import error_unit  # noqa: F401  (kept importable from here)
from calibration.models import CalibrationEvent, CalibrationPoint
from reports import pdf_fetch
from reports.charts import drift_chart_svg

DEFAULT_LAB = {
    "name": "Marrowfield Preserves — Instrument Workshop",
    "address": "Unit 4, Gullet Lane, Marrowfield (invented)",
}


def laboratory():
    lab = dict(DEFAULT_LAB)
    lab.update(getattr(settings, "CALIBRATION_LAB", None) or {})
    return lab


def certificate_number(event) -> str:
    return f"MWP-CAL-{event.performed_on:%Y}-{event.pk:06d}"


def certificate_filename(event) -> str:
    return f"{certificate_number(event)}.pdf"




def worst_error(points):
    """The signed error of largest magnitude, or None when there are no computed points."""
    errors = [p.error for p in points if p.error is not None]
    return max(errors, key=abs) if errors else None


def signed_events():
    return CalibrationEvent.objects.filter(state=CalibrationEvent.State.SIGNED)


def drift_history(event):
    """(date, worst as-found, worst as-left) of this meter's signed events up to and including `event`.

    Limited to events signed no later than `event` and performed no later than it; an event
    corrected by another signed in that window is replaced by its correction. With no as-left
    points (no adjustment) the as-left condition is the as-found one, as in CalibrationEvent.evaluate.
    """
    candidates = (
        signed_events()
        .filter(meter=event.meter, signed_at__lte=event.signed_at, performed_on__lte=event.performed_on)
        .prefetch_related("points")
        .select_related("superseded_by")
    )
    history = []
    for other in candidates:
        correction = getattr(other, "superseded_by", None)
        if (other.pk != event.pk and correction is not None and correction.is_signed
                and correction.signed_at <= event.signed_at):
            continue
        found = worst_error(other.points_of(CalibrationPoint.Kind.AS_FOUND))
        left = worst_error(other.points_of(CalibrationPoint.Kind.AS_LEFT))
        history.append((other.performed_on, found, found if left is None else left))
    history.sort(key=lambda row: row[0])
    return history


def nominal_list(points) -> str:
    """"10 %, 50 % and 100 %" for the points, in nominal order."""
    values = [f"{p.nominal_pct:g} %" for p in sorted(points, key=lambda p: p.nominal_pct)]
    return values[0] if len(values) == 1 else ", ".join(values[:-1]) + " and " + values[-1]


def conformity_notes(points) -> dict:
    """What the statement of conformity must say beyond the verdicts, from the stored point decisions.

    guard_band: the "as found"/"as left" labelled nominals of points in the guard band (conditional pass);
    conditional_fail: likewise for conditional fails; u_above_mpe: points whose U exceeds the MPE, where
    the guarded rule has no "pass" zone at all (ILAC-G8:09/2019 §4.2.2).
    """
    def labelled(selected):
        groups = []
        for kind, label in ((CalibrationPoint.Kind.AS_FOUND, "as found"), (CalibrationPoint.Kind.AS_LEFT, "as left")):
            chosen = [p for p in selected if p.kind == kind]
            if chosen:
                groups.append(f"{label} at {nominal_list(chosen)}")
        return "; ".join(groups)

    guard = [p for p in points if p.decision == decision.CONDITIONAL_PASS]
    cond_fail = [p for p in points if p.decision == decision.CONDITIONAL_FAIL]
    wide = [p for p in points if p.expanded_uncertainty is not None and p.mpe is not None
            and p.expanded_uncertainty > p.mpe]
    return {"guard_band": labelled(guard), "conditional_fail": labelled(cond_fail), "u_above_mpe": labelled(wide)}


def certificate_context(event) -> dict:
    if not event.is_signed:
        raise ValueError("Certificates are issued for signed calibrations only.")
    meter = event.meter
    points = list(event.points.all())
    for p in points:
        # the error was computed from the mean of the repeats when there are any (CalibrationPoint.compute)
        p.indicated_mean = p.indication_used
        tur = p.tur
        p.tur_shown = tur if tur is not None and tur != float("inf") else None
        p.low_tur = p.tur_warning is not None
    countersignature = getattr(event, "countersignature", None)
    as_found = [p for p in points if p.kind == CalibrationPoint.Kind.AS_FOUND]
    as_left = [p for p in points if p.kind == CalibrationPoint.Kind.AS_LEFT]
    history = drift_history(event)
    unit = error_unit(meter)
    left_or_found = as_left or as_found  # no as-left points: the as-left condition is the as-found one
    position = event.position  # where the device was installed when calibrated; None on the bench
    return {
        "event": event,
        "meter": meter,
        "position": position,
        "site": position.area.site if position else None,
        "area": position.area if position else None,
        "duty_fluid": served_on(meter, event.performed_on, position),
        "lab": laboratory(),
        "product": settings.PRODUCT_NAME,
        "number": certificate_number(event),
        "issued_on": timezone.localdate(event.signed_at),
        "as_found": as_found,
        "as_left": as_left,
        "error_unit": unit,
        "standards": event.standards_as_signed(),
        "low_tur": any(p.low_tur for p in points),
        "tur_limit": uncertainty.TUR_WARNING,
        "coverage_pct": uncertainty.COVERAGE_PROBABILITY * 100,
        "countersignature": countersignature,
        "as_found_verdict": decision.verdict_text(event.as_found_in_tolerance, [p.decision for p in as_found]),
        "as_left_verdict": decision.verdict_text(event.as_left_in_tolerance, [p.decision for p in left_or_found]),
        "guarded": event.decision_rule == CalibrationEvent.Rule.GUARDED,
        "notes": conformity_notes(points),
        "supersedes": event.supersedes,
        "supersedes_number": certificate_number(event.supersedes) if event.supersedes_id else "",
        "history": history,
        "drift_svg": mark_safe(drift_chart_svg(history, meter.mpe_value, width=640, height=230, unit=unit)),
    }


def served_on(meter, day, position):
    """The fluid the device served on `day` (its duty history), else the position's; None on the bench."""
    if position is None:
        return None
    duty = (meter.duties.filter(position=position, since__lte=day).filter(Q(until__isnull=True) | Q(until__gte=day))
            .select_related("fluid").first())
    return duty.fluid if duty else position.fluid


def certificate_html(event) -> str:
    return render_to_string("reports/certificate.html", certificate_context(event))


def certificate_pdf(event) -> bytes:
    """The PDF; the renderer may load the project's static files and nothing else (reports/pdf_fetch.py)."""
    from weasyprint import HTML  # imported lazily: heavy, and only needed when printing

    return HTML(string=certificate_html(event), base_url=pdf_fetch.BASE_URL,
                url_fetcher=pdf_fetch.static_only).write_pdf()


def load_event(pk):
    """The signed event with everything the certificate reads, or None."""
    return (
        signed_events()
        .select_related("meter", "position__area__site", "position__fluid", "supersedes", "countersignature")
        .filter(pk=pk)
        .first()
    )


def events_signed_between(start, end):
    """Signed events whose signing date (local time) lies in [start, end], oldest first."""
    return (
        signed_events()
        .filter(signed_at__date__gte=start, signed_at__date__lte=end)
        .select_related("meter", "position__area__site", "position__fluid", "supersedes")
        .order_by("signed_at", "pk")
    )


def certificates_zip(events) -> bytes:
    buffer = io.BytesIO()
    with zipfile.ZipFile(buffer, "w", compression=zipfile.ZIP_DEFLATED) as archive:
        for event in events:
            archive.writestr(certificate_filename(event), certificate_pdf(event))
    return buffer.getvalue()
