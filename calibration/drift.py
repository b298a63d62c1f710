"""Drift analysis of a meter's calibration history (pure Python, no Django).

Methods
-------
* Straight-line fit by ordinary least squares with the usual textbook
  standard errors and the one-sided prediction bound for a new observation
  (e.g. NIST/SEMATECH e-Handbook of Statistical Methods, section 4.1.4 /
  4.5.2; Montgomery & Runger, "Applied Statistics and Probability for
  Engineers", ch. 11).  The sums are formed on centred data in float64 so
  that the NIST StRD linear-regression data sets (e.g. Norris) are
  reproduced to ~12 significant digits.
* Drift between calibrations = as-found(i) - as-left(i-1) (ILAC-G24 /
  OIML D 10:2007 "as found / as left" terminology).  Regressing the
  *cumulative* sum of inter-calibration drifts on time removes the resets
  caused by adjustments, leaving the underlying drift rate.
* Predicted crossing of the maximum permissible error (MPE): the error path
  is the fitted path from the last as-left: a line with the fitted drift
  rate through the errors since the last reset (the as-left of the last
  adjustment in the chain, else of its first calibration, and the as-found
  results after it), placed by least squares.  Just after an adjustment it
  starts at that as-left; with no adjustment it is the regression line of the
  errors.  It is not anchored on the last as-found observation, whose
  residual would move the date by residual / rate.  The conservative date
  uses the one-sided 95 % prediction bound of the drift fit about the path,
  on the side the trend heads to (the upper bound for a rising error, the
  lower bound for a falling one; BOUND_WORDS):
  s * E(t) + t_{0.95,n-2} * s_r * sqrt(1 + 1/n + (t - xbar)^2 / Sxx), s = sign(rate).
  An improving meter (error moving toward zero) gets its crossing on the
  side it heads to, after it has passed zero.
* A crossing is reported only strictly after the last calibration.  When the
  prediction bound already reaches the limit at the last calibration (on
  either side), while that calibration found the meter in tolerance, the
  status is "scatter" ("scatter too large to predict"), whether or not the
  slope is significant and however few the calibrations (a wide bound from
  3 or 4 calibrations is scatter too): the model cannot place a crossing,
  and it says so rather than saying the meter "was already out" on a day it
  was found in.  The residual SD is reported beside the MPE.
"""
from __future__ import annotations

import math
from dataclasses import dataclass, field
from typing import Optional, Sequence

import numpy as np
from scipy import optimize, stats

from plant import checks

HORIZON_DAYS = 20 * 365.25


def bound_words(confidence: float = 0.95) -> str:
    """The name of the bound: the same words on the page, the chart legend, the rationale and docs/method.md."""
    confidence = checks.fraction("confidence", confidence)
    return f"one-sided {confidence * 100:g} % prediction bound"


BOUND_WORDS = bound_words()


def bound_name(slope: float, confidence: float = 0.95) -> str:
    """The bound on the side the trend heads to, named exactly: "one-sided 95 % upper prediction bound"."""
    return bound_words(confidence).replace("prediction", f"{bound_side(slope)} prediction")


def bound_side(slope: float) -> str:
    """The side the bound is drawn on: "upper" for a rising error path, "lower" for a falling one."""
    slope = checks.number("slope", slope)
    return "upper" if slope >= 0 else "lower"


# --------------------------------------------------------------------------
# Ordinary least squares
# --------------------------------------------------------------------------
@dataclass(frozen=True)
class LineFit:
    """Result of an OLS straight-line fit y = intercept + slope * x."""

    slope: float
    intercept: float
    se_slope: float
    se_intercept: float
    residual_sd: float
    n: int
    xbar: float
    sxx: float
    r_squared: float
    t_slope: float  # slope / se_slope (inf if se_slope == 0 and slope != 0)
    p_slope: float  # two-sided p-value of H0: slope == 0
    t_crit_one_sided_95: float

    @property
    def dof(self) -> int:
        return self.n - 2

    def predict(self, x0: float) -> float:
        """Fitted value, written about the mean of x to limit cancellation."""
        return self.intercept + self.slope * self.xbar + self.slope * (x0 - self.xbar)

    def prediction_margin(self, x0: float, confidence: float = 0.95) -> float:
        """t_{conf, n-2} * s * sqrt(1 + 1/n + (x0 - xbar)^2 / Sxx)  (>= 0)."""
        if self.residual_sd == 0.0:
            return 0.0
        t = self.t_crit_one_sided_95 if confidence == 0.95 else float(
            stats.t.ppf(confidence, self.dof))
        dx = x0 - self.xbar
        return t * self.residual_sd * math.sqrt(1.0 + 1.0 / self.n + dx * dx / self.sxx)

    def upper_prediction(self, x0: float, confidence: float = 0.95) -> float:
        """One-sided upper prediction bound for a new observation at x0:
        yhat + t_{1-a,n-2} * s * sqrt(1 + 1/n + (x0-xbar)^2/Sxx)."""
        return self.predict(x0) + self.prediction_margin(x0, confidence)

    def lower_prediction(self, x0: float, confidence: float = 0.95) -> float:
        """One-sided lower prediction bound (mirror of upper_prediction)."""
        return self.predict(x0) - self.prediction_margin(x0, confidence)


