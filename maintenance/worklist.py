"""The work list: calibrations and maintenance due within seven days from a chosen date (`span`), grouped by site
and area in walking order. `rows` reads (three queries, plus one per distinct kind of meter for the reference
standards); `group`, `span` and `week_of` are pure.

What is listed: every in-service meter whose calibration is due by the last day of the span (overdue and never
calibrated included: they are still to do), and every active maintenance task due by then. Each row carries the
device's serial; a calibration row names the reference standards the tablet form would offer for the meter
(`ReferenceStandard.offered_for`, in date on the first day). A meter with an unsigned calibration draft is not new
work: its row says "draft waiting for sign-off" and links to the draft. Within a site the
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
    serial: str = ""
    standards: tuple[str, ...] = ()  # identifications of the suitable reference standards (calibration rows)
    draft_id: int | None = None      # an unsigned calibration draft of the device: sign-off, not new work

    @property
    def draft_waiting(self) -> bool:
        return self.draft_id is not None

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


SPAN_DAYS = 7  # a list printed on any day covers at least a week from that day (not the rest of an ISO week)
DRAFT_WORK = "Draft waiting for sign-off"


def span(day: dt.date, days: int = SPAN_DAYS) -> tuple[dt.date, dt.date]:
    """(first, last) day of the work list starting on `day`: `days` calendar days, `day` included."""
    return day, day + dt.timedelta(days=days - 1)


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


def rows(end: dt.date, site=None, area=None, start: dt.date | None = None) -> list[WorkItem]:
    """Everything due by `end` on in-service meters, optionally of one site or area. Reference standards are
    those in date on `start` (default: no date check)."""
    from django.db.models import Q

    from calibration.models import CalibrationEvent, ReferenceStandard
    from maintenance.models import MaintenanceTask
    from plant.models import Device

    devices = Device.objects.filter(status=Device.Status.IN_SERVICE, position__isnull=False)
    if site is not None:
        devices = devices.filter(position__area__site=site)
    if area is not None:
        devices = devices.filter(position__area=area)
    principles = dict(Device.Principle.choices)
    items = []
    due_meters = list(devices.filter(Q(next_due_date__lte=end) | Q(next_due_date__isnull=True))
                      .select_related("position__fluid", "position__area__site", "position__area__walk_order"))
    drafts = dict(CalibrationEvent.objects.filter(device__in=[m.pk for m in due_meters],
                                                  state=CalibrationEvent.State.DRAFT)
                  .order_by("device_id", "pk").values_list("device_id", "pk"))  # the newest draft wins
    # the standards depend only on the fluid's phase, the units and the range: one query per distinct kind
    offered: dict[tuple, tuple[str, ...]] = {}
    for m in due_meters:
        position = m.position
        walk = getattr(getattr(position.area, "walk_order", None), "position", None)
        key = (position.fluid.phase if position.fluid else None, m.flow_units, m.range_min, m.range_max)
        if key not in offered:
            offered[key] = tuple(ReferenceStandard.offered_for(m, on_date=start)
                                 .order_by("identification").values_list("identification", flat=True))
        due = m.next_due_date
        winner = (m.due_rationale or {}).get("winner", "")
        if due is None:
            reason = "never calibrated"
        elif winner in WINNER_WORDS:
            reason = f"calibration due: {WINNER_WORDS[winner]}"
        else:
            reason = "calibration due"
        draft = drafts.get(m.pk)
        work = "Calibrate (as-found, as-left)"
        if draft is not None:
            work, reason = DRAFT_WORK, f"calibration entered, not signed yet ({reason})"
        items.append(WorkItem(position.area.site.name, position.area.name, position.area_id,
                              walk if walk is not None else NO_WALK_POSITION, position.tag,
                              principles.get(m.principle, m.principle), position.fluid.name if position.fluid else "",
                              CALIBRATION, work, due, reason, serial=m.serial, standards=offered[key],
                              draft_id=draft))
    common = ["position__tag", "principle", "position__fluid__name", "position__area_id", "position__area__name",
              "position__area__site__name", "position__area__walk_order__position", "serial"]
    tasks = MaintenanceTask.objects.filter(active=True, next_due_date__lte=end, device__in=devices.values("pk"))
    for (tag, principle, fluid, area_id, area_name, site_name, walk, serial, due, title, freq, last) in \
            tasks.values_list(*[f"device__{c}" for c in common], "next_due_date", "title", "frequency_days",
                              "last_condition"):
        items.append(WorkItem(site_name, area_name, area_id, walk if walk is not None else NO_WALK_POSITION, tag,
                              principles.get(principle, principle), fluid, MAINTENANCE, title, due,
                              f"every {freq} d" + (f"; last found {last.replace('_', ' ')}" if last else
                                                   "; never done"), serial=serial))
    return sorted(items, key=order_key)
