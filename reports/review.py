"""The weekly review: which meters, standards and drafts need attention, each as a bucket.

Every bucket is built from a fixed number of queries, so the page costs the same for 40 or 20,000 meters.
"""
from __future__ import annotations

import datetime as dt
from dataclasses import dataclass

from functools import reduce
from operator import or_

from django.db.models import Count, F, Q

from calibration.models import CalibrationEvent, ReferenceStandard
from plant import localtime
from plant.models import Meter, Site

SEVERE, HIGH = "misapplied", "high"


@dataclass
class Bucket:
    key: str
    title: str
    rows: object  # queryset
    table_class: type
    count: int = 0


def registered(filters: dict):
    """In-service meters narrowed by the page's filters (site, area, principle, fluid)."""
    qs = Meter.objects.filter(status=Meter.Status.IN_SERVICE)
    lookups = {"site": "area__site", "area": "area", "principle": "principle", "fluid": "fluid"}
    for name, value in filters.items():
        if value not in (None, ""):
            qs = qs.filter(**{lookups[name]: value})
    return qs


def in_service(filters: dict):
    return registered(filters).select_related("area__site", "fluid")


def local_todays(filters: dict) -> dict:
    """Today's date where the meters are: {date: site ids}, or {date: None} when every site in scope agrees.

    One query (the sites' time zones). A site without a time zone uses the plant's TIME_ZONE setting.
    """
    sites = Site.objects.all()
    if filters.get("site") not in (None, ""):
        sites = sites.filter(pk=getattr(filters["site"], "pk", filters["site"]))
    if filters.get("area") not in (None, ""):
        sites = sites.filter(areas=filters["area"])
    zones: dict[str, list] = {}
    for pk, zone in sites.values_list("pk", "time_zone"):
        zones.setdefault(localtime.zone_name(zone), []).append(pk)
    by_date: dict[dt.date, list] = {}
    for zone, pks in zones.items():
        by_date.setdefault(localtime.today(zone), []).extend(pks)
    if len(by_date) <= 1:
        return {next(iter(by_date), None) or localtime.today(): None}
    return by_date


def _per_site(todays, condition):
    """condition(today) for each group of sites sharing today's date, OR-ed (one group: no site condition)."""
    if isinstance(todays, dt.date):
        todays = {todays: None}
    parts = [condition(day) if pks is None else Q(area__site__in=pks) & condition(day)
             for day, pks in todays.items()]
    return reduce(or_, parts)


def meter_conditions(today, days):
    """The meter lists of the review, each as a condition on the fields stored on the meter.

    ``today`` is a date, or {date: site ids} from :func:`local_todays` when the sites' dates differ.
    """
    return {
        "overdue": _per_site(today, lambda d: Q(next_due_date__lt=d)) | Q(next_due_date__isnull=True),
        "due": _per_site(today, lambda d: Q(next_due_date__gte=d, next_due_date__lte=d + dt.timedelta(days=days))),
        # predicted to leave tolerance before it is next due, or drifting significantly
        "drifting": (Q(predicted_crossing__isnull=False, next_due_date__isnull=False,
                       predicted_crossing__lt=F("next_due_date")) | Q(drift_status=Meter.DriftStatus.DRIFTING)),
        # the latest signed as-found was out of tolerance
        "failed": Q(last_in_tolerance=False),
        # misapplied meters and high-risk duties (principle×fluid rules)
        "risk": Q(risk_severity__in=[SEVERE, HIGH]),
    }


def standards_expiring(today, days):
    return ReferenceStandard.objects.filter(due_date__lte=today + dt.timedelta(days=days))


def unsigned_drafts(filters: dict):
    meters = in_service(filters)
    return CalibrationEvent.objects.filter(state=CalibrationEvent.State.DRAFT, meter__in=meters).select_related("meter")


def build(filters: dict, days: int = 14, today: dt.date | None = None):
    """The review's buckets with their counts: the meter lists are counted together in one query."""
    from reports import tables

    todays = {today: None} if today else local_todays(filters)
    meters = in_service(filters)
    conditions = meter_conditions(todays, days)
    counts = registered(filters).aggregate(**{key: Count("pk", filter=c) for key, c in conditions.items()})
    standards = standards_expiring(today or localtime.today(), days)  # the plant's date: standards serve all sites
    drafts = unsigned_drafts(filters)
    titles = {
        "overdue": ("Overdue", tables.OverdueTable),
        "due": (f"Due in the next {days} days", tables.DueTable),
        "drifting": ("Drifting", tables.DriftingTable),
        "failed": ("Last as-found out of tolerance", tables.FailedTable),
        "risk": ("Misapplied meters and high-risk duties", tables.RiskTable),
    }
    from maintenance.fleet import evidence_prefetch

    # the risk list names each meter's findings, the fouling finding from its maintenance records among them
    rows = {"risk": meters.prefetch_related(evidence_prefetch())}
    buckets = [Bucket(key, title, rows.get(key, meters).filter(conditions[key]), table, counts[key])
               for key, (title, table) in titles.items()]
    buckets.append(Bucket("standards", f"Reference standards expired or due within {days} days", standards,
                          tables.StandardTable, standards.count()))
    buckets.append(Bucket("drafts", "Draft calibrations not signed", drafts, tables.DraftTable, drafts.count()))
    from maintenance.review import buckets as maintenance_buckets

    buckets += maintenance_buckets(filters, days, today or localtime.today())  # the plant's date
    return buckets
