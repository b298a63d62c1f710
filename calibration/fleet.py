"""Recompute next due dates for many meters from bulk queries (no per-meter query).

Reads meters, signed events and their points in three queries, groups them with pandas, and applies
the pure functions of calibration/drift.py, calibration/intervals.py and calibration/due.py.
"""
from __future__ import annotations

import datetime as dt
import math
from collections import defaultdict

import pandas as pd
from django.conf import settings
from django.db import transaction

from calibration import drift, due, intervals
from calibration.models import CalibrationEvent, CalibrationPoint

UPDATED_FIELDS = ["last_calibrated", "next_due_date", "due_rationale", "drift_status", "drift_rate_per_year",
                  "predicted_crossing"]


def policy():
    return settings.CALIBRATION


def load_history(meters_qs):
    """Signed, not superseded events and their points for the meters, as two DataFrames."""
    events = pd.DataFrame.from_records(
        CalibrationEvent.objects.filter(meter__in=meters_qs, state=CalibrationEvent.State.SIGNED,
                                        superseded_by__isnull=True)
        .values("id", "meter_id", "performed_on", "adjusted", "decision_rule", "as_found_in_tolerance"),
        columns=["id", "meter_id", "performed_on", "adjusted", "decision_rule", "as_found_in_tolerance"],
    )
    points = pd.DataFrame.from_records(
        CalibrationPoint.objects.filter(event__meter__in=meters_qs, event__state=CalibrationEvent.State.SIGNED,
                                        event__superseded_by__isnull=True)
        .values("event_id", "kind", "nominal_pct", "error", "expanded_uncertainty"),
        columns=["event_id", "kind", "nominal_pct", "error", "expanded_uncertainty"],
    )
    return events, points


def interval_observations(events: pd.DataFrame):
    """(days since previous calibration, as-found in tolerance) per event after each meter's first."""
    if events.empty:
        return events.assign(elapsed=[])
    ordered = events.sort_values(["meter_id", "performed_on"])
    previous = ordered.groupby("meter_id")["performed_on"].shift()
    elapsed = (pd.to_datetime(ordered["performed_on"]) - pd.to_datetime(previous)).dt.days
    observed = ordered.assign(elapsed=elapsed).dropna(subset=["elapsed", "as_found_in_tolerance"])
    # a second calibration on the same day is a repeat, not an interval
    return observed[observed["elapsed"] > 0]


def point_histories(meter_events: pd.DataFrame, meter_points: pd.DataFrame):
    """{nominal: [HistoryEvent]} for one meter."""
    by_event = {row.id: row for row in meter_events.itertuples()}
    histories = defaultdict(dict)
    for row in meter_points.itertuples():
        histories[row.nominal_pct].setdefault(row.event_id, {})[row.kind] = row.error
    out = {}
    for nominal, per_event in histories.items():
        series = []
        for event_id, values in per_event.items():
            event = by_event[event_id]
            series.append(drift.HistoryEvent(day=float(event.performed_on.toordinal()),
                                             as_found=values.get("as_found"), as_left=values.get("as_left"),
                                             adjusted=bool(event.adjusted)))
        out[nominal] = sorted(series, key=lambda e: e.day)
    return out


def earliest_crossing(histories, mpe, guard):
    """The nominal point predicted to leave tolerance first, with its result; also the worst drift rate."""
    best = None
    worst_rate = None
    statuses = []
    for nominal, events in sorted(histories.items()):
        result = drift.predict_crossing(events, mpe=mpe, guard=guard)
        statuses.append(result.status)
        rate = result.drift.slope_per_day if result.drift else None
        if rate is not None and result.drift.significant and (worst_rate is None or abs(rate) > abs(worst_rate)):
            worst_rate = rate
        if result.day is not None and (best is None or result.day < best[1].day):
            best = (nominal, result)
    return best, worst_rate, statuses


def summarise_status(statuses):
    for status in ("out_of_tolerance", "drifting", "improving", "flat", "insufficient"):
        if status in statuses:
            return status
    return "insufficient"


def method_interval(meter, meter_obs: pd.DataFrame, group_obs: pd.DataFrame, cfg):
    if cfg["interval_method"] == "staircase":
        results = [bool(v) for v in meter_obs["as_found_in_tolerance"]]
        if not results:
            return None, ""
        steps = intervals.staircase_sequence(meter.base_interval_days, results, extend=cfg["staircase_extend"],
                                             shorten=cfg["staircase_shorten"], min_days=cfg["min_interval_days"],
                                             max_days=cfg["max_interval_days"])
        return steps[-1], (f"staircase (OIML D 10) over {len(results)} as-found results, "
                           f"×{cfg['staircase_extend']} in / ×{cfg['staircase_shorten']} out")
    if group_obs.empty:
        return None, ""
    days = group_obs["elapsed"].astype(float).tolist()
    in_tol = group_obs["as_found_in_tolerance"].astype(bool).tolist()
    chosen = intervals.recommended_interval(days, in_tol, target=cfg["reliability_target"],
                                            min_days=cfg["min_interval_days"], max_days=cfg["max_interval_days"])
    failures = len(in_tol) - sum(in_tol)
    return chosen, (f"reliability target {cfg['reliability_target']:.0%} (NCSL RP-1 exponential model) from "
                    f"{len(in_tol)} intervals of {meter.get_principle_display()} on {meter.fluid.phase}, "
                    f"{failures} out of tolerance")


