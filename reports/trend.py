"""The drift chart of one meter: the points the drift was fitted on, the fitted trend, the one-sided 95 %
prediction bound on the side the trend heads to, and the predicted crossing."""
from __future__ import annotations

import datetime as dt

from calibration import drift
from scheduling.fleet import load_history, point_histories
from reports.charts import drift_chart_svg


def _worst(frame, kind):
    values = frame[frame["kind"] == kind]["error"].dropna()
    return None if values.empty else float(values.loc[values.abs().idxmax()])


def meter_drift_chart(device, horizon_days=730) -> str:
    from plant.models import Device

    events, points = load_history(Device.objects.filter(pk=device.pk))
    trend = bound = None
    bound_label = drift.BOUND_WORDS
    crossing = device.predicted_crossing
    histories = point_histories(events, points) if not events.empty else {}
    nominal = _chart_nominal(device, histories)
    if nominal is None:  # nothing fitted: the worst point of each calibration
        history, point_label = [], "worst point"
        for row in events.sort_values("performed_on").itertuples():
            frame = points[points["event_id"] == row.id]
            found, left = _worst(frame, "as_found"), _worst(frame, "as_left")
            history.append((row.performed_on, found, left if left is not None else found))
    else:  # the points the drift was fitted on
        point_label = f"{nominal:g} % of range"
        history = [(dt.date.fromordinal(int(e.day)), e.as_found, e.left_value()) for e in histories[nominal]]
        result = drift.fit_drift(histories[nominal], mpe=device.mpe_value)
        fit, baseline = result.fit, result.current  # the fitted path from the last as-left
        if fit is not None and baseline is not None and result.last_day is not None:
            t_last = result.last_day
            end = crossing.toordinal() + 60 if crossing else t_last + horizon_days
            days = [t_last + (end - t_last) * i / 20 for i in range(21)]
            side = 1.0 if fit.slope >= 0 else -1.0  # the bound on the side the trend heads to
            bound_label = drift.bound_name(fit.slope)
            trend = [(dt.date.fromordinal(int(t)), baseline + fit.slope * (t - t_last)) for t in days]
            bound = [(dt.date.fromordinal(int(t)),
                      baseline + fit.slope * (t - t_last) + side * fit.prediction_margin(t, 0.95)) for t in days]
    unit = device.get_mpe_basis_display()
    return drift_chart_svg(history, device.mpe_value, width=720, height=300, unit=unit,
                           trend=trend, bound=bound, crossing=crossing, bound_label=bound_label,
                           point_label=point_label)


def _chart_nominal(device, histories):
    """The point whose rate the page shows (the crossing's, else the most scattered, else the worst significant
    slope), else the point predicted to cross first, else the point with the largest last as-found."""
    rationale = device.due_rationale or {}
    for key in ("drift_chart_pct", "drift_point_pct"):
        if rationale.get(key) in histories:
            return rationale[key]
    best = None
    for nominal, events in histories.items():
        found = [e.as_found for e in events if e.as_found is not None]
        if found and (best is None or abs(found[-1]) > best[1]):
            best = (nominal, abs(found[-1]))
    return best[0] if best else None
