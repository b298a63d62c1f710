"""Recompute next due dates for many meters from bulk queries and vectorised math.

Three reads (meters, signed events, their points) whatever the fleet size; drift fits and crossing
predictions for every (meter, nominal point) series at once (scheduling/drift_fleet.py); the interval
method over each meter's own record, its staircase steps and binomial tests for all meters at once
(calibration/intervals.py); the pure due-date rule per meter (scheduling/due.py); one batched write. The
same rules as the per-meter path of the meter page, which the benchmark keeps as its baseline and the tests
compare with this one.
"""
from __future__ import annotations

import datetime as dt
import json
import math
from collections import defaultdict

import numpy as np
import pandas as pd
from django.conf import settings
from django.core.serializers.json import DjangoJSONEncoder
from django.db import connections, transaction
from django.db.models import Case, Q, Value, When

from calibration import decision as decision_rules
from calibration import conformity_fleet, drift, intervals
from calibration.models import CalibrationEvent, CalibrationPoint, in_force, observed_or_verdict
from plant import risk
from plant.models import DutyPeriod, Fluid, Device, Position
from scheduling import drift_fleet, due, reads
from scheduling.maintenance_due import recompute_maintenance

UPDATED_FIELDS = ["last_calibrated", "next_due_date", "due_rationale", "drift_status", "drift_rate_per_year",
                  "predicted_crossing", "last_in_tolerance", "risk_severity"]
# what the due-date rule reads of a meter (risk inputs, interval, MPE); the rest is not loaded
METER_INPUTS = ["id", "principle", "wetted_material", "flow_units", "mpe_value", "base_interval_days", "position"]
# what the risk rules read of the position a device serves
POSITION_INPUTS = ["id", "tag", "fluid", "internal_diameter_mm", "flow_units", "normal_flow", "min_flow"]
STATUS_PRECEDENCE = ("out_of_tolerance", "scatter", "drifting", "improving", "flat", "insufficient")


def policy():
    return settings.CALIBRATION


# Per-meter reads, for one meter's page and chart ---------------------------------------------------
def load_history(meters_qs):
    """Signed, not superseded events and their points for the meters, as two DataFrames."""
    events = pd.DataFrame.from_records(
        CalibrationEvent.objects.filter(in_force(), device__in=meters_qs, state=CalibrationEvent.State.SIGNED)
        .annotate(observed_in_tolerance=observed_or_verdict())
        .values("id", "device_id", "performed_on", "adjusted", "decision_rule", "as_found_in_tolerance",
                "observed_in_tolerance"),
        columns=["id", "device_id", "performed_on", "adjusted", "decision_rule", "as_found_in_tolerance",
                 "observed_in_tolerance"],
    )
    points = pd.DataFrame.from_records(
        CalibrationPoint.objects.filter(in_force("event"), event__device__in=meters_qs,
                                        event__state=CalibrationEvent.State.SIGNED)
        .order_by("event_id", "kind", "nominal_pct", "id")
        .values("event_id", "kind", "nominal_pct", "error", "expanded_uncertainty"),
        columns=["event_id", "kind", "nominal_pct", "error", "expanded_uncertainty"],
    )
    return events, points


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


def summarise_status(statuses):
    for status in STATUS_PRECEDENCE:
        if status in statuses:
            return status
    return "insufficient"


# Bulk reads ---------------------------------------------------------------------------------------
def _flag(values: pd.Series) -> pd.Series:
    """Nullable booleans (SQLite gives 0/1) as True/False/None."""
    flags = values.map({True: True, False: False, 1: True, 0: False}).astype(object)
    return flags.where(flags.notna(), None)


def signed_events(where: Q | None = None):
    """Signed, not superseded events (optionally narrowed by `where`): id, device_id, day (ordinal),
    adjusted, decision_rule, as_found_in_tolerance (the rule's verdict) and observed_in_tolerance (|E| <= MPE,
    what the interval methods count; issue 31)."""
    qs = CalibrationEvent.objects.filter(in_force(), state=CalibrationEvent.State.SIGNED)
    if where is not None:
        qs = qs.filter(where)
    qs = qs.annotate(observed_in_tolerance=observed_or_verdict())
    columns = ["id", "device_id", "performed_on", "adjusted", "decision_rule", "as_found_in_tolerance",
               "observed_in_tolerance"]
    events = reads.frame(qs.order_by(), columns)
    events["day"] = reads.ordinal_days(events["performed_on"])
    events["adjusted"] = events["adjusted"].astype(bool)
    events["as_found_in_tolerance"] = _flag(events["as_found_in_tolerance"])
    # a COALESCE has no declared type: SQLite hands back 0/1 integers, NULL as None
    observed = pd.to_numeric(events["observed_in_tolerance"], errors="coerce").to_numpy(dtype=float)
    events["observed_in_tolerance"] = pd.Series([None if v != v else v != 0 for v in observed.tolist()],
                                                index=events.index, dtype=object)
    return events.drop(columns="performed_on")


