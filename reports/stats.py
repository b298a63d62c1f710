"""Fleet statistics: as-found in-tolerance rates, calibration intervals and drift, by principle and by fluid.

`fleet_frame` loads the register into two DataFrames (two queries, whatever the fleet size);
`fleet_statistics` is pure pandas; `in_tolerance_chart_svg` is a hand-written SVG bar chart.
"""
from __future__ import annotations

import datetime as dt
import math
from html import escape
from typing import Optional, Tuple

import pandas as pd

from calibration.models import CalibrationEvent, in_force, observed_or_verdict
from plant import localtime
from plant.models import Device

WINDOW_DAYS = 365

EVENT_COLUMNS = ["event_id", "device_id", "performed_on", "as_found_in_tolerance", "principle", "fluid", "site"]
METER_COLUMNS = ["device_id", "tag", "principle", "fluid", "site", "drift_rate_per_year"]

COLUMNS = [
    "group",
    "meters",
    "calibrations_12m",
    "in_tolerance_12m_pct",
    "calibrations_all",
    "in_tolerance_all_pct",
    "mean_interval_days",
    "mean_abs_drift_per_year",
]
COLUMN_LABELS = {
    "group": "Group",
    "meters": "Meters",
    "calibrations_12m": "Calibrations (12 months)",
    "in_tolerance_12m_pct": "As found in tolerance, 12 months (%)",
    "calibrations_all": "Calibrations (all)",
    "in_tolerance_all_pct": "As found in tolerance, all (%)",
    "mean_interval_days": "Mean interval between calibrations (days)",
    "mean_abs_drift_per_year": "Mean |drift| per year (error units)",
}

PRINCIPLE_NAMES = dict(Device.Principle.choices)


def fleet_frame(today: Optional[dt.date] = None, site=None) -> Tuple[pd.DataFrame, pd.DataFrame]:
    """(events_df, meters_df) for the fleet, optionally one site (a Site or its pk).

    events_df: signed, not superseded calibrations performed on or before `today`, with the meter's
    principle (display name), fluid name and site name. meters_df: every meter of the register (any
    status) with the same attributes and its drift_rate_per_year. Two queries.
    """
    today = today or localtime.today()  # the plant's date
    devices = Device.objects.all()
    if site is not None:
        devices = devices.filter(position__area__site=site)
    meter_rows = devices.order_by().values_list(
        "pk", "position__tag", "principle", "position__fluid__name", "position__area__site__name", "drift_rate_per_year"
    )
    meters_df = pd.DataFrame.from_records(list(meter_rows), columns=METER_COLUMNS)

    events = CalibrationEvent.objects.filter(
        in_force(), state=CalibrationEvent.State.SIGNED, performed_on__lte=today,
    )
    if site is not None:
        events = events.filter(device__position__area__site=site)
    # reliability statistics count the observed as-found condition (|E| <= MPE), not the rule's verdict (issue 31)
    event_rows = events.order_by().annotate(observed_in_tolerance=observed_or_verdict()).values_list(
        "pk", "device_id", "performed_on", "observed_in_tolerance",
        "device__principle", "device__position__fluid__name", "device__position__area__site__name",
    )
    events_df = pd.DataFrame.from_records(list(event_rows), columns=EVENT_COLUMNS)

    for frame in (meters_df, events_df):
        frame["principle"] = frame["principle"].map(lambda p: PRINCIPLE_NAMES.get(p, p))
    events_df["performed_on"] = pd.to_datetime(events_df["performed_on"])
    meters_df["drift_rate_per_year"] = pd.to_numeric(meters_df["drift_rate_per_year"], errors="coerce")
    return events_df, meters_df


def _group_table(events: pd.DataFrame, devices: pd.DataFrame, key: str, today: pd.Timestamp) -> pd.DataFrame:
    devices = devices[["device_id", key, "abs_drift"]]
    # the group of an event is its meter's (events of meters outside meters_df are left out)
    ev = events.drop(columns=[c for c in ("principle", "fluid", "site") if c in events.columns])
    ev = ev.merge(devices[["device_id", key]], on="device_id", how="inner")
    recent = ev[ev["performed_on"] > today - pd.Timedelta(days=WINDOW_DAYS)]

    ev = ev.sort_values(["device_id", "performed_on", "event_id"])
    ev["interval_days"] = ev.groupby("device_id")["performed_on"].diff().dt.days

    table = pd.DataFrame({
        "meters": devices.groupby(key)["device_id"].nunique(),
        "calibrations_12m": recent.groupby(key)["event_id"].count(),
        "in_tolerance_12m_pct": recent.groupby(key)["in_tol"].mean() * 100.0,
        "calibrations_all": ev.groupby(key)["event_id"].count(),
        "in_tolerance_all_pct": ev.groupby(key)["in_tol"].mean() * 100.0,
        "mean_interval_days": ev.groupby(key)["interval_days"].mean(),
        "mean_abs_drift_per_year": devices.groupby(key)["abs_drift"].mean(),
    })
    table = table.reindex(sorted(devices[key].dropna().unique(), key=str))
    for column in ("meters", "calibrations_12m", "calibrations_all"):
        table[column] = table[column].fillna(0).astype(int)
    for column in ("in_tolerance_12m_pct", "in_tolerance_all_pct", "mean_interval_days", "mean_abs_drift_per_year"):
        table[column] = table[column].astype(float)
    table.index.name = "group"
    return table.reset_index()[COLUMNS]


