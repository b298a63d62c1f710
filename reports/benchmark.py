"""Measurements for `manage.py benchmark`, and the naive per-meter due-date recompute kept as its baseline.

The naive recompute is what one writes first: for each meter, query its history, fit each point's drift
with the scalar functions of calibration/drift.py, decide, and write that meter. It follows the same rules
as calibration/fleet.py (the tests hold both to the same due dates), so the ratio of the two times measures
the bulk reads and the vectorised math, nothing else. It lives here and is used nowhere else.
"""
from __future__ import annotations

import datetime as dt
import math
import statistics
import time

from django.db import connection
from django.test.utils import CaptureQueriesContext

from calibration import decision as decision_rules
from calibration import drift, due, fleet, intervals
from calibration.models import CalibrationEvent
from plant import risk


# The baseline -------------------------------------------------------------------------------------
def _naive_crossings(histories, mpe, guard):
    """Scalar drift.predict_crossing on each nominal point in turn: earliest crossing, worst rate, statuses."""
    best, worst_rate, statuses = None, None, []
    for nominal, events in sorted(histories.items()):
        result = drift.predict_crossing(events, mpe=mpe, guard=guard)
        statuses.append(result.status)
        rate = result.drift.slope_per_day if result.drift else None
        if rate is not None and result.drift.significant and (worst_rate is None or abs(rate) > abs(worst_rate)):
            worst_rate = rate
        if result.day is not None and (best is None or result.day < best[1].day):
            best = (nominal, result)
    return best, worst_rate, statuses


def _naive_observations(events):
    """[(elapsed days, in tolerance)] after the first calibration, from a meter's event rows."""
    ordered = sorted(events.itertuples(), key=lambda e: (e.performed_on, e.id))
    pairs = []
    for previous, current in zip(ordered, ordered[1:]):
        elapsed = (current.performed_on - previous.performed_on).days
        if elapsed > 0 and current.as_found_in_tolerance is not None:
            pairs.append((elapsed, bool(current.as_found_in_tolerance)))
    return pairs


def _naive_group_reliability(meter, cache, cfg):
    key = (meter.principle, meter.fluid.phase)
    if key not in cache:  # one query per group: even a naive version would not repeat it for every meter
        from plant.models import Meter

        group = Meter.objects.filter(principle=meter.principle, fluid__phase=meter.fluid.phase)
        events, _ = fleet.load_history(group)
        pairs = []
        for _, meter_events in events.groupby("meter_id"):
            pairs += _naive_observations(meter_events)
        if pairs:
            days = [p[0] for p in pairs]
            in_tol = [p[1] for p in pairs]
            chosen = intervals.recommended_interval(days, in_tol, target=cfg["reliability_target"],
                                                    min_days=cfg["min_interval_days"],
                                                    max_days=cfg["max_interval_days"])
            cache[key] = (chosen, len(pairs), len(pairs) - sum(in_tol))
        else:
            cache[key] = None
    return cache[key]


def naive_recompute(meters_qs=None, progress=None):
    """Recompute due dates one meter at a time: its own queries, scalar fits, its own UPDATE."""
    from plant.models import Meter

    cfg = fleet.policy()
    meters = list((meters_qs if meters_qs is not None else Meter.objects.all()).select_related("fluid").order_by("pk"))
    groups = {}
    for meter in meters:
        events, points = fleet.load_history(Meter.objects.filter(pk=meter.pk))
        if events.empty:
            fleet._no_history(meter)
        else:
            ordered = sorted(events.itertuples(), key=lambda e: (e.performed_on, e.id))
            last_row = ordered[-1]
            last = last_row.performed_on
            guarded = last_row.decision_rule == CalibrationEvent.Rule.GUARDED
            last_points = points[points["event_id"] == last_row.id]
            guard = float(last_points["expanded_uncertainty"].fillna(0).mean()) if guarded and not last_points.empty else 0.0
            guard = min(guard, 0.9 * meter.mpe_value)
            best, worst_rate, statuses = _naive_crossings(fleet.point_histories(events, points), meter.mpe_value, guard)
            crossing, crossing_reason = None, ""
            if best is not None:
                crossing = dt.date.fromordinal(max(int(math.floor(best[1].day)), last.toordinal()))
                crossing_reason = f"drift at {best[0]:g} % of range{' (guard band U)' if guarded else ''}:"
            crossing, nominal, crossing_reason = fleet.not_conforming_crossing(
                last, last_row.as_found_in_tolerance, crossing, best[0] if best else None, crossing_reason, guarded)
            if cfg["interval_method"] == "staircase":
                results = [ok for _, ok in _naive_observations(events)]
                stair = None
                if results:
                    steps = intervals.staircase_sequence(
                        meter.base_interval_days, results, extend=cfg["staircase_extend"],
                        shorten=cfg["staircase_shorten"], min_days=cfg["min_interval_days"],
                        max_days=cfg["max_interval_days"])
                    stair = (steps[-1], len(results))
                chosen, reason = fleet.method_reason(meter, stair, None, cfg)
            else:
                chosen, reason = fleet.method_reason(meter, None, _naive_group_reliability(meter, groups, cfg), cfg)
            decision = due.decide_due(last, meter.base_interval_days, meter.risk_factor(), crossing=crossing,
                                      crossing_reason=crossing_reason, margin_days=cfg["drift_margin_days"],
                                      method_interval_days=chosen, method_reason=reason,
                                      min_days=cfg["min_interval_days"], max_days=cfg["max_interval_days"])
            meter.last_calibrated = last
            meter.next_due_date = decision.due
            meter.due_rationale = {**decision.rationale(),
                                   "drift_point_pct": float(nominal) if nominal is not None else None}
            meter.drift_status = decision_rules.drift_status_given_verdict(
                fleet.summarise_status(statuses), fleet.stored_verdict(last_row.as_found_in_tolerance))
            meter.drift_rate_per_year = worst_rate * 365.25 if worst_rate is not None else None
            meter.predicted_crossing = crossing
            meter.last_in_tolerance = fleet.stored_verdict(last_row.as_found_in_tolerance)
            meter.risk_severity = risk.worst_severity(meter.findings())
        Meter.objects.filter(pk=meter.pk).update(**{name: getattr(meter, name) for name in fleet.UPDATED_FIELDS})
        if progress:
            progress(1)
    return len(meters)


# Measuring ----------------------------------------------------------------------------------------
def refresh_statistics():
    """What routine maintenance does after mass writes: reclaim dead rows (PostgreSQL) and refresh the
    planner's statistics, so page queries are planned for the data actually there."""
    with connection.cursor() as cursor:
        cursor.execute("VACUUM ANALYZE" if connection.vendor == "postgresql" else "ANALYZE")
def timed(function, repeat=1):
    """(median seconds over `repeat` runs, last result)."""
    times, result = [], None
    for _ in range(repeat):
        started = time.perf_counter()
        result = function()
        times.append(time.perf_counter() - started)
    return statistics.median(times), result


def page(client, url, repeat=5):
    """(median server seconds, query count of the last run, status) for one GET through the whole stack."""
    client.get(url)  # warm: templates compiled, connection open
    times = []
    for _ in range(repeat):
        with CaptureQueriesContext(connection) as queries:
            started = time.perf_counter()
            response = client.get(url)
            times.append(time.perf_counter() - started)
    return statistics.median(times), len(queries.captured_queries), response.status_code
