"""Calibration-interval adjustment methods (pure Python, no Django).

* Staircase / "automatic adjustment" method: OIML D 10:2007 (ILAC-G24),
  "Guidelines for the determination of calibration intervals of measuring
  instruments", method 1.  After each calibration the interval is multiplied
  by ``extend`` if the instrument was found in tolerance, by ``shorten`` if
  not, and limited to [min_days, max_days].
* Exponential reliability model R(t) = exp(-lambda t), as in NCSL
  RP-1 "Establishment and Adjustment of Calibration Intervals" (methods
  S2/S3 style).  Pass/fail results are interval-censored, so the exact
  likelihood is L = prod exp(-lambda t_i)^pass * (1 - exp(-lambda t_i))^fail;
  lambda is found by maximising it (root of the score, scipy.optimize.brentq
  within a bracket).  Interval for a reliability target: -ln(target)/lambda.
* When the reliability model may change an interval (``reliability_method``):
  only with at least a minimum number of observed intervals, and only when
  the one-sided exact binomial test says the reliability is below the target
  (H0: R = R*, H1: R < R*; p = P(X <= k | n, R*), as
  ``scipy.stats.binomtest(k, n, R*, alternative="less")`` gives it; significant
  at p < 5 %).  The question is one-sided: is the meter less reliable than the
  target?  This follows the spirit of NCSL RP-1's interval-test approach,
  quoted from memory, not from the text; the minimum sample size is our policy
  setting.  Otherwise the model does not move the interval and the staircase
  does.
* An out-of-tolerance as-found never yields an interval longer than the one
  just completed, whatever the method (common practice; the simple response of
  OIML D 10 / ILAC-G24: a failure shortens): ``interval_by_method`` holds the
  interval to the last observed interval when the last result is a failure.
* One rounding rule for every interval: ``whole_days`` (nearest whole day,
  halves upward).
"""
from __future__ import annotations

import math
from dataclasses import dataclass
from typing import Iterable, List, Optional, Sequence

import numpy as np
from scipy import optimize, stats

from plant import checks
from plant.risk import whole_days  # noqa: F401  (the rule lives with the risk factor; intervals round by it)


MIN_OBSERVATIONS = 8  # our policy default: observed intervals before the reliability model may move one


def _check_fraction(name: str, value) -> float:
    """``value`` as a float strictly between 0 and 1, else ValueError naming ``name``."""
    return checks.fraction(name, value)


def _stair_settings(extend, shorten, min_days, max_days):
    """Refuse NaN, ±inf and out-of-domain staircase settings, naming the argument."""
    checks.positive("extend", extend)
    checks.fraction("shorten", shorten, include_one=True)
    low = checks.whole("min_days", min_days, minimum=0)
    checks.whole("max_days", max_days, minimum=max(low, 1))


def staircase(interval_days: float, in_tolerance: bool, extend: float = 1.25,
              shorten: float = 0.5, min_days: int = 30, max_days: int = 1095) -> int:
    """Next interval by the OIML D 10 / ILAC-G24 staircase method.

    new = interval * extend (in tolerance) or interval * shorten (out),
    rounded half-up to whole days, then clamped to [min_days, max_days].
    """
    interval_days = checks.positive("interval_days", interval_days)
    _stair_settings(extend, shorten, min_days, max_days)
    new = interval_days * (extend if in_tolerance else shorten)
    return int(min(max(whole_days(new), min_days), max_days))


def staircase_sequence(initial: float, results: Iterable[bool], **kwargs) -> List[int]:
    """Apply ``staircase`` in turn; each step starts from the previous
    (already rounded) interval.  Returns the intervals after each result."""
    extend = kwargs.get("extend", 1.25)
    shorten = kwargs.get("shorten", 0.5)
    min_days = kwargs.get("min_days", 30)
    max_days = kwargs.get("max_days", 1095)
    _stair_settings(extend, shorten, min_days, max_days)
    out: List[int] = []
    cur = checks.positive("initial", initial)
    floor = math.floor
    for ok in results:  # the arithmetic of ``staircase``, inlined: the fleet recompute runs it for every meter
        if cur <= 0:
            raise ValueError("interval_days must be positive")
        cur = int(min(max(int(floor(cur * (extend if ok else shorten) + 0.5)), min_days), max_days))
        out.append(cur)
    return out