def linear_fit(x: Sequence[float], y: Sequence[float]) -> LineFit:
    """Ordinary least-squares straight line with standard errors.

    Centred formulas: Sxx = sum (x-xbar)^2, Sxy = sum (x-xbar)(y-ybar),
    slope = Sxy/Sxx, intercept = ybar - slope*xbar, s^2 = SSE/(n-2),
    se(slope) = s/sqrt(Sxx), se(intercept) = s*sqrt(1/n + xbar^2/Sxx).
    Requires n >= 3 and at least two distinct x values.
    """
    xa = np.asarray(checks.numbers_in("x", x), dtype=np.float64)
    ya = np.asarray(checks.numbers_in("y", y), dtype=np.float64)
    if xa.shape != ya.shape or xa.ndim != 1:
        raise ValueError("x and y must be 1-D sequences of equal length")
    n = int(xa.size)
    if n < 3:
        raise ValueError("linear_fit needs at least 3 points")
    xbar = float(np.mean(xa))
    ybar = float(np.mean(ya))
    dx = xa - xbar
    dy = ya - ybar
    # second pass corrects the mean for rounding (two-pass algorithm)
    xbar += float(np.mean(dx))
    ybar += float(np.mean(dy))
    dx = xa - xbar
    dy = ya - ybar
    sxx = float(dx @ dx)
    if sxx == 0.0:
        raise ValueError("all x values are equal; slope undefined")
    sxy = float(dx @ dy)
    syy = float(dy @ dy)
    slope = sxy / sxx
    intercept = ybar - slope * xbar
    resid = dy - slope * dx
    sse = float(resid @ resid)
    dof = n - 2
    s = math.sqrt(sse / dof)
    se_slope = s / math.sqrt(sxx)
    se_intercept = s * math.sqrt(1.0 / n + xbar * xbar / sxx)
    r2 = 1.0 - sse / syy if syy > 0 else 1.0
    if se_slope > 0:
        t_slope = slope / se_slope
        p_slope = float(2.0 * stats.t.sf(abs(t_slope), dof))
    else:
        t_slope = math.inf if slope != 0 else 0.0
        p_slope = 0.0 if slope != 0 else 1.0
    return LineFit(
        slope=slope, intercept=intercept, se_slope=se_slope,
        se_intercept=se_intercept, residual_sd=s, n=n, xbar=xbar, sxx=sxx,
        r_squared=r2, t_slope=t_slope, p_slope=p_slope,
        t_crit_one_sided_95=float(stats.t.ppf(0.95, dof)),
    )


# --------------------------------------------------------------------------
# Calibration history
# --------------------------------------------------------------------------
@dataclass(frozen=True)
class HistoryEvent:
    """One calibration of one nominal point (or the worst point).

    Errors are in the meter's error basis (e.g. % of reading).  If
    ``as_left`` is None and the meter was not adjusted, as_left = as_found.
    """

    day: float
    as_found: Optional[float]
    as_left: Optional[float] = None
    adjusted: bool = False

    def __post_init__(self):
        checks.number("day", self.day)
        checks.optional_number("as_found", self.as_found)
        checks.optional_number("as_left", self.as_left)

    def left_value(self) -> Optional[float]:
        if self.as_left is not None:
            return float(self.as_left)
        if not self.adjusted and self.as_found is not None:
            return float(self.as_found)
        return None  # adjusted but as-left not recorded: unknown