def fleet_statistics(events_df: pd.DataFrame, meters_df: pd.DataFrame, today) -> Tuple[pd.DataFrame, pd.DataFrame]:
    """(by_principle, by_fluid), one row per group with the columns in COLUMNS.

    - meters: meters of the group in meters_df;
    - calibrations_12m / in_tolerance_12m_pct: events with today - 365 days < performed_on <= today, and the
      share of them found in tolerance (events without an as-found verdict are left out of the rate);
    - calibrations_all / in_tolerance_all_pct: the same over every event up to today;
    - mean_interval_days: mean of the gaps between consecutive calibrations of each meter, pooled over the group;
    - mean_abs_drift_per_year: mean |Device.drift_rate_per_year| over the meters that have one.
    A rate or mean with nothing to average is NaN. Groups are sorted by name.
    """
    today = pd.Timestamp(today)
    events = events_df.copy()
    events["performed_on"] = pd.to_datetime(events["performed_on"])
    events = events[events["performed_on"] <= today]
    events["in_tol"] = events["as_found_in_tolerance"].map({True: 1.0, False: 0.0}).astype(float)
    devices = meters_df.copy()
    devices["abs_drift"] = pd.to_numeric(devices["drift_rate_per_year"], errors="coerce").abs()
    return _group_table(events, devices, "principle", today), _group_table(events, devices, "fluid", today)


# Chart --------------------------------------------------------------------------------------------
RECENT_COLOUR = "#0b6e69"
ALL_COLOUR = "#b45309"


def _pct(value) -> Optional[float]:
    try:
        value = float(value)
    except (TypeError, ValueError):
        return None
    return value if math.isfinite(value) else None


def in_tolerance_chart_svg(table: pd.DataFrame, width: int = 640) -> str:
    """Horizontal bar chart of the as-found in-tolerance rate (last 12 months and overall) per group."""
    rows = list(table[["group", "in_tolerance_12m_pct", "in_tolerance_all_pct"]].itertuples(index=False))
    left, right, top, bottom = 170, 48, 30, 30
    bar_h, gap, row_h = 9, 2, 30
    plot_w = width - left - right
    plot_h = max(1, len(rows)) * row_h
    height = top + plot_h + bottom

    def x(pct: float) -> float:
        return left + plot_w * max(0.0, min(100.0, pct)) / 100.0

    out = [
        f'<svg xmlns="http://www.w3.org/2000/svg" width="{width}" height="{height}" '
        f'viewBox="0 0 {width} {height}" font-family="DejaVu Sans, sans-serif" font-size="10" role="img" '
        f'aria-label="As-found in-tolerance rate by group: last 12 months and overall">',
    ]
    for tick in range(0, 101, 20):
        xx = x(tick)
        out.append(f'<line x1="{xx:.1f}" y1="{top}" x2="{xx:.1f}" y2="{top + plot_h}" stroke="#ddd" stroke-width="0.6"/>')
        out.append(f'<text x="{xx:.1f}" y="{top + plot_h + 14}" text-anchor="middle">{tick} %</text>')
    out.append(f'<text x="{left + plot_w / 2:.1f}" y="{top + plot_h + 27}" text-anchor="middle">'
               f'as found in tolerance (%)</text>')
    if not rows:
        out.append(f'<text x="{left + plot_w / 2:.1f}" y="{top + plot_h / 2 + 3:.1f}" text-anchor="middle">'
                   f'No signed calibrations</text>')
    for i, (group, recent, overall) in enumerate(rows):
        y0 = top + i * row_h + (row_h - 2 * bar_h - gap) / 2
        out.append(f'<text x="{left - 6}" y="{y0 + bar_h + 4:.1f}" text-anchor="end">{escape(str(group))}</text>')
        for j, (value, colour) in enumerate(((recent, RECENT_COLOUR), (overall, ALL_COLOUR))):
            yy = y0 + j * (bar_h + gap)
            value = _pct(value)
            if value is None:
                out.append(f'<text x="{left + 4}" y="{yy + bar_h - 1:.1f}" fill="#888">no data</text>')
                continue
            out.append(f'<rect x="{left}" y="{yy:.1f}" width="{x(value) - left:.1f}" height="{bar_h}" fill="{colour}"/>')
            out.append(f'<text x="{x(value) + 4:.1f}" y="{yy + bar_h - 1:.1f}">{value:.1f}</text>')
    out.append(f'<line x1="{left}" y1="{top}" x2="{left}" y2="{top + plot_h}" stroke="#555" stroke-width="0.8"/>')
    # legend
    ly = 14
    out.append(f'<rect x="{left}" y="{ly - 8}" width="10" height="8" fill="{RECENT_COLOUR}"/>')
    out.append(f'<text x="{left + 14}" y="{ly}">last 12 months</text>')
    out.append(f'<rect x="{left + 110}" y="{ly - 8}" width="10" height="8" fill="{ALL_COLOUR}"/>')
    out.append(f'<text x="{left + 124}" y="{ly}">all signed calibrations</text>')
    out.append("</svg>")
    return "".join(out)