def log_likelihood(lam: float, intervals: Sequence[float], in_tol: Sequence[bool]) -> float:
    """ln L = -lam * sum_pass t_i + sum_fail ln(1 - exp(-lam t_i))."""
    lam = checks.non_negative("lam", lam)
    t, ok = _record(intervals, in_tol)
    ll = -lam * float(t[ok].sum())
    if (~ok).any():
        with np.errstate(divide="ignore"):
            ll += float(np.log(-np.expm1(-lam * t[~ok])).sum())
    return ll


def exponential_mle(intervals: Sequence[float], in_tol: Sequence[bool]) -> float:
    """Maximum-likelihood failure rate lambda (per day) of R(t) = exp(-lam t)
    from pass/fail calibration results (NCSL RP-1 exponential model).

    The log-likelihood is concave in lambda; its score
        -sum_pass t_i + sum_fail t_i / (exp(lam t_i) - 1)
    decreases from +inf to -sum_pass t_i, so the root is unique and is found
    by brentq on a bracket.  Edge cases: all in tolerance -> 0.0 (MLE at the
    boundary; use the maximum interval); all out of tolerance -> math.inf
    (the likelihood keeps rising; use the minimum interval).
    For equal intervals T this equals the closed form -ln(passes/n)/T.
    """
    t, ok = _record(intervals, in_tol)
    if t.size == 0:
        raise ValueError("intervals and in_tol must be non-empty and of equal length")
    if ok.all():
        return 0.0
    if not ok.any():
        return math.inf
    sum_pass = float(t[ok].sum())
    tf = t[~ok]

    def score(lam: float) -> float:
        return -sum_pass + float((tf / np.expm1(lam * tf)).sum())

    lo = 1e-12 / t.max()
    hi = 1.0 / t.min()
    while score(lo) <= 0:
        lo /= 1e3
    while score(hi) >= 0:
        hi *= 4.0
    return float(optimize.brentq(score, lo, hi, xtol=1e-300, rtol=4 * np.finfo(float).eps,
                                 maxiter=500))


def _record(intervals, in_tol):
    """(intervals, in_tol) as arrays: intervals finite and > 0, one result per interval (ValueError naming it)."""
    t = np.asarray(checks.numbers_in("intervals", intervals, checks.positive), dtype=float)
    ok_list = list(in_tol)
    if len(ok_list) != t.size:
        raise ValueError(f"in_tol: {len(ok_list)} results for {t.size} intervals; give one per interval")
    return t, np.asarray([bool(v) for v in ok_list], dtype=bool)


def exponential_closed_form(interval: float, passes: int, n: int) -> float:
    """Closed form for equal intervals T: R = passes/n, lambda = -ln(R)/T."""
    interval = checks.positive("interval", interval)
    n = checks.whole("n", n, minimum=1)
    passes = checks.whole("passes", passes, minimum=0)
    if passes > n:
        raise ValueError(f"passes cannot exceed n ({passes} > {n})")
    if passes == 0:
        return math.inf
    return -math.log(passes / n) / interval


def reliability_interval(lam: float, target: float = 0.95) -> float:
    """Interval at which R(t) = exp(-lam t) falls to ``target``: -ln(target)/lam
    (inf if lam == 0, 0 if lam is inf)."""
    target = _check_fraction("target", target)
    if lam is None or isinstance(lam, bool) or math.isnan(float(lam)) or float(lam) < 0:
        raise ValueError(f"lam must be a number >= 0 (inf allowed: every result out of tolerance), not {lam!r}")
    if lam == 0:
        return math.inf
    return -math.log(target) / lam


def recommended_interval(intervals: Sequence[float], in_tol: Sequence[bool],
                         target: float = 0.95, min_days: int = 30,
                         max_days: int = 1095) -> int:
    """MLE interval for ``target`` reliability, rounded by ``whole_days`` and
    clamped to [min_days, max_days] (all pass -> max_days, all fail -> min_days)."""
    _stair_settings(1.0, 1.0, min_days, max_days)
    t = reliability_interval(exponential_mle(intervals, in_tol), target)
    if math.isinf(t):
        return int(max_days)
    return int(min(max(whole_days(t), min_days), max_days))