def recorded_points(where: Q | None = None):
    """Every recorded point (optionally narrowed by `where`): id, event_id, as_left (0/1), nominal_pct, error.

    Read without joining the events: the caller keeps the points of the events it holds, which is cheaper
    than filtering a million rows through a join.
    """
    qs = CalibrationPoint.objects.all() if where is None else CalibrationPoint.objects.filter(where)
    qs = qs.order_by().annotate(as_left=Case(When(kind=CalibrationPoint.Kind.AS_LEFT, then=Value(1)), default=Value(0)))
    points = reads.frame(qs, ["id", "event_id", "as_left", "nominal_pct", "error"], numeric=True)
    return points.astype({"id": np.int64, "event_id": np.int64, "as_left": np.int8})


def interval_observations(events: pd.DataFrame):
    """(days since previous calibration, as-found condition observed) per event after each meter's first: the
    interval methods count |E| <= MPE, not the rule's verdict (issue 31; NCSL RP-1 observed reliability)."""
    if events.empty:
        return events.assign(elapsed=pd.Series(dtype=float))
    ordered = events.sort_values(["device_id", "day", "id"], kind="stable")
    elapsed = ordered.groupby("device_id")["day"].diff()
    observed = ordered.assign(elapsed=elapsed).dropna(subset=["elapsed", "observed_in_tolerance"])
    # a second calibration on the same day is a repeat, not an interval
    return observed[observed["elapsed"] > 0]


# Vectorised drift ---------------------------------------------------------------------------------
def meter_drift(events: pd.DataFrame, points: pd.DataFrame, limits: pd.Series) -> pd.DataFrame:
    """Per meter: earliest crossing (day and nominal point), the drift rate shown and status.

    limits: the MPE per device_id (whatever the decision rule, issue 31). Ties go to the lower nominal point, as on the meter page.
    The point shown (shown_nominal; its rate rate_slope, rate_se: slope and standard uncertainty, per day) is
    the crossing's; with no crossing, the "scatter" point with the largest residual SD; else the point of the
    worst significant slope (worst_slope). scatter_sd: the largest residual SD among the meter's "scatter"
    series (NaN when none); a meter with one gets no crossing.
    """
    columns = ["crossing_day", "crossing_nominal", "worst_slope", "status", "rate_slope", "rate_se", "shown_nominal",
               "scatter_sd"]
    if points.empty:
        return pd.DataFrame(columns=columns, index=pd.Index([], name="device_id"))
    # one value per (event, kind, nominal): the last recorded wins, as in point_histories
    pts = points[points["event_id"].isin(events["id"])]
    if not pts["id"].is_monotonic_increasing:
        pts = pts.sort_values("id", kind="stable")
    pts = pts[~pts.duplicated(["event_id", "as_left", "nominal_pct"], keep="last")]
    found = pts[pts["as_left"] == 0][["event_id", "nominal_pct", "error"]].rename(columns={"error": "as_found"})
    left = pts[pts["as_left"] == 1][["event_id", "nominal_pct", "error"]].rename(columns={"error": "as_left"})
    wide = found.merge(left, on=["event_id", "nominal_pct"], how="outer")
    wide = wide.merge(events[["id", "device_id", "day", "adjusted"]], left_on="event_id", right_on="id", how="inner")
    series_codes = wide.groupby(["device_id", "nominal_pct"], sort=False).ngroup().to_numpy()
    rows = pd.DataFrame({"series": series_codes, "day": wide["day"].to_numpy(), "order": wide["event_id"].to_numpy(),
                         "as_found": wide["as_found"].to_numpy(), "as_left": wide["as_left"].to_numpy(),
                         "adjusted": wide["adjusted"].to_numpy()})
    key_frame = wide[["device_id", "nominal_pct"]].drop_duplicates().reset_index(drop=True)  # in ngroup order
    limit = pd.Series(limits.reindex(key_frame["device_id"]).to_numpy(), index=np.arange(len(key_frame)))
    result = drift_fleet.predict_crossings(rows, limit)
    result = pd.concat([key_frame, result.reset_index(drop=True)], axis=1)

    # one statement per meter: when any point's bound is already at the limit on the last calibration day
    # ("scatter too large to predict"), no crossing date is given from its other points either
    scattered = result[result["status"] == "scatter"]
    predicted = result[~result["device_id"].isin(scattered["device_id"])]
    crossing = (predicted.dropna(subset=["day"]).sort_values(["device_id", "day", "nominal_pct"], kind="stable")
                .drop_duplicates("device_id").set_index("device_id"))
    rated = result[result["significant"].astype(bool) & result["slope"].notna()]
    rated = rated.assign(magnitude=rated["slope"].abs())
    worst = (rated.sort_values(["device_id", "magnitude", "nominal_pct"], ascending=[True, False, True], kind="stable")
             .drop_duplicates("device_id").set_index("device_id"))
    rank = {status: i for i, status in enumerate(STATUS_PRECEDENCE)}
    status = result.assign(rank=result["status"].map(rank)).groupby("device_id")["rank"].min()
    summary = pd.DataFrame(index=status.index)
    summary["crossing_day"] = crossing["day"]
    summary["crossing_nominal"] = crossing["nominal_pct"]
    summary["worst_slope"] = worst["slope"]
    summary["status"] = status.map(dict(enumerate(STATUS_PRECEDENCE)))
    # the point the page shows (its rate and its chart): the crossing's, else the most scattered, else the worst
    widest = (scattered.sort_values(["device_id", "sd", "nominal_pct"], ascending=[True, False, True], kind="stable")
              .drop_duplicates("device_id").set_index("device_id"))
    shown = pd.concat([crossing, widest[~widest.index.isin(crossing.index)]])
    shown = pd.concat([shown, worst[~worst.index.isin(shown.index)]])
    summary["rate_slope"] = shown["slope"]
    summary["rate_se"] = shown["se"]
    summary["shown_nominal"] = shown["nominal_pct"]
    summary["scatter_sd"] = scattered.groupby("device_id")["sd"].max()
    return summary[columns]


