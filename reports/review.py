"""The weekly review: which meters, standards and drafts need attention, each as a bucket.

Every bucket is built from a fixed number of queries, so the page costs the same for 40 or 20,000 meters.
"""
from __future__ import annotations

import datetime as dt
from dataclasses import dataclass

from functools import reduce
from operator import or_

from django.db.models import Count, F, Q

from calibration.conformity_fleet import pfa_target
from calibration.models import CalibrationEvent, ReferenceStandard
from plant import localtime
from plant.models import Device, Position, Site

SEVERE, HIGH = "misapplied", "high"
#: conformance probability below which a point inside the MPE is listed (95 %, the coverage of U; common practice)
LOW_PC = 0.95


@dataclass
class Bucket:
    key: str
    title: str
    rows: object  # queryset
    table_class: type
    count: int = 0
    urgency: str = "For information"


DEVICE_LOOKUPS = {"site": "position__area__site", "area": "position__area", "principle": "principle",
                  "fluid": "position__fluid"}


def installed(filters: dict, via: str = "") -> Q:
    """Devices installed at positions, narrowed by the page's filters (site, area, principle, fluid).

    ``via`` is the path from the rows filtered to their device: "" for devices, "device__" for calibrations and
    maintenance tasks (joined, so the database need not list every installed device first)."""
    condition = Q(**{f"{via}status": Device.Status.IN_SERVICE, f"{via}position__isnull": False})
    for name, value in filters.items():
        if value not in (None, ""):
            condition &= Q(**{via + DEVICE_LOOKUPS[name]: value})
    return condition


def on_shelf(filters: dict, via: str = "") -> Q:
    """Spare devices (the principle filter applies; a spare has no site, area or fluid of its own)."""
    condition = Q(**{f"{via}position__isnull": True, f"{via}status": Device.Status.SPARE})
    if filters.get("principle") not in (None, ""):
        condition &= Q(**{f"{via}principle": filters["principle"]})
    return condition


def registered(filters: dict):
    """The installed devices in the page's scope."""
    return Device.objects.filter(installed(filters))


def in_service(filters: dict):
    # an installed device's tag is unique: ordering by it alone lets the page's ids come from the indexes
    return registered(filters).select_related("position__area__site", "position__fluid").order_by("position__tag")


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


def single_site(filters: dict) -> bool:
    """Whether the page's scope holds one site at most (a site or an area chosen, or a plant of one site): the
    review's tables then leave out the site column, the same in every row (the CSV keeps it). One query at most."""
    if any(filters.get(name) not in (None, "") for name in ("site", "area")):
        return True
    return Site.objects.count() <= 1


def _per_site(todays, condition):
    """condition(today) for each group of sites sharing today's date, OR-ed (one group: no site condition)."""
    if isinstance(todays, dt.date):
        todays = {todays: None}
    parts = [condition(day) if pks is None else Q(position__area__site__in=pks) & condition(day)
             for day, pks in todays.items()]
    return reduce(or_, parts)


def meter_conditions(today, days):
    """The meter lists of the review, each as a condition on the fields stored on the meter.

    ``today`` is a date, or {date: site ids} from :func:`local_todays` when the sites' dates differ.
    """
    return {
        "overdue": _per_site(today, lambda d: Q(next_due_date__lt=d)) | Q(next_due_date__isnull=True),
        "due": _per_site(today, lambda d: Q(next_due_date__gte=d, next_due_date__lte=d + dt.timedelta(days=days))),
        # predicted to leave tolerance before it is next due, drifting significantly, or scatter too large
        # to predict a crossing
        "drifting": (Q(predicted_crossing__isnull=False, next_due_date__isnull=False,
                       predicted_crossing__lt=F("next_due_date"))
                     | Q(drift_status__in=[Device.DriftStatus.DRIFTING, Device.DriftStatus.SCATTER])),
        # the latest signed as-found was out of tolerance
        "failed": Q(last_in_tolerance=False),
        # misapplied meters and high-risk duties (principle×fluid rules)
        "risk": Q(risk_severity__in=[SEVERE, HIGH]),
        # conformity risk of the last calibration (JCGM 106, calibration/conformity_fleet.py): accepted although the
        # rule applied leaves a PFA above the target; a point inside the MPE with p_c below 95 %
        "pfa_above": Q(last_in_tolerance=True, conformity_pfa__gt=pfa_target()),
        "low_pc": Q(conformity_min_pc__lt=LOW_PC),
    }


def standards_expiring(today, days):
    return ReferenceStandard.objects.filter(due_date__lte=today + dt.timedelta(days=days))


def spares(filters: dict):
    """Devices on the shelf in the page's scope."""
    return Device.objects.filter(on_shelf(filters))


def spares_overdue(filters: dict, today):
    """Spares past their due date or never calibrated: each must be calibrated on the bench before it is
    installed (plant.installations refuses them)."""
    return spares(filters).filter(Q(next_due_date__lt=today) | Q(next_due_date__isnull=True)).order_by(
        F("next_due_date").asc(nulls_first=True), "serial", "pk")


def vacant_positions(filters: dict):
    """Positions with no device installed: the process runs unmeasured there, or the tag is out of use."""
    qs = Position.objects.filter(device__isnull=True).select_related("area__site", "fluid")
    # a vacant position has no principle: the principle filter does not narrow this list
    lookups = {"site": "area__site", "area": "area", "fluid": "fluid"}
    for name, value in filters.items():
        if name in lookups and value not in (None, ""):
            qs = qs.filter(**{lookups[name]: value})
    return qs