def assess_meter(meter, meter_events, meter_points, group_obs, cfg, meter_obs=None):
    """Set the due-date fields on one meter object (no query)."""
    if meter_events.empty:
        meter.last_calibrated = meter.next_due_date = meter.predicted_crossing = None
        meter.drift_status, meter.drift_rate_per_year = "insufficient", None
        meter.due_rationale = {"winner": "none", "due": None, "bounded": "", "candidates": [],
                               "note": "No signed calibration yet: due now."}
        return meter
    last_row = meter_events.sort_values("performed_on").iloc[-1]
    last = last_row["performed_on"]
    guarded = last_row["decision_rule"] == "guarded"
    last_points = meter_points[(meter_points["event_id"] == last_row["id"])]
    guard = float(last_points["expanded_uncertainty"].fillna(0).mean()) if guarded and not last_points.empty else 0.0
    guard = min(guard, 0.9 * meter.mpe_value)
    best, worst_rate, statuses = earliest_crossing(point_histories(meter_events, meter_points), meter.mpe_value, guard)
    crossing = crossing_reason = None
    if best is not None:
        nominal, result = best
        crossing = dt.date.fromordinal(max(int(math.floor(result.day)), last.toordinal()))
        crossing_reason = f"drift at {nominal:g} % of range{' (guard band U)' if guarded else ''}:"
    if meter_obs is None:
        meter_obs = interval_observations(meter_events)
    chosen, method_reason = method_interval(meter, meter_obs, group_obs, cfg)
    decision = due.decide_due(last, meter.base_interval_days, meter.risk_factor(), crossing=crossing,
                              crossing_reason=crossing_reason or "", margin_days=cfg["drift_margin_days"],
                              method_interval_days=chosen, method_reason=method_reason,
                              min_days=cfg["min_interval_days"], max_days=cfg["max_interval_days"])
    meter.last_calibrated = last
    meter.next_due_date = decision.due
    meter.due_rationale = {**decision.rationale(), "drift_point_pct": best[0] if best else None}
    meter.drift_status = summarise_status(statuses)
    meter.drift_rate_per_year = worst_rate * 365.25 if worst_rate is not None else None
    meter.predicted_crossing = crossing
    return meter


def recompute_due_dates(meters_qs=None, progress=None, batch_size=1000):
    """Recompute and store the due-date fields of the meters (all when None); returns the count."""
    from plant.models import Meter

    whole_fleet = meters_qs is None
    meters_qs = Meter.objects.all() if whole_fleet else meters_qs
    cfg = policy()
    meters = list(meters_qs.select_related("fluid"))
    events, points = load_history(meters_qs)
    obs = interval_observations(events)
    kinds = {m.pk: (m.principle, m.fluid.phase) for m in meters}
    if whole_fleet:
        group_obs = {} if obs.empty else {key: frame for key, frame in obs.groupby(obs["meter_id"].map(kinds))}
    else:  # a group pools every meter of that principle and phase, not only those being recomputed
        group_obs = _group_observations_from_fleet(set(kinds.values()))
    events_by_meter = dict(tuple(events.groupby("meter_id"))) if not events.empty else {}
    point_event_meter = events.set_index("id")["meter_id"] if not events.empty else pd.Series(dtype=int)
    points_by_meter = dict(tuple(points.groupby(points["event_id"].map(point_event_meter)))) if not points.empty else {}
    obs_by_meter = dict(tuple(obs.groupby("meter_id"))) if not obs.empty else {}
    empty_events, empty_points = events.iloc[0:0], points.iloc[0:0]
    for meter in meters:
        assess_meter(meter, events_by_meter.get(meter.pk, empty_events), points_by_meter.get(meter.pk, empty_points),
                     group_obs.get(kinds[meter.pk], obs.iloc[0:0]), cfg, obs_by_meter.get(meter.pk, obs.iloc[0:0]))
        if progress:
            progress(1)
    with transaction.atomic():
        Meter.objects.bulk_update(meters, UPDATED_FIELDS, batch_size=batch_size)
    return len(meters)


def _group_observations_from_fleet(groups):
    """Interval observations of every meter in the given (principle, phase) groups."""
    from django.db.models import Q

    from plant.models import Meter

    condition = Q()
    for principle, phase in groups:
        condition |= Q(principle=principle, fluid__phase=phase)
    if not groups:
        return {}
    fleet = Meter.objects.filter(condition)
    events = pd.DataFrame.from_records(
        CalibrationEvent.objects.filter(meter__in=fleet, state=CalibrationEvent.State.SIGNED, superseded_by__isnull=True)
        .values("id", "meter_id", "meter__principle", "meter__fluid__phase", "performed_on", "as_found_in_tolerance"),
        columns=["id", "meter_id", "meter__principle", "meter__fluid__phase", "performed_on", "as_found_in_tolerance"],
    )
    obs = interval_observations(events)
    if obs.empty:
        return {}
    return {key: frame for key, frame in obs.groupby(["meter__principle", "meter__fluid__phase"])}
