"""Tests for calibration.drift and calibration.intervals (pure math, no DB)."""
import math
from pathlib import Path

import numpy as np
import pytest
from scipy import optimize, stats

from calibration.drift import HistoryEvent, fit_drift, linear_fit, predict_crossing
from calibration.intervals import (
    exponential_closed_form, exponential_mle, log_likelihood, recommended_interval,
    reliability_interval, staircase, staircase_sequence,
)

DATA = Path(__file__).parent / "data"


# ---------------------------------------------------------------- NIST Norris
def _norris():
    d = np.loadtxt(DATA / "norris.txt", comments="#")
    return d[:, 1], d[:, 0]  # x, y


def test_norris_certified_values():
    x, y = _norris()
    assert len(x) == 36
    f = linear_fit(x, y)
    rel = 1e-10
    assert f.intercept == pytest.approx(-0.262323073774029, rel=rel)
    assert f.se_intercept == pytest.approx(0.232818234301152, rel=rel)
    assert f.slope == pytest.approx(1.00211681802045, rel=rel)
    assert f.se_slope == pytest.approx(0.429796848199937e-03, rel=rel)
    assert f.residual_sd == pytest.approx(0.884796396144373, rel=rel)
    assert f.r_squared == pytest.approx(0.999993745883712, rel=rel)
    assert f.n == 36


def test_upper_prediction_formula_norris():
    x, y = _norris()
    f = linear_fit(x, y)
    x0 = 1200.0
    t = stats.t.ppf(0.95, 34)
    assert f.t_crit_one_sided_95 == pytest.approx(t, rel=1e-14)
    sxx = ((x - x.mean()) ** 2).sum()
    expect = (f.intercept + f.slope * x0
              + t * f.residual_sd * math.sqrt(1 + 1 / 36 + (x0 - x.mean()) ** 2 / sxx))
    assert f.upper_prediction(x0) == pytest.approx(expect, rel=1e-12)
    t99 = stats.t.ppf(0.99, 34)
    assert f.upper_prediction(x0, 0.99) - f.predict(x0) == pytest.approx(
        (expect - f.predict(x0)) * t99 / t, rel=1e-12)


def test_zero_residual_prediction_is_line():
    f = linear_fit([0, 1, 2, 3], [1, 3, 5, 7])
    assert f.residual_sd == 0.0
    assert f.upper_prediction(10) == pytest.approx(21.0, rel=1e-14)
    assert f.p_slope == 0.0


# ---------------------------------------------------------- synthetic meters
RATE = 0.001  # % of reading per day
YEAR = 365.0


def _adjusted_history(n=5, last_left=0.0, last_adjusted=True):
    """Exact drift, no noise; adjusted back to 0 at every calibration."""
    evs = [HistoryEvent(0.0, 0.0, 0.0, False)]
    for k in range(1, n):
        evs.append(HistoryEvent(k * YEAR, RATE * YEAR, 0.0, True))
    last = evs[-1]
    evs[-1] = HistoryEvent(last.day, last.as_found,
                           last_left if last_adjusted else None, last_adjusted)
    return evs


def test_exact_crossing_day():
    evs = _adjusted_history()
    dr = fit_drift(evs)
    assert dr.status == "drifting" and dr.significant
    assert dr.usable_events == 5
    assert dr.slope_per_day == pytest.approx(RATE, rel=1e-12)
    cr = predict_crossing(evs, mpe=0.5)
    assert cr.status == "drifting"
    # 0 + 0.001 * (t - 1460) = 0.5  ->  t = 1960
    assert cr.day == pytest.approx(4 * YEAR + 500.0, rel=1e-12)


def test_guard_band_brings_crossing_forward():
    cr = predict_crossing(_adjusted_history(), mpe=0.5, guard=0.1)
    assert cr.day == pytest.approx(4 * YEAR + 400.0, rel=1e-12)


def test_adjustment_sets_baseline():
    # last calibration left at +0.2 % -> only 0.3 % of headroom
    cr = predict_crossing(_adjusted_history(last_left=0.2), mpe=0.5)
    assert cr.day == pytest.approx(4 * YEAR + 300.0, rel=1e-12)
    # last calibration NOT adjusted: baseline is its as-found 0.365 %
    cr = predict_crossing(_adjusted_history(last_adjusted=False), mpe=0.5)
    assert cr.day == pytest.approx(4 * YEAR + 135.0, rel=1e-12)


def test_never_adjusted_cumulative_equals_as_found():
    evs = [HistoryEvent(k * YEAR, RATE * YEAR * k, None, False) for k in range(4)]
    assert fit_drift(evs).slope_per_day == pytest.approx(RATE, rel=1e-12)
    cr = predict_crossing(evs, mpe=2.0)
    assert cr.day == pytest.approx(3 * YEAR + (2.0 - 1.095) / RATE, rel=1e-12)