def drift_rate_words(slope, se, nominal=None) -> str:
    """The drift rate shown on the page: per year, with its standard uncertainty."""
    at = f" at {nominal:g} % of range" if nominal is not None else ""
    return f"drift {slope * 365.25:+.3g} ± {se * 365.25:.2g} per year (standard uncertainty){at}"


# Interval method ----------------------------------------------------------------------------------
def method_settings(cfg) -> dict:
    """The keyword arguments of intervals.interval_by_method from the CALIBRATION policy."""
    return dict(target=cfg["reliability_target"],
                min_observations=cfg.get("reliability_min_observations", intervals.MIN_OBSERVATIONS),
                extend=cfg["staircase_extend"], shorten=cfg["staircase_shorten"],
                min_days=cfg["min_interval_days"], max_days=cfg["max_interval_days"])


def staircase_steps(device_ids, starts, in_tol, base_intervals, kw) -> np.ndarray:
    """intervals.staircase_sequence for every meter at once: one array op per step of the longest record.

    meter_ids/in_tol: the observations ordered by meter and date; starts: where each meter's rows begin.
    Returns the interval after each observation (aligned with the rows). The arithmetic is the scalar one
    (x × factor + 0.5, floored, held to the bounds) on whole-day floats, so the days are the same.
    """
    steps = np.zeros(device_ids.size, dtype=np.int64)
    if not device_ids.size:
        return steps
    counts = np.diff(np.r_[starts, device_ids.size])
    base = np.array([base_intervals.get(int(m), 1) for m in device_ids[starts]], dtype=float)
    current = np.clip(base, kw["min_days"], kw["max_days"])
    for k in range(int(counts.max())):
        active = counts > k
        rows = starts[active] + k
        factor = np.where(in_tol[rows], kw["extend"], kw["shorten"])
        current[active] = np.clip(np.floor(current[active] * factor + 0.5), kw["min_days"], kw["max_days"])
        steps[rows] = current[active]
    return steps


