"""Drift fits and crossing predictions for many point histories at once (numpy/pandas, no Django).

The method is exactly that of calibration/drift.py, applied to every series of a fleet in one pass
instead of one Python call per series:

* the cumulative drift chain of each series (sum of as-found(i) - as-left(i-1), ILAC-G24 /
  OIML D 10 as-found/as-left terms), keeping only the most recent unbroken chain;
* the ordinary least-squares line of cumulative drift on day, with centred two-pass sums
  (NIST/SEMATECH e-Handbook 4.1.4), the two-sided t-test of the slope and the one-sided 95 %
  prediction bound;
* the fitted error path from the last as-left (the last adjustment of the chain, else its first
  calibration) and the "scatter too large to predict" check (the bound already at the limit on the
  last calibration day, which found the meter in tolerance);
* the first day after the last calibration the bounded error path reaches the limit (MPE minus guard
  band) on the side the trend heads to (an improving meter too). The scalar code
  finds that root with Brent's method; here all roots are bracketed together and bisected to well
  below a millionth of a day, so both give the same calendar day.

`drift.predict_crossing` is the reference (it is checked against NIST StRD Norris); the tests compare
this module with it series by series.
"""
from __future__ import annotations

import numpy as np
import pandas as pd
from scipy import stats

from calibration.drift import HORIZON_DAYS
from plant import checks

RESULT_COLUMNS = ["status", "day", "slope", "se", "sd", "significant", "usable"]
_BISECTIONS = 64  # 20 years / 2**64 is far below the 1e-9 day tolerance of the scalar root finder


