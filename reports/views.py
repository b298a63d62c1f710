"""Printed reports: calibration certificates (one PDF or its DCC XML, or a ZIP of those signed in a date range)."""
import datetime as dt
import re

from django.contrib.auth.decorators import permission_required
from django.http import Http404, HttpResponse, HttpResponseBadRequest

from calibration import dcc_sign
from reports import certificate


@permission_required("calibration.view_calibrationevent", raise_exception=True)
def certificate_pdf(request, pk):
    event = certificate.load_event(pk)
    if event is None:
        raise Http404("No signed calibration with this number; drafts have no certificate.")
    pdf = certificate.certificate_pdf(event)
    response = HttpResponse(pdf, content_type="application/pdf")
    response["Content-Disposition"] = f'inline; filename="{certificate.certificate_filename(event)}"'
    return response


@permission_required("calibration.view_calibrationevent", raise_exception=True)
def certificate_xml(request, pk):
    """The DCC (DCC 3.2.0 XML) of a signed calibration; a draft has none (404 saying so)."""
    event = certificate.load_event(pk)
    if event is None:
        raise Http404("No signed calibration with this number; drafts have no certificate.")
    try:
        xml = certificate.certificate_xml(event)
    except dcc_sign.SigningFailed as exc:  # the key or certificate configured cannot be read or used
        return HttpResponse(str(exc), status=503, content_type="text/plain; charset=utf-8")
    response = HttpResponse(xml, content_type="application/xml; charset=utf-8")
    response["Content-Disposition"] = f'attachment; filename="{certificate.xml_filename(event)}"'
    return response


ISO_DATE = re.compile(r"\d{4}-\d{2}-\d{2}")


def _date_param(request, name):
    raw = request.GET.get(name, "").strip()
    if not raw:
        raise ValueError(f"Missing '{name}' date: give start and end as YYYY-MM-DD, e.g. ?start=2026-01-01&end=2026-12-31.")
    try:
        if not ISO_DATE.fullmatch(raw):
            raise ValueError
        return dt.date.fromisoformat(raw)
    except ValueError:
        raise ValueError(f"'{name}' must be a real date written YYYY-MM-DD; got {raw!r}.") from None


@permission_required("calibration.view_calibrationevent", raise_exception=True)
def certificates_zip(request):
    try:
        start = _date_param(request, "start")
        end = _date_param(request, "end")
        if start > end:
            raise ValueError(f"'start' ({start}) is after 'end' ({end}).")
    except ValueError as exc:
        return HttpResponseBadRequest(str(exc), content_type="text/plain; charset=utf-8")
    events = certificate.events_signed_between(start, end)
    archive = certificate.certificates_zip(events)
    response = HttpResponse(archive, content_type="application/zip")
    response["Content-Disposition"] = f'attachment; filename="certificates_{start}_{end}.zip"'
    return response