@dataclass
class DriftSeries:
    days: list = field(default_factory=list)
    cumulative: list = field(default_factory=list)
    events: list = field(default_factory=list)  # events in the unbroken chain


def cumulative_drift(events: Sequence[HistoryEvent]) -> DriftSeries:
    """Cumulative drift series (day, sum of as_found(i) - as_left(i-1)).

    The first event of the chain contributes the point (day, 0).  An event
    whose as-found is missing, or whose as-left is unknown (adjusted without
    a recorded as-left), breaks the chain: the drift across the gap cannot be
    known, so only the most recent unbroken chain is used.
    """
    evs = sorted(events, key=lambda e: e.day)
    series = DriftSeries()
    ref: Optional[float] = None
    total = 0.0
    for ev in evs:
        if ev.as_found is None and ev.as_left is None:
            continue
        if ref is not None and ev.as_found is not None:
            total += float(ev.as_found) - ref
            series.days.append(float(ev.day))
            series.cumulative.append(total)
            series.events.append(ev)
        else:  # start (or restart) the chain
            series = DriftSeries()
            total = 0.0
            if ev.left_value() is not None:
                series.days.append(float(ev.day))
                series.cumulative.append(0.0)
                series.events.append(ev)
        ref = ev.left_value()  # None => next interval's drift unknown
    return series


@dataclass(frozen=True)
class DriftResult:
    """`baseline` is what the last calibration left behind (as-left, or as-found when not adjusted);
    `anchor_value`/`anchor_day` are the as-left and day of the last reset that starts the fitted error
    path (see the module docstring) and `current` is that path's value on the last calibration day."""

    usable_events: int
    slope_per_day: Optional[float]
    se_slope: Optional[float]
    p_value: Optional[float]
    significant: bool
    status: str  # insufficient | flat | improving | drifting | out_of_tolerance
    message: str
    accumulated_since_adjustment: float
    baseline: Optional[float]  # as-left of the last event (as-found if not adjusted)
    last_day: Optional[float]
    fit: Optional[LineFit] = None
    anchor_value: Optional[float] = None
    anchor_day: Optional[float] = None
    current: Optional[float] = None


def _last_adjust_accumulated(series: DriftSeries) -> float:
    """Sum of inter-event drifts after the most recent adjusted event."""
    acc = 0.0
    for k in range(len(series.events) - 1, 0, -1):
        if series.events[k].adjusted:
            break
        acc += series.cumulative[k] - series.cumulative[k - 1]
    return acc


def path_anchor(series: DriftSeries) -> int:
    """Index in the chain of the last reset: the last adjusted event with a known as-left, else the first."""
    for k in range(len(series.events) - 1, 0, -1):
        ev = series.events[k]
        if ev.adjusted and ev.left_value() is not None:
            return k
    return 0


def fitted_current_error(series: DriftSeries, slope: float) -> Optional[float]:
    """Error on the last calibration day along the fitted path from the last as-left.

    With A the last reset (see ``path_anchor``), the errors since then are
    E_i = left(A) + Y_i - Y_A (Y the cumulative drift); the line of slope
    ``slope`` through them by least squares has, at t_last, the value
    left(A) - Y_A + mean_{i >= A} (Y_i - slope * (t_i - t_last)).
    None when the last calibration's as-left is unknown.
    """
    slope = checks.number("slope", slope)
    if not series.events or series.events[-1].left_value() is None:
        return None
    k = path_anchor(series)
    t_last = series.days[-1]
    tail = [series.cumulative[i] - slope * (series.days[i] - t_last) for i in range(k, len(series.days))]
    return series.events[k].left_value() - series.cumulative[k] + sum(tail) / len(tail)


