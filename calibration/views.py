from django.core.exceptions import ValidationError
from django.shortcuts import get_object_or_404, redirect, render
from django.views.decorators.http import require_POST

from calibration import errors, uncertainty
from calibration.forms import CalibrationEntry
from calibration.models import CalibrationEvent, CalibrationPoint, SignedRecordError
from plant.models import Meter


def new_calibration(request, tag):
    meter = get_object_or_404(Meter.objects.select_related("area__site", "fluid"), tag=tag)
    entry = CalibrationEntry(meter, request.POST if request.method == "POST" else None)
    if request.method == "POST" and entry.is_valid():
        event = entry.save()
        return redirect(event)
    status = 400 if request.method == "POST" else 200
    return render(request, "calibration/entry.html", {"meter": meter, "entry": entry}, status=status)


def _result_rows(event, points, standard):
    """Each point with its test uncertainty ratio (MPE / U of the reference) and any TUR warning."""
    meter = event.meter
    span = meter.range_max - meter.range_min
    rows = []
    for p in points:
        tur = warning = None
        if standard is not None:
            mpe_flow = errors.mpe_in_flow_units(meter.mpe_value, meter.mpe_basis, p.reference_value, span)
            U_ref = 2 * uncertainty.reference_standard_u(p.reference_value, standard.expanded_uncertainty,
                                                          standard.uncertainty_basis)
            tur = uncertainty.test_uncertainty_ratio(mpe_flow, U_ref)
            warning = uncertainty.tur_warning(tur)
        rows.append((p, tur, warning))
    return rows


def event_detail(request, pk, sign_error=None):
    event = get_object_or_404(
        CalibrationEvent.objects.select_related("meter__area__site", "meter__fluid", "supersedes"), pk=pk
    )
    points = list(event.points.all())
    standards = list(event.reference_standards.all())
    rows = _result_rows(event, points, standards[0] if standards else None)
    return render(request, "calibration/event_detail.html", {
        "event": event,
        "as_found": [r for r in rows if r[0].kind == CalibrationPoint.Kind.AS_FOUND],
        "as_left": [r for r in rows if r[0].kind == CalibrationPoint.Kind.AS_LEFT],
        "standards": standards,
        "problems": [] if event.is_signed else event.problems(),
        "sign_error": sign_error,
    }, status=400 if sign_error else 200)


@require_POST
def sign_event(request, pk):
    event = get_object_or_404(CalibrationEvent, pk=pk)
    signer = request.POST.get("signed_by", "").strip()
    if not signer:
        return event_detail(request, pk, sign_error="Enter the signatory's name.")
    try:
        event.sign(by=signer, role=request.POST.get("signed_role", "").strip() or "Technician")
    except ValidationError as exc:
        return event_detail(request, pk, sign_error=" ".join(exc.messages))
    except SignedRecordError as exc:
        return event_detail(request, pk, sign_error=str(exc))
    return redirect(event)