def test_negative_drift_crosses_on_negative_side():
    evs = [HistoryEvent(0.0, 0.0, 0.0)] + [
        HistoryEvent(k * YEAR, -RATE * YEAR, 0.0, True) for k in range(1, 4)]
    cr = predict_crossing(evs, mpe=0.5)
    assert cr.status == "drifting"
    assert cr.day == pytest.approx(3 * YEAR + 500.0, rel=1e-12)


def test_noisy_drift_bound_is_earlier_than_central():
    noise = [0.0, 0.01, -0.012, 0.008, -0.005, 0.011, -0.009]
    evs = [HistoryEvent(k * YEAR, RATE * YEAR * k + e, None, False)
           for k, e in enumerate(noise)]
    dr = fit_drift(evs, mpe=5.0)
    assert dr.status == "drifting"
    b = dr.current  # the fitted path (never adjusted: the regression line of the errors) at the last day
    assert b == pytest.approx(dr.fit.predict(evs[-1].day) + evs[0].as_found, rel=1e-12)
    cr = predict_crossing(evs, mpe=5.0)
    central = evs[-1].day + (5.0 - b) / dr.slope_per_day
    assert evs[-1].day < cr.day < central
    # the root satisfies the stated bound equation
    f = dr.fit
    lhs = abs(b) + f.slope * (cr.day - evs[-1].day) + f.prediction_margin(cr.day)
    assert lhs == pytest.approx(5.0, rel=1e-9)


def test_crossing_is_anchored_on_the_fitted_path_not_the_last_observation():
    """Never adjusted, errors 0, 0.25, 0.35, 0.60 at days 0, 100, 200, 300 (worked by hand, OLS as in the
    NIST/SEMATECH e-Handbook 4.1.4): xbar = 150, ybar = 0.30, Sxx = 50000, Sxy = 95, slope = 0.0019 /day,
    intercept = 0.015; fitted error at day 300 = 0.015 + 0.57 = 0.585 (the last observation 0.60 has residual
    +0.015). Residuals -0.015, 0.045, -0.045, 0.015: SSE = 0.0045, s = sqrt(0.0045 / 2) = 0.047434.
    t(0.95, 2) = 2.919986 (Student t table). MPE 2.0: the crossing d solves
    0.585 + 0.0019 (d - 300) + 2.919986 × 0.047434 × sqrt(1 + 1/4 + (d - 150)^2 / 50000) = 2.0;
    the central estimate is (2.0 - 0.585) / 0.0019 = 744.7 days, where anchoring on the last observation would
    give (2.0 - 0.60) / 0.0019 = 736.8."""
    evs = [HistoryEvent(d, e, None, False) for d, e in [(0, 0.0), (100, 0.25), (200, 0.35), (300, 0.60)]]
    dr = fit_drift(evs, mpe=2.0)
    assert dr.status == "drifting"
    assert dr.slope_per_day == pytest.approx(0.0019, rel=1e-12)
    assert dr.fit.residual_sd == pytest.approx(math.sqrt(0.0045 / 2), rel=1e-12)
    assert dr.current == pytest.approx(0.585, rel=1e-12)
    cr = predict_crossing(evs, mpe=2.0)
    t = 2.919986
    lhs = 0.585 + 0.0019 * (cr.day - 300) + t * math.sqrt(0.0045 / 2) * math.sqrt(1 + 1 / 4 + (cr.day - 150) ** 2 / 50000)
    assert lhs == pytest.approx(2.0, abs=1e-5)  # t quoted to 7 digits
    assert "central estimate 745 days" in cr.message


def test_after_an_adjustment_the_path_restarts_from_the_as_left():
    """Errors 0, 0.2, 0.4 at days 0, 100, 200 (0.002 /day exactly), then 0.6 found at day 300 and adjusted to
    +0.1: the path restarts at 0.1, so with MPE 0.5 it reaches the limit (0.5 - 0.1) / 0.002 = 200 days later,
    at day 500, not at once from the as-found 0.6."""
    evs = [HistoryEvent(0, 0.0), HistoryEvent(100, 0.2), HistoryEvent(200, 0.4), HistoryEvent(300, 0.6, 0.1, True)]
    # the as-found 0.6 exceeds 0.5, so first with MPE 0.7 (no as-found out): limit 0.7, (0.7 - 0.1) / 0.002 = 300
    dr = fit_drift(evs, mpe=0.7)
    assert dr.current == pytest.approx(0.1, rel=1e-12) and dr.anchor_day == 300
    assert predict_crossing(evs, mpe=0.7).day == pytest.approx(600.0, rel=1e-12)
    # adjusted in tolerance on the next visit: the path runs from that as-left 0.0
    evs.append(HistoryEvent(400, 0.3, 0.0, True))
    assert predict_crossing(evs, mpe=0.5).day == pytest.approx(400 + 0.5 / 0.002, rel=1e-12)


