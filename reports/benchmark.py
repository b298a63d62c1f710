"""Measurements for `manage.py benchmark`, and the naive per-meter due-date recompute kept as its baseline.

The naive recompute is what one writes first: for each meter, query its history, fit each point's drift
with the scalar functions of calibration/drift.py, decide, and write that meter. It follows the same rules
as scheduling/fleet.py (the tests hold both to the same due dates), so the ratio of the two times measures
the bulk reads and the vectorised math, nothing else. It lives here and is used nowhere else.
"""
from __future__ import annotations

import datetime as dt
import math
import os
import statistics
import time

from django.db import connection
from django.test.utils import CaptureQueriesContext

from calibration import decision as decision_rules
from calibration import drift, intervals
from plant import risk
from scheduling import fleet


# The baseline -------------------------------------------------------------------------------------
def _naive_crossings(histories, mpe, guard):
    """Scalar drift.predict_crossing on each nominal point in turn: earliest crossing, worst significant
    (slope, se), statuses and the largest residual SD of a "scatter" point."""
    best, worst, statuses, widest = None, None, [], None
    for nominal, events in sorted(histories.items()):
        result = drift.predict_crossing(events, mpe=mpe, guard=guard)
        statuses.append(result.status)
        rate = result.drift.slope_per_day if result.drift else None
        if rate is not None and result.drift.significant and (worst is None or abs(rate) > abs(worst[0])):
            worst = (rate, result.drift.se_slope, nominal)
        if result.status == "scatter":
            sd = result.drift.fit.residual_sd
            if widest is None or sd > widest[0]:
                widest = (sd, (rate, result.drift.se_slope, nominal))
        if result.day is not None and (best is None or result.day < best[1].day):
            best = (nominal, result)
    if widest is not None:
        best = None  # scatter too large to predict at one point: no crossing date from the others either
    # the point shown: the crossing's, else the most scattered, else the worst significant slope
    shown = ((best[1].drift.slope_per_day, best[1].drift.se_slope, best[0]) if best
             else widest[1] if widest else worst)
    return best, shown, statuses, (widest[0] if widest else None)


def _naive_observations(events):
    """[(elapsed days, in tolerance)] after the first calibration, from a meter's event rows."""
    ordered = sorted(events.itertuples(), key=lambda e: (e.performed_on, e.id))
    pairs = []
    for previous, current in zip(ordered, ordered[1:]):
        elapsed = (current.performed_on - previous.performed_on).days
        if elapsed > 0 and current.observed_in_tolerance is not None:
            pairs.append((elapsed, bool(current.observed_in_tolerance)))
    return pairs


def naive_recompute(meters_qs=None, progress=None):
    """Recompute due dates one meter at a time: its own queries, scalar fits, its own UPDATE."""
    from plant.models import Device

    cfg = fleet.policy()
    devices = list((meters_qs if meters_qs is not None else Device.objects.all()).select_related("position__fluid").order_by("pk"))
    for device in devices:
        events, points = fleet.load_history(Device.objects.filter(pk=device.pk))
        if events.empty:
            fleet._no_history(device)
        else:
            ordered = sorted(events.itertuples(), key=lambda e: (e.performed_on, e.id))
            last_row = ordered[-1]
            last = last_row.performed_on
            # the crossing against the MPE whatever the rule (issue 31: the due date counts |E| <= MPE)
            best, rate, statuses, scatter_sd = _naive_crossings(fleet.point_histories(events, points),
                                                                device.mpe_value, 0.0)
            crossing, crossing_reason, scatter_reason = None, "", ""
            if best is not None:
                crossing = fleet.crossing_date(best[1].day, last)
                crossing_reason = (f"{drift.bound_name(rate[0])} at {best[0]:g} % of range, "
                                   f"{fleet.drift_rate_words(rate[0], rate[1])}:")
            pairs = _naive_observations(events)
            method = intervals.interval_by_method(cfg["interval_method"], device.base_interval_days,
                                                  [p[0] for p in pairs], [p[1] for p in pairs],
                                                  **fleet.method_settings(cfg))
            device.drift_status = fleet.summarise_status(statuses)
            if device.drift_status == "scatter" and scatter_sd is not None:
                scatter_reason = fleet.scatter_words(scatter_sd, device.mpe_value)
            decision, _ = fleet.decide(device, last, fleet.found_out(last_row.observed_in_tolerance), crossing,
                                       crossing_reason, method, cfg, crossing_kind=device.drift_status,
                                       scatter_reason=scatter_reason)
            device.last_calibrated = last
            device.next_due_date = decision.due
            device.drift_status = decision_rules.drift_status_given_verdict(
                device.drift_status, fleet.stored_verdict(last_row.observed_in_tolerance))
            device.due_rationale = {**decision.rationale(), "drift_point_pct": float(best[0]) if best else None,
                                   "drift_chart_pct": float(rate[2]) if rate is not None else None,
                                   "drift_status": device.drift_status,
                                   "drift_rate_u_per_year": float(f"{rate[1] * 365.25:.6g}") if rate is not None else None}
            device.drift_rate_per_year = rate[0] * 365.25 if rate is not None else None
            device.predicted_crossing = crossing
            device.last_in_tolerance = fleet.stored_verdict(last_row.as_found_in_tolerance)
            device.risk_severity = risk.worst_severity(device.findings())
        Device.objects.filter(pk=device.pk).update(**{name: getattr(device, name) for name in fleet.UPDATED_FIELDS})
        if progress:
            progress(1)
    return len(devices)


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