def binomial_tails(n, passes, target):
    """Exact binomial tail probabilities of ``passes`` in-tolerance results out
    of ``n`` when the true reliability is ``target``:
    (P(X <= passes), P(X >= passes)).  Works on numbers or numpy arrays.
    A small first value says the record is significantly worse than the
    target, a small second value that it is significantly better."""
    n = np.asarray(n, dtype=float)
    passes = np.asarray(passes, dtype=float)
    target = _check_fraction("target", target)
    if not np.all(np.isfinite(n)) or np.any(n < 0) or np.any(n != np.floor(n)):
        raise ValueError(f"n must be whole numbers >= 0, not {n!r}")
    if (not np.all(np.isfinite(passes)) or np.any(passes < 0) or np.any(passes != np.floor(passes))
            or np.any(passes > n)):
        raise ValueError(f"passes must be whole numbers between 0 and n, not {passes!r}")
    return stats.binom.cdf(passes, n, target), stats.binom.sf(passes - 1, n, target)


@dataclass(frozen=True)
class ReliabilityVerdict:
    days: Optional[int]  # the interval the model sets, or None when it may not change the interval
    observations: int
    failures: int
    p_below: float
    p_above: float
    reason: str


def reliability_method(intervals: Sequence[float], in_tol: Sequence[bool], target: float = 0.95,
                       min_observations: int = 8, alpha: float = 0.05, min_days: int = 30,
                       max_days: int = 1095, tails=None) -> ReliabilityVerdict:
    """Interval from one meter's own record by the reliability target, when the evidence allows it.

    Conditions (NCSL RP-1 style, from memory): at least ``min_observations``
    observed intervals, and the one-sided exact binomial test of reliability
    below the target (H1: R < ``target``) significant at ``alpha``: p = P(X <= k)
    for k in-tolerance results of n (``binomial_tails``' first value; the same
    number as ``scipy.stats.binomtest(k, n, target, alternative="less").pvalue``).
    Then the interval is ``recommended_interval`` over the record; otherwise
    ``days`` is None and the reason says why.  Every reason prints k, n, the
    target and p. ``tails``: ``binomial_tails`` already computed for this record
    (the fleet recompute computes them for every meter at once).
    """
    ok = [bool(v) for v in in_tol]
    t = checks.numbers_in("intervals", intervals, checks.positive)
    if len(t) != len(ok):
        raise ValueError(f"intervals: {len(t)} values for {len(ok)} results in in_tol; give one per result")
    _check_fraction("target", target)
    _check_fraction("alpha", alpha)
    checks.whole("min_observations", min_observations, minimum=1)
    _stair_settings(1.0, 1.0, min_days, max_days)
    n, passes = len(ok), sum(ok)
    failures = n - passes
    if n == 0:
        return ReliabilityVerdict(None, 0, 0, 1.0, 1.0, "no interval observed yet (n = 0)")
    below, above = (float(v) for v in (tails if tails is not None else binomial_tails(n, passes, target)))
    seen = f"k = {passes} of n = {n} intervals in tolerance"
    test = (f"one-sided exact binomial test of reliability below the target, H1: R < {target:.0%}: "
            f"p = {below:.2g}")
    if n < min_observations:
        return ReliabilityVerdict(None, n, failures, below, above,
                                  f"{seen}: too few for the reliability model, which needs at least "
                                  f"{min_observations} (NCSL RP-1 style, from memory)")
    if below >= alpha:
        return ReliabilityVerdict(None, n, failures, below, above,
                                  f"{seen}, target {target:.0%}: not shown below the target ({test}, not below "
                                  f"{alpha:g})")
    days = recommended_interval(t, ok, target=target, min_days=min_days, max_days=max_days)
    return ReliabilityVerdict(days, n, failures, below, above,
                              f"{seen}, target {target:.0%}: significantly below the target ({test} < {alpha:g}); "
                              f"exponential model gives {days} d")


@dataclass(frozen=True)
class MethodInterval:
    days: int
    reason: str
    observations: int


def _staircase_reason(base: int, steps: List[int], ok: List[bool], extend: float, shorten: float) -> str:
    shown = " → ".join(map(str, [base] + steps)) if len(steps) <= 6 else "… → " + " → ".join(map(str, steps[-6:]))
    passes = sum(ok)
    return (f"staircase (OIML D 10 / ILAC-G24) from the base {base} d over {len(ok)} as-found results "
            f"({passes} in, {len(ok) - passes} out of tolerance; ×{extend:g} in, ×{shorten:g} out): {shown} d")