def test_scatter_exceeds_tolerance_without_significant_slope():
    """Errors +0.2, -0.2, 0, -0.2, +0.2 at yearly calibrations, never adjusted (worked by hand): the slope is
    exactly 0 (sum of (x - xbar) e = -2(0.2) - (-0.2) + 0 + (-0.2) + 2(0.2) = 0), the fitted error is the mean 0,
    SSE = 4 × 0.04 = 0.16, s = sqrt(0.16 / 3) = 0.23094; at the last day (x - xbar)^2 / Sxx = 4/10, so the
    one-sided 95 % bound is t(0.95, 3) × s × sqrt(1 + 1/5 + 0.4) = 2.353363 (Student t table) × 0.23094 × 1.264911
    = 0.6875. MPE 0.5: the bound already exceeds it on the day the meter was found in tolerance (0.2) ->
    "scatter too large to predict", no crossing date (never "already out"). MPE 1.0: inside -> flat."""
    errors = [0.2, -0.2, 0.0, -0.2, 0.2]
    evs = [HistoryEvent(k * 365.0, e) for k, e in enumerate(errors)]
    dr = fit_drift(evs, mpe=0.5)
    assert dr.slope_per_day == pytest.approx(0.0, abs=1e-15) and not dr.significant
    assert dr.fit.prediction_margin(4 * 365.0) == pytest.approx(2.353363 * math.sqrt(0.16 / 3) * math.sqrt(1.6), rel=1e-6)
    assert dr.status == "scatter" and "Scatter too large to predict" in dr.message and "0.6875" in dr.message
    assert "residual SD 0.231 beside the MPE 0.5" in dr.message  # s = 0.23094 (above)
    assert "one-sided 95 % prediction bound" in dr.message
    cr = predict_crossing(evs, mpe=0.5)
    assert cr.status == "scatter" and cr.day is None and "already out" not in cr.message
    assert predict_crossing(evs, mpe=1.0).status == "flat"
    # issue 26 item 7: with fewer than 5 calibrations, scatter beyond the limit is still called scatter
    # (three points +0.2, -0.2, 0: s = sqrt(0.08) = 0.283, t(0.95, 1) = 6.314 -> bound far beyond 0.5)
    assert fit_drift(evs[:3], mpe=0.5).status == "scatter"
    assert predict_crossing(evs[:3], mpe=0.5).day is None


def test_significant_drift_with_the_bound_already_at_the_limit_is_scatter_not_a_crossing():
    """Issue 26 item 1: a significant drift whose prediction bound already reaches the limit on the day of a
    calibration that found the meter in tolerance is "scatter too large to predict", with no crossing on or
    before that day. The slope and its p are checked against scipy.stats.linregress (independent computation),
    and the bound at the last day by the textbook formula (NIST/SEMATECH e-Handbook 4.5.2)."""
    errors = [0.0, 0.12, 0.27, 0.33, 0.46]  # never adjusted; the last as-found 0.46 is inside the MPE 0.5
    days = [k * YEAR for k in range(5)]
    evs = [HistoryEvent(d, e) for d, e in zip(days, errors)]
    ref = stats.linregress(days, errors)
    assert ref.pvalue < 0.05  # significant drift
    resid = [e - (ref.intercept + ref.slope * d) for d, e in zip(days, errors)]
    s = math.sqrt(sum(r * r for r in resid) / 3)
    xbar = sum(days) / 5
    sxx = sum((d - xbar) ** 2 for d in days)
    reach = (ref.intercept + ref.slope * days[-1]) + stats.t.ppf(0.95, 3) * s * math.sqrt(1 + 1 / 5 + (days[-1] - xbar) ** 2 / sxx)
    assert reach > 0.5
    dr = fit_drift(evs, mpe=0.5)
    assert dr.significant and dr.slope_per_day == pytest.approx(ref.slope, rel=1e-10)
    assert dr.status == "scatter" and f"{reach:.4g}" in dr.message
    cr = predict_crossing(evs, mpe=0.5)
    assert cr.status == "scatter" and cr.day is None
    # with a wider limit the crossing comes strictly after the last calibration
    wide = predict_crossing(evs, mpe=1.0)
    assert wide.status == "drifting" and wide.day > days[-1]


def test_insufficient():
    evs = _adjusted_history(n=2)
    assert fit_drift(evs).status == "insufficient"
    cr = predict_crossing(evs, mpe=0.5)
    assert cr.status == "insufficient" and cr.day is None