def timed_with_part(function, module, name, repeat=1):
    """(median seconds of `function`, median seconds spent in `module.name` during those runs): the part is timed
    from inside the same runs (the attribute is wrapped for the duration), so the two figures are comparable."""
    original = getattr(module, name)
    spent = []

    def wrapped(*args, **kwargs):
        started = time.perf_counter()
        try:
            return original(*args, **kwargs)
        finally:
            spent.append(time.perf_counter() - started)

    setattr(module, name, wrapped)
    try:
        total, _ = timed(function, repeat=repeat)
    finally:
        setattr(module, name, original)
    return total, (statistics.median(spent) if spent else 0.0)


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


# The register import ------------------------------------------------------------------------------
# Invented service duties for the generated register (created inside the measurement's rolled-back transaction
# when missing: a plant imports its fluids first).
IMPORT_FLUIDS = [
    {"name": "Bench cooling water", "phase": "liquid", "conductivity_us_cm": 450, "density_kg_m3": 998,
     "viscosity_mpa_s": 1.0, "temperature_c": 25},
    {"name": "Bench brine", "phase": "liquid", "conductivity_us_cm": 60000, "density_kg_m3": 1150, "chlorides": True,
     "scaling": True},
    {"name": "Bench lime slurry", "phase": "slurry", "density_kg_m3": 1250, "solids": True, "sticky": True},
    {"name": "Bench effluent", "phase": "liquid", "conductivity_us_cm": 1500, "biofouling": True},
    {"name": "Bench condensate", "phase": "liquid", "conductivity_us_cm": 2, "temperature_c": 90},
]
IMPORT_PRINCIPLES = ["electromagnetic", "coriolis", "vortex", "ultrasonic_transit", "turbine", "orifice"]


def ensure_import_fluids() -> list[str]:
    """The generated register's fluids, created if missing; their names."""
    from plant.models import Fluid

    for values in IMPORT_FLUIDS:
        if not Fluid.objects.filter(name=values["name"]).exists():
            Fluid.objects.create(**values)
    return [values["name"] for values in IMPORT_FLUIDS]


def register_rows(count: int, fluids: list[str], seed: int = 20261205) -> list[dict]:
    """A generated meter register of `count` new positions (tags BENCH-00001...), in the import's columns, as
    strings: 4 sites of 10 areas, the fluids given, every principle of IMPORT_PRINCIPLES, flows inside the range."""
    import random

    from plant.importer import METER_COLUMNS

    rng = random.Random(seed)
    rows = []
    for n in range(1, count + 1):
        principle = IMPORT_PRINCIPLES[n % len(IMPORT_PRINCIPLES)]
        high = rng.choice([10, 25, 40, 60, 100, 250, 400])
        diameter = rng.choice([26.6, 52.5, 77.9, 102.3, 154.1])
        row = {
            "tag": f"BENCH-{n:05d}", "principle": principle, "site": f"Bench site {n % 4 + 1}",
            "area": f"Bench area {n % 10 + 1}", "fluid": fluids[n % len(fluids)], "line_size": f"DN{int(diameter)}",
            "internal_diameter_mm": f"{diameter}", "range_min": "0", "range_max": f"{high}", "flow_units": "m3/h",
            "normal_flow": f"{high * rng.uniform(0.3, 0.8):.2f}", "min_flow": f"{high * rng.uniform(0.05, 0.2):.2f}",
            "required_accuracy_pct": rng.choice(["", "0.5", "1", "2"]),
            "wetted_material": rng.choice(["", "316L", "titanium"]), "material_details": "",
            "serial": f"BS{n:06d}", "maker": "Invented Instruments", "model": "X1", "mpe_value": "0.5",
            "mpe_basis": "pct_reading", "base_interval_days": rng.choice(["365", "730"]),
        }
        rows.append({column: row[column] for column in METER_COLUMNS})
    return rows


def register_files(rows: list[dict]) -> dict[str, bytes]:
    """The generated register as the two files a user uploads: {"csv": bytes, "xlsx": bytes}."""
    import pandas as pd

    from plant import spreadsheet

    frame = pd.DataFrame(rows)
    return {"csv": spreadsheet.frame_csv_text(frame).encode("utf-8"),
            "xlsx": spreadsheet.frames_xlsx_bytes({"meters": frame})}


def load_average() -> str:
    try:
        return " ".join(f"{value:.2f}" for value in os.getloadavg())
    except OSError:
        return "not available"