def fit_drift(events: Sequence[HistoryEvent], mpe: Optional[float] = None,
              guard: float = 0.0, negligible_rate: float = 1e-12,
              alpha: float = 0.05, confidence: float = 0.95) -> DriftResult:
    """Fit a drift rate (error units per day) to a calibration history.

    Regresses cumulative drift on day (OLS, see ``linear_fit``); the slope is
    significant when the two-sided t-test p-value < alpha (default 0.05).
    Status: "insufficient" (< 3 usable events), "out_of_tolerance" (only if
    ``mpe`` given and the last as-found |error| > mpe - guard), "scatter"
    ("scatter too large to predict": with ``mpe`` given, the one-sided
    ``confidence`` prediction bound about the fitted path already reaches
    mpe - guard at the last calibration, which found the meter in tolerance;
    significant slope or not, any number of calibrations), "flat" (not significant or
    |slope| <= negligible_rate), "improving" (drift moves the fitted current
    error toward zero) or "drifting".
    """
    _drift_arguments(mpe=mpe, guard=guard, negligible_rate=negligible_rate, alpha=alpha, confidence=confidence)
    evs = sorted(events, key=lambda e: e.day)
    series = cumulative_drift(evs)
    n = len(series.days)
    last = series.events[-1] if series.events else None
    baseline = last.left_value() if last else None  # None if adjusted, as-left unknown
    acc = _last_adjust_accumulated(series) if n else 0.0
    common = dict(usable_events=n, accumulated_since_adjustment=acc,
                  baseline=baseline, last_day=float(last.day) if last else None)

    found_evs = [e for e in evs if e.as_found is not None]
    if mpe is not None and found_evs:
        lim = mpe - guard
        lf = found_evs[-1]
        if abs(lf.as_found) > lim:
            return DriftResult(
                slope_per_day=None, se_slope=None, p_value=None, significant=False,
                status="out_of_tolerance",
                message=(f"Last as-found error {lf.as_found:g} exceeds the limit "
                         f"{lim:g} (MPE {mpe:g} minus guard {guard:g})."),
                **{**common, "last_day": float(lf.day)})

    if n < 3:
        return DriftResult(
            slope_per_day=None, se_slope=None, p_value=None, significant=False,
            status="insufficient",
            message=(f"Only {n} usable calibration(s) in an unbroken as-found/"
                     "as-left chain; at least 3 are needed to estimate drift."),
            **common)

    if min(series.days) == max(series.days):
        return DriftResult(
            slope_per_day=None, se_slope=None, p_value=None, significant=False,
            status="insufficient",
            message="Every usable calibration is on the same day; a drift rate needs time between them.",
            **common)

    fit = linear_fit(series.days, series.cumulative)
    significant = fit.p_slope < alpha
    rate = fit.slope
    anchor = path_anchor(series)
    current = fitted_current_error(series, rate)
    base = dict(slope_per_day=rate, se_slope=fit.se_slope, p_value=fit.p_slope,
                significant=significant, fit=fit, anchor_value=series.events[anchor].left_value(),
                anchor_day=float(series.days[anchor]), current=current, **common)
    per_year = rate * 365.25
    rate_text = f"{per_year:+.4g} ± {fit.se_slope * 365.25:.2g} per year (standard uncertainty)"
    if mpe is not None and current is not None:
        reach = abs(current) + fit.prediction_margin(float(last.day), confidence)
        if reach >= mpe - guard:
            few = (f"; with only {n} calibrations the bound is wide (t = {fit.t_crit_one_sided_95:.3g})"
                   if n < 5 else "")
            return DriftResult(status="scatter", message=(
                f"Scatter too large to predict: the last calibration found the meter in tolerance, but the "
                f"{bound_words(confidence)} of the drift model already reaches {reach:.4g} against the limit "
                f"{mpe - guard:g} on that day, so no crossing date can be placed (residual SD "
                f"{fit.residual_sd:.3g} beside the MPE {mpe:g}; drift {rate_text}, p = {fit.p_slope:.3g}, "
                f"{n} calibrations{few})."), **base)
    if not significant or abs(rate) <= negligible_rate:
        return DriftResult(status="flat", message=(
            f"No significant drift: rate {rate_text} "
            f"(p = {fit.p_slope:.3g}, {n} calibrations)."), **base)
    if current is not None and current * rate < 0:
        return DriftResult(status="improving", message=(
            f"Drift of {rate_text} is moving the error "
            f"({current:+.4g} on the fitted path) toward zero; if it continues past zero the error "
            "will grow with the opposite sign."), **base)
    return DriftResult(status="drifting", message=(
        f"Significant drift of {rate_text} "
        f"(p = {fit.p_slope:.3g}, {n} calibrations)."), **base)


