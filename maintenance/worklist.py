"""The week's work list: calibrations and maintenance due by the end of a week, grouped by site and area in
walking order. `rows` reads (two queries); `group` and `week_of` are pure.

What is listed: every in-service meter whose calibration is due by the end of the week (overdue and never
calibrated included: they are still to do), and every active maintenance task due by then. Within a site the
areas follow their walking order (WalkOrder; areas without one come after, by name); within an area, by tag,
then calibration before maintenance (a meter pulled for calibration is cleaned at the same visit).
"""
from __future__ import annotations

import datetime as dt
from dataclasses import dataclass
from itertools import groupby

CALIBRATION, MAINTENANCE = "Calibration", "Maintenance"
NO_WALK_POSITION = 10 ** 6
WINNER_WORDS = {"risk": "interval for the duty's risk", "drift": "drift predicted to reach the MPE",
                "method": "interval from the calibration history"}


@dataclass(frozen=True)
class WorkItem:
    site: str
    area: str
    area_id: int
    walk: int
    tag: str
    principle: str
    fluid: str
    kind: str        # CALIBRATION | MAINTENANCE
    work: str
    due: dt.date | None  # None: never calibrated
    reason: str

    def overdue_days(self, today: dt.date) -> int:
        if self.due is None:
            return 0
        return max(0, (today - self.due).days)

    def when(self, today: dt.date) -> str:
        if self.due is None:
            return "never calibrated: due now"
        late = self.overdue_days(today)
        if late:
            return f"overdue {late} d (due {self.due.isoformat()})"
        return f"due {self.due:%a} {self.due.isoformat()}"


def week_of(day: dt.date) -> tuple[dt.date, dt.date]:
    """(Monday, Sunday) of the ISO week holding `day`."""
    monday = day - dt.timedelta(days=day.weekday())
    return monday, monday + dt.timedelta(days=6)


def order_key(item: WorkItem):
    return (item.site, item.walk, item.area, item.tag, item.kind != CALIBRATION, item.due or dt.date.min, item.work)


def group(items):
    """[(site, [(area, [items])])] in walking order."""
    ordered = sorted(items, key=order_key)
    out = []
    for site, by_site in groupby(ordered, key=lambda i: i.site):
        out.append((site, [(area, list(rows)) for (_, area), rows in
                           groupby(by_site, key=lambda i: (i.walk, i.area))]))
    return out


def rows(end: dt.date, site=None, area=None) -> list[WorkItem]:
    """Everything due by `end` on in-service meters, optionally of one site or area (two queries)."""
    from maintenance.models import MaintenanceTask
    from plant.models import Meter

    meters = Meter.objects.filter(status=Meter.Status.IN_SERVICE, position__isnull=False)
    if site is not None:
        meters = meters.filter(position__area__site=site)
    if area is not None:
        meters = meters.filter(position__area=area)
    principles = dict(Meter.Principle.choices)
    common = ["position__tag", "principle", "position__fluid__name", "position__area_id", "position__area__name",
              "position__area__site__name", "position__area__walk_order__position"]
    items = []
    from django.db.models import Q

    for (tag, principle, fluid, area_id, area_name, site_name, walk, due, rationale) in (
            meters.filter(Q(next_due_date__lte=end) | Q(next_due_date__isnull=True))
            .values_list(*common, "next_due_date", "due_rationale")):
        winner = (rationale or {}).get("winner", "")
        if due is None:
            reason = "never calibrated"
        elif winner in WINNER_WORDS:
            reason = f"calibration due: {WINNER_WORDS[winner]}"
        else:
            reason = "calibration due"
        items.append(WorkItem(site_name, area_name, area_id, walk if walk is not None else NO_WALK_POSITION, tag,
                              principles.get(principle, principle), fluid, CALIBRATION, "Calibrate (as-found, as-left)",
                              due, reason))
    tasks = MaintenanceTask.objects.filter(active=True, next_due_date__lte=end, meter__in=meters.values("pk"))
    for (tag, principle, fluid, area_id, area_name, site_name, walk, due, title, freq, last) in tasks.values_list(
            *[f"meter__{c}" for c in common], "next_due_date", "title", "frequency_days", "last_condition"):
        items.append(WorkItem(site_name, area_name, area_id, walk if walk is not None else NO_WALK_POSITION, tag,
                              principles.get(principle, principle), fluid, MAINTENANCE, title, due,
                              f"every {freq} d" + (f"; last found {last.replace('_', ' ')}" if last else
                                                   "; never done")))
    return sorted(items, key=order_key)