def unsigned_drafts(filters: dict):
    # joined to the few drafts, not "meter in (every installed device)": the drafts index decides the plan
    wanted = installed(filters, via="device__")
    if not any(filters.get(k) not in (None, "") for k in ("site", "area", "fluid")):
        wanted |= on_shelf(filters, via="device__")
    return (CalibrationEvent.objects.filter(wanted, state=CalibrationEvent.State.DRAFT)
            .select_related("device__position"))


def page_of(queryset, bottom: int, top: int) -> list:
    """Rows bottom..top of a list, in its order: their ids first (from the indexes), then the rows themselves
    with what the queryset selects and prefetches. Two queries whatever the list's length."""
    if top <= bottom:
        return []
    ordering = list(queryset.query.order_by) or list(queryset.model._meta.ordering)
    if not {"pk", "-pk", "id", "-id"} & {o for o in ordering if isinstance(o, str)}:
        # a sort on a column with equal values (a site, a date) is made total, or pages could repeat or skip rows
        queryset = queryset.order_by(*ordering, "pk")
    ids = list(queryset.prefetch_related(None).values_list("pk", flat=True)[bottom:top])
    if not ids:
        return []
    by_id = {record.pk: record for record in queryset.order_by().filter(pk__in=ids)}
    return [by_id[pk] for pk in ids if pk in by_id]


def build(filters: dict, days: int = 14, today: dt.date | None = None):
    """The review's buckets with their counts: the meter lists are counted together in one query."""
    from reports import tables

    todays = {today: None} if today else local_todays(filters)
    devices = in_service(filters)
    conditions = meter_conditions(todays, days)
    counts = registered(filters).aggregate(**{key: Count("pk", filter=c) for key, c in conditions.items()})
    standards = standards_expiring(today or localtime.today(), days)  # the plant's date: standards serve all sites
    drafts = unsigned_drafts(filters)
    # in order of consequence: a device not fit for its duty measures wrongly today, an overdue one may, a failed one
    # did at its last calibration, one due soon or drifting will; the rest follow (see URGENCY)
    titles = {
        "risk": ("Not fit for duty: misapplied meters and high-risk duties", tables.RiskTable),
        "overdue": ("Positions whose installed device is overdue", tables.OverdueTable),
        "failed": ("Last as-found out of tolerance", tables.FailedTable),
        "due": (f"Due in the next {days} days", tables.DueTable),
        "drifting": ("Drifting, or scatter too large to predict", tables.DriftingTable),
        "pfa_above": (f"Accepted with PFA above target ({100 * pfa_target():.3g} %)", tables.ConformityRiskTable),
        "low_pc": (f"Points inside the MPE with p_c below {100 * LOW_PC:.0f} %: conformity not decided",
                   tables.ConformityRiskTable),
    }
    from scheduling.maintenance_due import evidence_prefetch

    # the risk list names each meter's findings, the fouling finding from its maintenance records among them
    # most urgent rows first: misapplied before high risk; the longest overdue (never calibrated first); the
    # earliest due. A column the reviewer sorts on replaces this order.
    rows = {"risk": devices.prefetch_related(evidence_prefetch()).order_by("-risk_severity", "position__tag"),
            "overdue": devices.order_by(F("next_due_date").asc(nulls_first=True), "position__tag"),
            "due": devices.order_by("next_due_date", "position__tag")}
    buckets = [Bucket(key, title, rows.get(key, devices).filter(conditions[key]), table, counts[key])
               for key, (title, table) in titles.items()]
    buckets.append(Bucket("standards", f"Reference standards expired or due within {days} days", standards,
                          tables.StandardTable, standards.count()))
    plant_today = today or localtime.today()
    shelf = spares_overdue(filters, plant_today)
    buckets.append(Bucket("spares", "Spares overdue: calibrate before installing", shelf, tables.SpareTable,
                          shelf.count()))
    vacant = vacant_positions(filters)
    buckets.append(Bucket("vacant", "Positions with no device installed", vacant, tables.VacantTable, vacant.count()))
    buckets.append(Bucket("drafts", "Draft calibrations not signed", drafts, tables.DraftTable, drafts.count()))
    from reports.maintenance_review import buckets as maintenance_buckets

    buckets += maintenance_buckets(filters, days, today or localtime.today())  # the plant's date
    for bucket in buckets:
        bucket.urgency = URGENCY.get(bucket.key, "For information")
    buckets.sort(key=lambda b: ORDER.index(b.key) if b.key in ORDER else len(ORDER))
    return buckets


#: the lists in order of consequence, the tiles in the same order (a list not named here goes last)
ORDER = ["risk", "overdue", "failed", "due", "drifting", "maint_overdue", "spares", "standards", "drafts",
         "pfa_above", "low_pc", "maint_due", "vacant"]


#: the severity of each list in words (shown on its tile and heading, so colour is never the only sign); the lists are
#: built in this order of consequence (common practice: act first where a reading is wrong now)
URGENCY = {
    "risk": "Act now", "overdue": "Act now", "failed": "Urgent", "due": "Plan", "drifting": "Watch",
    "maint_overdue": "Urgent", "spares": "Before use", "standards": "Plan", "maint_due": "Plan",
}