def test_unknown_as_left_breaks_chain():
    evs = _adjusted_history(n=6)
    evs[2] = HistoryEvent(evs[2].day, evs[2].as_found, None, True)  # left unknown
    dr = fit_drift(evs)
    # drift over (2, 3] is unknown: the chain restarts at event 3 -> events 3, 4, 5
    assert dr.usable_events == 3
    assert dr.slope_per_day == pytest.approx(RATE, rel=1e-12)


def test_flat_noisy_history():
    vals = [0.05, -0.03, 0.02, -0.04, 0.01, 0.03, -0.02]
    evs = [HistoryEvent(k * YEAR, v, None, False) for k, v in enumerate(vals)]
    dr = fit_drift(evs)
    assert dr.status == "flat" and not dr.significant
    cr = predict_crossing(evs, mpe=0.5)
    assert cr.status == "flat" and cr.day is None


def test_improving_meter_gets_its_crossing_on_the_side_it_heads_to():
    """Issue 26 item 7. Exact line 0.4, 0.3, 0.2, 0.1 a year apart (worked by hand): the error falls 0.1 per year
    toward zero and, continuing, reaches -0.5 after (0.1 + 0.5) / 0.1 = 6 years past the last calibration."""
    evs = [HistoryEvent(k * YEAR, v, None, False) for k, v in enumerate([0.4, 0.3, 0.2, 0.1])]
    dr = fit_drift(evs)
    assert dr.status == "improving"
    cr = predict_crossing(evs, mpe=0.5)
    assert cr.status == "improving" and cr.day == pytest.approx(3 * YEAR + 6 * YEAR, rel=1e-12)
    assert "-0.5" in cr.message


def test_already_out_of_tolerance():
    evs = _adjusted_history()
    evs.append(HistoryEvent(5 * YEAR, 0.6, 0.0, True))
    cr = predict_crossing(evs, mpe=0.5)
    assert cr.status == "out_of_tolerance"
    assert cr.day is None  # found out: no crossing is predicted, the as-found says it
    # guard band counts: 0.45 > 0.5 - 0.1
    evs[-1] = HistoryEvent(5 * YEAR, 0.45, 0.0, True)
    assert predict_crossing(evs, mpe=0.5, guard=0.1).status == "out_of_tolerance"


def test_accumulated_since_adjustment():
    evs = [HistoryEvent(0.0, 0.0, 0.0, True),
           HistoryEvent(YEAR, 0.1, None, False),
           HistoryEvent(2 * YEAR, 0.25, None, False)]
    assert fit_drift(evs).accumulated_since_adjustment == pytest.approx(0.25)
    assert fit_drift(_adjusted_history()).accumulated_since_adjustment == 0.0


# ---------------------------------------------------------------- intervals
def test_staircase_worked_sequence():
    # 365*1.25 = 456.25 -> 456; 456*1.25 = 570; 570*0.5 = 285; 285*1.25 = 356.25 -> 356
    # (each step uses the previous rounded interval; round half up)
    assert staircase_sequence(365, [True, True, False, True]) == [456, 570, 285, 356]


def test_staircase_rounding_and_limits():
    assert staircase(2, True, extend=1.25, min_days=0) == 3  # 2.5 -> 3 (half up)
    assert staircase(1000, True) == 1095
    assert staircase(40, False) == 30


def test_exponential_mle_matches_closed_form():
    T = 365.0
    ok = [True] * 17 + [False] * 3
    lam = exponential_mle([T] * 20, ok)
    assert lam == pytest.approx(exponential_closed_form(T, 17, 20), rel=1e-12)
    assert lam == pytest.approx(-math.log(0.85) / T, rel=1e-12)


def test_exponential_mle_mixed_intervals_is_maximum():
    t = [180, 365, 365, 540, 730, 730, 365, 180, 900, 540]
    ok = [True, True, False, True, False, True, True, True, False, True]
    lam = exponential_mle(t, ok)
    res = optimize.minimize_scalar(lambda l: -log_likelihood(l, t, ok),
                                   bounds=(1e-8, 0.05), method="bounded",
                                   options={"xatol": 1e-14})
    assert lam == pytest.approx(res.x, rel=1e-5)
    for f in (0.99, 1.01):
        assert log_likelihood(lam, t, ok) > log_likelihood(lam * f, t, ok)


def test_exponential_edge_cases():
    assert exponential_mle([365] * 4, [True] * 4) == 0.0
    assert math.isinf(exponential_mle([365] * 4, [False] * 4))
    assert reliability_interval(0.0) == math.inf
    assert recommended_interval([365] * 4, [True] * 4) == 1095
    assert recommended_interval([365] * 4, [False] * 4) == 30


def test_reliability_interval():
    lam = -math.log(0.85) / 365
    assert reliability_interval(lam, 0.85) == pytest.approx(365.0, rel=1e-12)
    assert reliability_interval(lam, 0.95) == pytest.approx(365 * math.log(0.95) / math.log(0.85))