def interval_by_method(method: str, base_days: int, elapsed: Sequence[float], in_tol: Sequence[bool], *,
                       target: float = 0.95, min_observations: int = 8, extend: float = 1.25,
                       shorten: float = 0.5, min_days: int = 30, max_days: int = 1095,
                       tails=None, steps=None) -> MethodInterval:
    """The interval the interval method sets for one meter from its own record (pure).

    ``elapsed``/``in_tol``: the meter's observed intervals (days between calibrations) and whether the
    as-found at the end of each was in tolerance, oldest first.
    * "staircase": ``staircase_sequence`` from the meter's base interval over its results.
    * "reliability": ``reliability_method`` when the evidence allows it (minimum sample size and a
      significant binomial test); otherwise the reliability model does not move the interval and the
      staircase (a simple-response method) does, so an out-of-tolerance result still shortens by one
      step and a run of in-tolerance results still lengthens, one step at a time.
    With no observed interval the base interval holds, within [min_days, max_days].
    ``tails``/``steps``: ``binomial_tails`` and ``staircase_sequence`` already computed for this record
    (the fleet recompute computes them for all meters at once).
    """
    if method not in ("staircase", "reliability"):
        raise ValueError(f"unknown interval method {method!r}")
    base_days = checks.whole("base_days", base_days, minimum=1)
    _stair_settings(extend, shorten, min_days, max_days)
    _check_fraction("target", target)
    checks.whole("min_observations", min_observations, minimum=1)
    ok = [bool(v) for v in in_tol]
    elapsed = checks.numbers_in("elapsed", elapsed, checks.positive)
    if len(elapsed) != len(ok):
        raise ValueError(f"elapsed: {len(elapsed)} intervals for {len(ok)} results in in_tol; give one per result")
    base = int(min(max(int(base_days), min_days), max_days))
    bounded = "" if base == int(base_days) else f" (the set {int(base_days)} d held to the bounds)"
    if not ok:
        return MethodInterval(base, f"no interval observed yet: the meter's base interval {base} d{bounded}", 0)
    if steps is None:
        steps = staircase_sequence(base, ok, extend=extend, shorten=shorten, min_days=min_days, max_days=max_days)
    stair = _staircase_reason(base, steps, ok, extend, shorten)
    if method == "staircase":
        return _no_longer_after_a_failure(MethodInterval(steps[-1], stair, len(ok)), elapsed, ok, min_days)
    if method != "reliability":
        raise ValueError(f"unknown interval method {method!r}")
    verdict = reliability_method(elapsed, ok, target=target, min_observations=min_observations,
                                 min_days=min_days, max_days=max_days, tails=tails)
    if verdict.days is not None:
        chosen = MethodInterval(verdict.days, f"reliability target {target:.0%} (NCSL RP-1 exponential model): "
                                              f"{verdict.reason}", len(ok))
    else:
        chosen = MethodInterval(steps[-1], f"reliability target {target:.0%} not applied: {verdict.reason}; "
                                           f"so the {stair}", len(ok))
    return _no_longer_after_a_failure(chosen, elapsed, ok, min_days)


def _no_longer_after_a_failure(chosen: MethodInterval, elapsed, ok, min_days) -> MethodInterval:
    """An out-of-tolerance as-found never yields an interval longer than the one just completed (common
    practice; OIML D 10 / ILAC-G24 simple response). Held to ``min_days`` at the least."""
    if not ok or ok[-1]:
        return chosen
    completed = max(whole_days(float(elapsed[-1])), int(min_days))
    if chosen.days <= completed:
        return chosen
    return MethodInterval(completed, f"{chosen.reason}; the last as-found was out of tolerance, so no longer than "
                                     f"the {completed} d interval just completed", chosen.observations)


def first_calibration_found_out(method: MethodInterval, shorten: float = 0.5, min_days: int = 30,
                                max_days: int = 1095) -> MethodInterval:
    """The method's interval when the meter's only calibration so far found it out of tolerance.

    No interval has been observed, so neither method has a result to count; the as-found failure is
    still evidence against the base interval, so it is shortened by one out-of-tolerance step of the
    staircase (OIML D 10:2007 method 1), as any later failure would be. With an observed interval this
    returns the method's interval unchanged.
    """
    _stair_settings(1.0, shorten, min_days, max_days)
    if method.observations:
        return method
    raw = whole_days(method.days * shorten)
    days = int(min(max(raw, min_days), max_days))
    held = f", held to the bounds: {days} d" if days != raw else ""
    return MethodInterval(days, f"{method.reason}; the only calibration so far found it out of tolerance: "
                                f"{method.days} d × {shorten:g} = {raw} d{held}", 0)