def predict_crossings(rows: pd.DataFrame, limit: pd.Series, *, confidence: float = 0.95,
                      horizon_days: float = HORIZON_DAYS, alpha: float = 0.05,
                      negligible_rate: float = 1e-12) -> pd.DataFrame:
    """Crossing prediction for every series, as `drift.predict_crossing` would give it one by one.

    rows: one row per calibration of one series, columns
        series (int key), day (float, e.g. date ordinal), order (tie-break within a day),
        as_found, as_left (float, NaN when not recorded), adjusted (bool).
    limit: the limit (MPE minus guard, > 0) indexed by series key; every series to report.
    Returns a frame indexed like `limit` with columns
        status   insufficient | flat | scatter | improving | drifting | out_of_tolerance
        day      predicted crossing day (NaN when none is predicted)
        slope    fitted drift per day (NaN when no fit was made)
        se       its standard uncertainty (standard error, per day; NaN when no fit was made)
        sd       residual standard deviation of the fit (error units; NaN when no fit was made)
        significant  slope significantly non-zero (two-sided t-test at `alpha`)
        usable   events in the unbroken chain used for the fit
    """
    # the same refusals as the scalar functions (drift.fit_drift / predict_crossing), naming the argument
    checks.fraction("confidence", confidence)
    checks.fraction("alpha", alpha)
    checks.positive("horizon_days", horizon_days)
    checks.non_negative("negligible_rate", negligible_rate)
    lim_values = pd.to_numeric(limit, errors="coerce").to_numpy(dtype=float)
    bad = ~np.isfinite(lim_values) | (lim_values <= 0)
    if bad.any():
        key = limit.index[np.flatnonzero(bad)[0]]
        raise ValueError(f"limit must be a finite number greater than zero (mpe - guard), not {limit.loc[key]!r} "
                         f"for series {key!r}")
    if not rows.empty:
        for column in ("day", "as_found", "as_left"):
            values = pd.to_numeric(rows[column], errors="coerce").to_numpy(dtype=float)
            wrong = np.isinf(values) | (np.isnan(values) if column == "day" else False)
            if wrong.any():
                raise ValueError(f"rows.{column} must be finite numbers (NaN only for an error not recorded), "
                                 f"not {values[np.flatnonzero(wrong)[0]]!r}")
    out = pd.DataFrame({"status": "insufficient", "day": np.nan, "slope": np.nan, "se": np.nan, "sd": np.nan,
                        "significant": False, "usable": 0}, index=limit.index)
    if rows.empty:
        return out
    kept = rows[rows["as_found"].notna() | rows["as_left"].notna()]
    kept = kept.sort_values(["series", "day", "order"], kind="stable")
    series = kept["series"].to_numpy()
    day = kept["day"].to_numpy(dtype=float)
    found = kept["as_found"].to_numpy(dtype=float)
    left_recorded = kept["as_left"].to_numpy(dtype=float)
    adjusted = kept["adjusted"].to_numpy(dtype=bool)
    if series.size == 0:
        return out

    # the error each calibration left behind: as-left, else as-found when nothing was adjusted
    left = np.where(~np.isnan(left_recorded), left_recorded, np.where(~adjusted, found, np.nan))
    first = np.r_[True, series[1:] != series[:-1]]
    last = np.r_[series[1:] != series[:-1], True]
    reference = np.r_[np.nan, left[:-1]]
    reference[first] = np.nan
    linked = ~np.isnan(found) & ~np.isnan(reference)
    chain = np.cumsum(~linked)  # a new chain starts wherever the link to the previous calibration is unknown
    lengths = np.diff(np.r_[np.flatnonzero(first), series.size])
    in_last_chain = chain == np.repeat(chain[last], lengths)
    used = in_last_chain & (linked | ~np.isnan(left))
    increment = np.where(linked, found - reference, 0.0)

    # the last as-found decides "already out of tolerance" before any fit
    with_found = ~np.isnan(found)
    last_found = pd.DataFrame({"series": series[with_found], "day": day[with_found], "found": found[with_found]})
    last_found = last_found.drop_duplicates("series", keep="last").set_index("series")
    lim_found = limit.reindex(last_found.index).to_numpy(dtype=float)
    beyond = np.abs(last_found["found"].to_numpy()) > lim_found
    oot_keys = last_found.index[beyond]
    out.loc[oot_keys, "status"] = "out_of_tolerance"  # found out: no crossing is predicted

    chain_rows = pd.DataFrame({"series": series[used], "x": day[used], "increment": increment[used],
                               "left": left[used]})
    # a reset starts the error path: the chain's first calibration, or an adjustment with a known as-left
    chain_first = np.r_[True, chain_rows["series"].to_numpy()[1:] != chain_rows["series"].to_numpy()[:-1]]
    chain_rows["reset"] = chain_first | (adjusted[used] & ~np.isnan(left[used]))
    chain_rows["y"] = chain_rows.groupby("series", sort=False)["increment"].cumsum()
    grouped = chain_rows.groupby("series", sort=False)
    usable = grouped.size()
    out.loc[usable.index, "usable"] = usable.to_numpy()
    # baseline (what the last calibration in the chain left behind, NaN when unknown) and its day
    tail = chain_rows.drop_duplicates("series", keep="last").set_index("series")
    fit_keys = usable.index[(usable.to_numpy() >= 3) & ~usable.index.isin(oot_keys)]
    if fit_keys.empty:
        return out

    fitting = chain_rows[chain_rows["series"].isin(fit_keys)]
    codes, keys = pd.factorize(fitting["series"], sort=False)
    n = np.bincount(codes).astype(float)
    x = fitting["x"].to_numpy()
    y = fitting["y"].to_numpy()
    xbar = np.bincount(codes, x) / n
    ybar = np.bincount(codes, y) / n
    # second pass corrects the means for rounding (two-pass algorithm, as drift.linear_fit)
    xbar += np.bincount(codes, x - xbar[codes]) / n
    ybar += np.bincount(codes, y - ybar[codes]) / n
    dx = x - xbar[codes]
    dy = y - ybar[codes]
    sxx = np.bincount(codes, dx * dx)
    sxy = np.bincount(codes, dx * dy)
    degenerate = sxx == 0.0  # every calibration on one day: no slope
    sxx_safe = np.where(degenerate, 1.0, sxx)
    slope = sxy / sxx_safe
    resid = dy - slope[codes] * dx
    dof = n - 2
    s = np.sqrt(np.bincount(codes, resid * resid) / dof)
    se = s / np.sqrt(sxx_safe)
    with np.errstate(divide="ignore", invalid="ignore"):
        t_stat = np.abs(slope) / se
    p_value = np.where(se > 0, 2.0 * stats.t.sf(t_stat, dof), np.where(slope != 0, 0.0, 1.0))
    significant = (p_value < alpha) & ~degenerate

    baseline = tail.loc[keys, "left"].to_numpy()
    t_last = tail.loc[keys, "x"].to_numpy()
    # the fitted path from the last as-left on the last calibration day (drift.fitted_current_error):
    # left(A) - Y_A + mean over the rows since the last reset A of (Y_i - slope * (t_i - t_last))
    position = np.arange(codes.size)
    reset = fitting["reset"].to_numpy()
    anchor_at = np.zeros(keys.size, dtype=np.int64)
    np.maximum.at(anchor_at, codes[reset], position[reset])
    since = position >= anchor_at[codes]
    placed = np.bincount(codes, np.where(since, y - slope[codes] * (x - t_last[codes]), 0.0)) / np.bincount(codes, since)
    left_fit = fitting["left"].to_numpy()
    current = np.where(np.isnan(baseline), np.nan, left_fit[anchor_at] - y[anchor_at] + placed)
    lim = limit.loc[keys].to_numpy(dtype=float)
    t_crit = np.where(dof > 0, stats.t.ppf(confidence, np.maximum(dof, 1)), np.nan)

    def bound_margin(t):
        """One-sided prediction margin of the fit at day t (zero without scatter)."""
        return np.where(s > 0.0, t_crit * s * np.sqrt(1.0 + 1.0 / n + (t - xbar) ** 2 / sxx_safe), 0.0)

    not_significant = ~significant | (np.abs(slope) <= negligible_rate)
    # the bound already at the limit on the last day (either side), found in tolerance: scatter
    scatter = ~degenerate & ~np.isnan(current) & (np.abs(current) + bound_margin(t_last) >= lim)
    status = np.where(scatter, "scatter", np.where(
        not_significant, "flat",
        np.where(~np.isnan(current) & (current * slope < 0), "improving", "drifting")))
    status = np.where(degenerate, "insufficient", status)
    status = np.where(np.isin(status, ["drifting", "improving"]) & np.isnan(baseline), "insufficient", status)
    crossing = np.full(keys.size, np.nan)

    # on the side the trend heads to: start = sign(slope) * current (negative while improving)
    side = np.where(slope >= 0, 1.0, -1.0)
    start = side * current
    rate = np.abs(slope)
    heading = (status == "drifting") | (status == "improving")

    exact = heading & (s == 0.0)
    with np.errstate(divide="ignore", invalid="ignore"):
        exact_day = t_last + (lim - start) / rate
    exact_ok = exact & (exact_day - t_last <= horizon_days)
    crossing[exact_ok] = exact_day[exact_ok]

    scattered = heading & (s > 0.0)

    def gap(t):
        """Bounded error path minus the limit (negative while inside tolerance)."""
        return start + rate * (t - t_last) + bound_margin(t) - lim

    t_end = t_last + horizon_days
    solve = scattered & (gap(t_end) >= 0)  # gap(t_last) < 0 here: "scatter" took the rest
    lo, hi = t_last.copy(), t_end.copy()
    for _ in range(_BISECTIONS):
        mid = 0.5 * (lo + hi)
        inside = gap(mid) < 0
        lo = np.where(inside, mid, lo)
        hi = np.where(inside, hi, mid)
    crossing[solve] = 0.5 * (lo + hi)[solve]

    out.loc[keys, "status"] = status
    out.loc[keys, "day"] = crossing
    out.loc[keys, "slope"] = np.where(degenerate, np.nan, slope)
    out.loc[keys, "se"] = np.where(degenerate, np.nan, se)
    out.loc[keys, "sd"] = np.where(degenerate, np.nan, s)
    out.loc[keys, "significant"] = significant
    return out
