"""Calibration certificate (ISO/IEC 17025:2017 §7.8.2.1 and §7.8.4.1): context, HTML and PDF, and the same content
as a DCC (machine-readable XML, calibration/dcc.py).

Only signed (locked) events get a certificate. What it prints is the content frozen into the record at sign-off
(calibration/signed_content.py), nothing read from the register now, so a reprint after the device, position, site,
fluid or a reference standard was edited is the same certificate; it prints the SHA-256 of that content so two
copies can be compared. Printed from their own records, outside that content and its digest: the countersignature
(a later record) and, on a certificate replaced by a correction (§7.8.8), the notice naming the replacement.
"""
from __future__ import annotations

import datetime as dt
import io
import zipfile

from django.template.loader import render_to_string
from django.utils import timezone
from django.utils.safestring import mark_safe

from calibration.models import CalibrationEvent
from calibration.signed_content import DEFAULT_LAB, certificate_number, digest, laboratory  # noqa: F401
from reports import pdf_fetch
from reports.charts import drift_chart_svg


def certificate_filename(event) -> str:
    return f"{certificate_number(event)}.pdf"


def xml_filename(event) -> str:
    return f"{certificate_number(event)}.xml"


def countersignature_of(event):
    """{name, role, at} of the event's countersignature (a later record; the PDF prints it too), or None."""
    record = getattr(event, "countersignature", None)
    if record is None:
        return None
    return {"name": record.name, "role": record.role, "at": record.at.isoformat()}


def certificate_xml(event) -> bytes:
    """The DCC 3.2.0 XML of a signed event, from the same frozen content as its PDF (calibration/dcc.py); signed
    with the laboratory's key when one is configured (calibration/dcc_sign.py)."""
    if not event.is_signed:
        raise ValueError("Certificates are issued for signed calibrations only.")
    from django.conf import settings

    from calibration import dcc, dcc_sign

    xml = dcc.build(event.content_as_signed(), countersignature=countersignature_of(event),
                    country=settings.DCC_COUNTRY, software_release=software_release())
    return dcc_sign.sign_if_configured(xml)


def software_release() -> str:
    from importlib import metadata

    try:
        return metadata.version("quenby")
    except metadata.PackageNotFoundError:  # pragma: no cover - running from a checkout not installed
        return "unknown"


def signed_events():
    return CalibrationEvent.objects.filter(state=CalibrationEvent.State.SIGNED)


def drift_history(event):
    """(date, worst as-found, worst as-left) of the device's signed calibrations up to and including `event`, as
    they stood when it was signed (the rows its certificate prints)."""
    return [(dt.date.fromisoformat(day), found, left) for day, found, left in event.content_as_signed()["drift_history"]]


def replacement(event):
    """The signed correction that replaced `event` (ISO/IEC 17025 §7.8.8), or None (a draft replaces nothing)."""
    correction = getattr(event, "superseded_by", None)
    return correction if correction is not None and correction.is_signed else None


def issued_on(event) -> str:
    """The issue date of a signed event's certificate (YYYY-MM-DD): as frozen in it, else its signing date."""
    stored = (event.signed_content or {}).get("certificate", {}).get("issued_on")
    return stored or timezone.localdate(event.signed_at).isoformat()


def certificate_context(event) -> dict:
    if not event.is_signed:
        raise ValueError("Certificates are issued for signed calibrations only.")
    content = event.content_as_signed()
    history = drift_history(event)
    replaced_by = replacement(event)
    return {
        "c": content,
        "digest": digest(content),
        "stored": event.content_stored,
        "number": content["certificate"]["number"],
        "countersignature": getattr(event, "countersignature", None),
        "replaced_by": replaced_by,
        "replaced_by_number": certificate_number(replaced_by) if replaced_by else "",
        "replaced_on": issued_on(replaced_by) if replaced_by else "",
        "history": history,
        "drift_svg": mark_safe(drift_chart_svg(history, content["mpe"]["value"], width=640, height=230,
                                               unit=content["mpe"]["error_unit"])),
    }


def certificate_html(event) -> str:
    return render_to_string("reports/certificate.html", certificate_context(event))


def certificate_pdf(event) -> bytes:
    """The PDF; the renderer may load the project's static files and nothing else (reports/pdf_fetch.py)."""
    from weasyprint import HTML  # imported lazily: heavy, and only needed when printing

    return HTML(string=certificate_html(event), base_url=pdf_fetch.BASE_URL,
                url_fetcher=pdf_fetch.static_only).write_pdf()


def load_event(pk):
    """The signed event with what its certificate reads beside its own content, or None."""
    return (
        signed_events()
        .select_related("superseded_by", "countersignature")
        .filter(pk=pk)
        .first()
    )


def events_signed_between(start, end):
    """Signed events whose signing date (local time) lies in [start, end], oldest first."""
    return (
        signed_events()
        .filter(signed_at__date__gte=start, signed_at__date__lte=end)
        .select_related("superseded_by", "countersignature")
        .order_by("signed_at", "pk")
    )


def certificates_zip(events) -> bytes:
    buffer = io.BytesIO()
    with zipfile.ZipFile(buffer, "w", compression=zipfile.ZIP_DEFLATED) as archive:
        for event in events:
            archive.writestr(certificate_filename(event), certificate_pdf(event))
            archive.writestr(xml_filename(event), certificate_xml(event))
    return buffer.getvalue()