def _drift_arguments(mpe=None, guard=0.0, negligible_rate=0.0, alpha=0.05, confidence=0.95, horizon_days=1.0):
    """Refuse NaN, ±inf and out-of-domain settings of the drift functions, naming the argument."""
    if mpe is not None:
        checks.positive("mpe", mpe)
    guard = checks.non_negative("guard", guard)
    if mpe is not None and guard >= mpe:
        raise ValueError(f"guard must be less than mpe (mpe - guard must be positive), not {guard!r} >= {mpe!r}")
    checks.non_negative("negligible_rate", negligible_rate)
    checks.fraction("alpha", alpha)
    checks.fraction("confidence", confidence)
    checks.positive("horizon_days", horizon_days)


@dataclass(frozen=True)
class CrossingResult:
    day: Optional[float]
    status: str
    message: str
    drift: Optional[DriftResult] = None


def predict_crossing(events: Sequence[HistoryEvent], mpe: float, guard: float = 0.0,
                     confidence: float = 0.95,
                     horizon_days: float = HORIZON_DAYS) -> CrossingResult:
    """Predict the first day, strictly after the last calibration, the error may reach the limit mpe - guard.

    Error path: the fitted path from the last as-left (see the module
    docstring and ``fitted_current_error``); b = its value at t_last, s = sign(rate).
    Conservative bound used (one-sided ``confidence`` prediction bound of the
    cumulative-drift fit about that path, on the side the trend heads to):
        g(t) = s*b + |rate|*(t - t_last) + t_{conf,n-2} * s_r * sqrt(1 + 1/n + (t-xbar)^2/Sxx).
    A drifting meter (s*b >= 0) and an improving one (s*b < 0, heading through zero to the other
    side) alike get the first t with g(t) = limit.  Status "scatter" (the bound already at the limit
    at the last calibration, found in tolerance) and "out_of_tolerance" give no crossing day:
    a crossing is only ever reported after the last calibration.
    The root of g(t) = limit is found with scipy.optimize.brentq on
    [t_last, t_last + horizon]; with zero residual SD it is solved exactly.
    """
    if mpe is None:
        raise ValueError("mpe must be a finite number greater than zero, not None")
    _drift_arguments(mpe=mpe, guard=guard, confidence=confidence, horizon_days=horizon_days)
    limit = mpe - guard
    dr = fit_drift(events, mpe=mpe, guard=guard, confidence=confidence)
    if dr.status in ("out_of_tolerance", "scatter", "insufficient", "flat"):
        return CrossingResult(None, dr.status, dr.message + " No crossing date predicted.", dr)
    if dr.baseline is None or dr.current is None:
        return CrossingResult(None, "insufficient",
                              "Last calibration was adjusted but its as-left error is not recorded.", dr)
    fit = dr.fit
    side = 1.0 if fit.slope >= 0 else -1.0
    start = side * dr.current  # the path's value on the side it heads to (negative while improving)
    t_last = dr.last_day
    rate = abs(fit.slope)
    bound = bound_name(fit.slope, confidence)
    rate_text = f"drift {fit.slope * 365.25:+.4g} ± {fit.se_slope * 365.25:.2g} per year (standard uncertainty)"

    if fit.residual_sd == 0.0:
        day = t_last + (limit - start) / rate
        if day - t_last > horizon_days:
            return CrossingResult(None, dr.status,
                                  f"Limit not reached within {horizon_days / 365.25:g} years.", dr)
        return CrossingResult(day, dr.status, (
            f"Error expected to reach {side * limit:+g} {day - t_last:.1f} days after the last "
            f"calibration (exact line, no scatter; {rate_text})."), dr)

    def g(t: float) -> float:
        return start + rate * (t - t_last) + fit.prediction_margin(t, confidence) - limit

    t_end = t_last + horizon_days
    if g(t_end) < 0:
        return CrossingResult(None, dr.status,
                              f"Limit not reached within {horizon_days / 365.25:g} years.", dr)
    # g(t_last) < 0 here: fit_drift calls "scatter" any bound at the limit on the last day
    day = optimize.brentq(g, t_last, t_end, xtol=1e-9, rtol=4 * np.finfo(float).eps)
    return CrossingResult(day, dr.status, (
        f"The {bound} of the error may reach {side * limit:+g} "
        f"{day - t_last:.0f} days after the last calibration "
        f"(central estimate {(limit - start) / rate:.0f} days; {rate_text})."), dr)