def method_by_meter(meter_obs: pd.DataFrame, base_intervals: dict, cfg) -> dict:
    """{device_id: intervals.MethodInterval} from each meter's own record, for every meter in base_intervals.

    The staircase steps and the binomial tails of the reliability test are computed for all meters at once;
    what remains per meter is the pure rule's choice and its sentence (intervals.interval_by_method, no query).
    """
    ordered = meter_obs.sort_values(["device_id", "day", "id"], kind="stable")
    device_ids = ordered["device_id"].to_numpy()
    elapsed = ordered["elapsed"].to_numpy(dtype=float)
    in_tol = ordered["observed_in_tolerance"].astype(bool).to_numpy()
    starts = np.flatnonzero(np.r_[True, device_ids[1:] != device_ids[:-1]]) if device_ids.size else np.empty(0, int)
    bounds = np.r_[starts, device_ids.size]
    counts = np.diff(bounds)
    passes = np.add.reduceat(in_tol.astype(np.int64), starts) if device_ids.size else np.empty(0, int)
    below, above = intervals.binomial_tails(counts, passes, cfg["reliability_target"])
    settings_kw = method_settings(cfg)
    method = cfg["interval_method"]
    steps = staircase_steps(device_ids, starts, in_tol, base_intervals, settings_kw)
    chosen = {}
    for k, start in enumerate(starts):
        device_id = int(device_ids[start])
        if device_id not in base_intervals:
            continue
        stop = bounds[k + 1]
        chosen[device_id] = intervals.interval_by_method(
            method, base_intervals[device_id], elapsed[start:stop].tolist(), in_tol[start:stop].tolist(),
            tails=(below[k], above[k]), steps=steps[start:stop].tolist(), **settings_kw)
    for device_id, base in base_intervals.items():
        if device_id not in chosen:
            chosen[device_id] = intervals.interval_by_method(method, base, [], [], **settings_kw)
    return chosen


def attach_duties(devices, meters_qs=None) -> dict:
    """Give each device the position it serves and that position's fluid from three reads, so the risk rules
    run without a query per device; returns {spare's id: the fluid of its last duty (or None)}, for
    Device.findings(last_fluid=...). A few fluid objects are shared rather than one copy per device."""
    fluids = Fluid.objects.in_bulk()
    positions = Position.objects.only(*POSITION_INPUTS)
    positions = positions.filter(device__isnull=False) if meters_qs is None else positions.filter(device__in=meters_qs)
    positions = {p.pk: p for p in positions}
    spare_ids = [m.pk for m in devices if m.position_id is None]
    last_fluid = {}
    if spare_ids:
        duties = DutyPeriod.objects.filter(device_id__in=spare_ids).order_by("device_id", "since", "id")
        last_fluid = dict(duties.values_list("device_id", "fluid_id"))  # the latest of each device wins
    spare_fluids = {}
    for device in devices:
        if device.position_id is not None:
            position = positions[device.position_id]
            position.fluid = fluids[position.fluid_id]
            device.position = position
        else:
            spare_fluids[device.pk] = fluids.get(last_fluid.get(device.pk))
    return spare_fluids


# The recompute ------------------------------------------------------------------------------------
def recompute_due_dates(meters_qs=None, progress=None, batch_size=1000):
    """Recompute and store the due-date fields of the meters (all when None); returns the count."""

    whole_fleet = meters_qs is None
    meters_qs = Device.objects.all() if whole_fleet else meters_qs
    cfg = policy()
    # the stored results are read too: a row whose recomputed fields equal them is not written again (on
    # PostgreSQL every rewrite leaves a dead row and index entries behind; issue 32)
    devices = list(meters_qs.only(*METER_INPUTS, *UPDATED_FIELDS).order_by("pk"))
    if not devices:
        return 0
    stored = {m.pk: stored_due_fields(m) for m in devices}
    spare_fluids = attach_duties(devices, None if whole_fleet else meters_qs)
    chosen_ids = None if whole_fleet else meters_qs.values("pk")
    # maintenance due dates first: what was found on the meters (fouling) is a finding of the calibration too
    evidence = recompute_maintenance(chosen_ids)
    events = signed_events(None if whole_fleet else Q(device__in=chosen_ids))
    points = recorded_points(None if whole_fleet else Q(event__device__in=chosen_ids))
    by_meter = {m.pk: m for m in devices}
    obs = interval_observations(events)

    last_events = events.sort_values(["device_id", "day", "id"], kind="stable").drop_duplicates("device_id", keep="last")
    last_events = last_events.set_index("device_id")
    # the drift crossing is predicted against the MPE, whatever the rule: the due date counts the observed
    # condition |E| <= MPE (issue 31), not the guard band of a rule
    mpe = pd.Series({pk: m.mpe_value for pk, m in by_meter.items()})
    drift_summary = meter_drift(events, points, mpe.reindex(last_events.index))

    methods = method_by_meter(obs, {pk: m.base_interval_days for pk, m in by_meter.items()}, cfg)

    last_by_meter = last_events[["id", "day", "decision_rule", "as_found_in_tolerance",
                                 "observed_in_tolerance"]].to_dict("index")
    drift_by_meter = drift_summary.to_dict("index")
    for device in devices:
        findings = device.findings(evidence.get(device.pk, []), spare_fluids.get(device.pk))
        if device.pk not in last_by_meter:
            _no_history(device, findings)
        else:
            _assess(device, last_by_meter[device.pk], drift_by_meter.get(device.pk), methods[device.pk], cfg, findings)
        if progress:
            progress(1)
    write_due_fields([m for m in devices if stored_due_fields(m) != stored[m.pk]], batch_size=batch_size)
    # conformity risk (JCGM 106): priors of like devices and each device's stored risk fields (issue 31)
    fluid_ids = {m.pk: m.position.fluid_id if m.position_id else getattr(spare_fluids.get(m.pk), "pk", None)
                 for m in devices}
    conformity_fleet.update_conformity(devices, events, points, last_events, whole_fleet, fluid_ids)
    return len(devices)


