"""The weekly review: which meters, standards and drafts need attention, each as a bucket.

Every bucket is built from a fixed number of queries, so the page costs the same for 40 or 20,000 meters.
"""
from __future__ import annotations

import datetime as dt
from dataclasses import dataclass

from django.db.models import F, OuterRef, Q, Subquery
from django.utils import timezone

from calibration.models import CalibrationEvent, ReferenceStandard
from plant.models import Meter


@dataclass
class Bucket:
    key: str
    title: str
    rows: object  # queryset or list
    table_class: type


def last_verdict_subquery():
    signed = CalibrationEvent.objects.filter(meter=OuterRef("pk"), state=CalibrationEvent.State.SIGNED,
                                             superseded_by__isnull=True).order_by("-performed_on", "-id")
    return Subquery(signed.values("as_found_in_tolerance")[:1])


def in_service(filters: dict):
    qs = Meter.objects.filter(status=Meter.Status.IN_SERVICE).select_related("area__site", "fluid")
    lookups = {"site": "area__site", "area": "area", "principle": "principle", "fluid": "fluid"}
    for name, value in filters.items():
        if value not in (None, ""):
            qs = qs.filter(**{lookups[name]: value})
    return qs


def overdue(meters, today):
    return meters.filter(Q(next_due_date__lt=today) | Q(next_due_date__isnull=True))


def due_soon(meters, today, days):
    return meters.filter(next_due_date__gte=today, next_due_date__lte=today + dt.timedelta(days=days))


def drifting(meters):
    return meters.filter(
        Q(predicted_crossing__isnull=False, next_due_date__isnull=False, predicted_crossing__lt=F("next_due_date"))
        | Q(drift_status="drifting")
    )


def last_out_of_tolerance(meters):
    return meters.annotate(last_in_tolerance=last_verdict_subquery()).filter(last_in_tolerance=False)


def risky(meters):
    """Misapplied meters and high-risk duties (principle×fluid rules; computed in Python, one query)."""
    rows = []
    for meter in meters:
        findings = [f for f in meter.findings() if f.severity in ("misapplied", "high")]
        if findings:
            worst = "misapplied" if any(f.severity == "misapplied" for f in findings) else "high"
            rows.append({"meter": meter, "tag": meter.tag, "principle": meter.get_principle_display(),
                         "fluid": meter.fluid.name, "area": meter.area.name, "severity": worst,
                         "codes": ", ".join(f.code for f in findings),
                         "reasons": " ".join(f.reason for f in findings)})
    return rows


def standards_expiring(today, days):
    return ReferenceStandard.objects.filter(due_date__lte=today + dt.timedelta(days=days))


def unsigned_drafts(filters: dict):
    meters = in_service(filters)
    return CalibrationEvent.objects.filter(state=CalibrationEvent.State.DRAFT, meter__in=meters).select_related("meter")


def build(filters: dict, days: int = 14, today: dt.date | None = None):
    from reports import tables

    today = today or timezone.localdate()
    meters = in_service(filters)
    return [
        Bucket("overdue", "Overdue", overdue(meters, today), tables.OverdueTable),
        Bucket("due", f"Due in the next {days} days", due_soon(meters, today, days), tables.DueTable),
        Bucket("drifting", "Drifting", drifting(meters), tables.DriftingTable),
        Bucket("failed", "Last as-found out of tolerance", last_out_of_tolerance(meters), tables.FailedTable),
        Bucket("risk", "Misapplied meters and high-risk duties", risky(meters), tables.RiskTable),
        Bucket("standards", f"Reference standards expired or due within {days} days", standards_expiring(today, days),
               tables.StandardTable),
        Bucket("drafts", "Draft calibrations not signed", unsigned_drafts(filters), tables.DraftTable),
    ]