def _no_history(device, findings=None):
    """findings: the meter's, when the caller read them in bulk (else read here)."""
    device.risk_severity = risk.worst_severity(device.findings() if findings is None else findings)
    device.last_calibrated = device.next_due_date = device.predicted_crossing = device.last_in_tolerance = None
    device.drift_status, device.drift_rate_per_year = "insufficient", None
    device.due_rationale = {"winner": "none", "due": None, "bounded": "", "candidates": [],
                           "note": "No signed calibration yet: due now."}


def risk_reason(findings) -> str:
    """Which finding sets the risk factor, in words."""
    factor = risk.interval_factor(findings)
    deciding = [f for f in findings if f.interval_factor == factor]
    if not deciding:
        return ""
    return f"duty risk ({deciding[0].severity}: {deciding[0].reason.rstrip('.')})"


def stored_verdict(value):
    """A stored verdict as True/False/None (pandas may hand back NaN or numpy booleans)."""
    if value is None or (isinstance(value, float) and math.isnan(value)):
        return None
    return bool(value)


def found_out(value) -> bool:
    """The stored as-found verdict says out of tolerance (None or NaN: not judged)."""
    return value is not None and not pd.isna(value) and not bool(value)


def decide(device, last, last_failed, crossing, crossing_reason, method, cfg, crossing_kind="drifting",
           scatter_reason="", findings=None):
    """The pure due-date rule for one meter (scheduling/due.py), with the policy's settings (findings: the
    meter's, when the caller read them in bulk; else read here)."""
    findings = device.findings() if findings is None else findings
    if last_failed:
        method = intervals.first_calibration_found_out(method, shorten=cfg["staircase_shorten"],
                                                       min_days=cfg["min_interval_days"],
                                                       max_days=cfg["max_interval_days"])
    return due.decide_due(last, method.days, method.reason, risk_factor=risk.interval_factor(findings),
                          risk_reason=risk_reason(findings), crossing=crossing, crossing_reason=crossing_reason,
                          crossing_kind=crossing_kind, scatter_reason=scatter_reason,
                          margin_days=cfg["drift_margin_days"], last_failed=last_failed,
                          shorten_factor=cfg["staircase_shorten"], min_days=cfg["min_interval_days"],
                          max_days=cfg["max_interval_days"]), findings


def crossing_date(day: float, last: dt.date) -> dt.date:
    """The calendar day of a crossing (strictly after `last`): the day it falls in, at least the next day."""
    return max(dt.date.fromordinal(int(math.floor(day))), last + dt.timedelta(days=1))


def scatter_words(sd, mpe) -> str:
    """The residual SD beside the MPE, for the "scatter too large to predict" finding."""
    return f"residual SD {sd:.3g} beside the MPE {mpe:g}"


def _assess(device, last_event, summary, method, cfg, findings=None):
    last = dt.date.fromordinal(int(last_event["day"]))
    crossing = nominal = None
    crossing_reason = scatter_reason = ""
    rate = rate_se = shown = None
    status = "insufficient"
    if summary is not None:
        status = summary["status"]
        if not pd.isna(summary["rate_slope"]):
            rate, rate_se = float(summary["rate_slope"]), float(summary["rate_se"])
            shown = float(summary["shown_nominal"])
        if not pd.isna(summary["crossing_day"]):
            nominal = float(summary["crossing_nominal"])
            crossing = crossing_date(summary["crossing_day"], last)
            crossing_reason = f"{drift.bound_name(rate)} at {nominal:g} % of range, {drift_rate_words(rate, rate_se)}:"
        if status == "scatter" and not pd.isna(summary["scatter_sd"]):
            scatter_reason = scatter_words(float(summary["scatter_sd"]), device.mpe_value)
    # the due date and the drift status count the observed condition (|E| <= MPE); the stored verdict is the rule's
    # (issue 31: a point inside the MPE that a weak reference could not accept does not shorten the interval)
    observed = last_event["observed_in_tolerance"]
    decision, findings = decide(device, last, found_out(observed), crossing,
                                crossing_reason, method, cfg, crossing_kind=status, scatter_reason=scatter_reason,
                                findings=findings)
    device.risk_severity = risk.worst_severity(findings)
    device.last_in_tolerance = stored_verdict(last_event["as_found_in_tolerance"])
    # a last as-found beyond the MPE shows as "last found out of tolerance", whatever the fitted trend says
    status = decision_rules.drift_status_given_verdict(status, stored_verdict(observed))
    device.last_calibrated = last
    device.next_due_date = decision.due
    device.due_rationale = {**decision.rationale(), "drift_point_pct": nominal, "drift_chart_pct": shown,
                           "drift_status": status,
                           "drift_rate_u_per_year": float(f"{rate_se * 365.25:.6g}") if rate_se is not None else None}
    device.drift_status = status
    device.drift_rate_per_year = rate * 365.25 if rate is not None else None
    device.predicted_crossing = crossing


def stored_due_fields(device) -> tuple:
    """The recompute's fields of a meter as the database would hold them (the rationale as canonical JSON), to
    tell a changed row from an unchanged one."""
    return tuple(json.dumps(getattr(device, name), sort_keys=True, cls=DjangoJSONEncoder) if name == "due_rationale"
                 else getattr(device, name) for name in UPDATED_FIELDS)


def write_due_fields(devices, batch_size=1000):
    """Store the recomputed fields of the meters: batched statements, values prepared once per column."""
    connection = connections[Device.objects.db]
    fields = [Device._meta.get_field(name) for name in UPDATED_FIELDS]
    quote = connection.ops.quote_name
    table, pk = quote(Device._meta.db_table), quote(Device._meta.pk.column)
    with transaction.atomic(using=connection.alias), connection.cursor() as cursor:
        if connection.vendor == "postgresql":
            # one UPDATE ... FROM unnest(arrays) per batch: a round trip per batch rather than per meter
            columns = ", ".join(f"{quote(f.column)} = v.{quote(f.column)}"
                                + ("::jsonb" if f.get_internal_type() == "JSONField" else "") for f in fields)
            arrays = ", ".join(["%s::bigint[]"] + [("%s::text[]" if f.get_internal_type() == "JSONField"
                                                    else f"%s::{f.db_type(connection)}[]") for f in fields])
            names = ", ".join(["id"] + [quote(f.column) for f in fields])
            sql = f"UPDATE {table} AS m SET {columns} FROM unnest({arrays}) AS v({names}) WHERE m.{pk} = v.id"
            dump = {"JSONField": json.dumps}
            for start in range(0, len(devices), batch_size * 5):
                batch = devices[start:start + batch_size * 5]
                params = [[m.pk for m in batch]]
                for f in fields:
                    prepare = dump.get(f.get_internal_type(), lambda v: v)
                    params.append([prepare(getattr(m, f.attname)) for m in batch])
                cursor.execute(sql, params)
        else:
            # the adapters get_db_prep_save would reach, looked up once rather than per value
            ops = connection.ops
            adapt = {"DateField": ops.adapt_datefield_value, "JSONField": lambda v: ops.adapt_json_value(v, None)}
            preparers = [adapt.get(f.get_internal_type(), lambda v: v) for f in fields]
            sql = (f"UPDATE {table} SET " + ", ".join(f"{quote(f.column)} = %s" for f in fields)
                   + f" WHERE {pk} = %s")
            rows = [[prepare(getattr(m, f.attname)) for f, prepare in zip(fields, preparers)] + [m.pk]
                    for m in devices]
            for start in range(0, len(rows), batch_size):
                cursor.executemany(sql, rows[start:start + batch_size])
