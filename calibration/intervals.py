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
"""
from __future__ import annotations

import math
from typing import Iterable, List, Sequence

import numpy as np
from scipy import optimize


def _round_half_up(x: float) -> int:
    """Round to the nearest whole day, halves upward (not banker's rounding)."""
    return int(math.floor(x + 0.5))


def staircase(interval_days: float, in_tolerance: bool, extend: float = 1.25,
              shorten: float = 0.5, min_days: int = 30, max_days: int = 1095) -> int:
    """Next interval by the OIML D 10 / ILAC-G24 staircase method.

    new = interval * extend (in tolerance) or interval * shorten (out),
    rounded half-up to whole days, then clamped to [min_days, max_days].
    """
    if interval_days <= 0:
        raise ValueError("interval_days must be positive")
    new = interval_days * (extend if in_tolerance else shorten)
    return int(min(max(_round_half_up(new), min_days), max_days))


def staircase_sequence(initial: float, results: Iterable[bool], **kwargs) -> List[int]:
    """Apply ``staircase`` in turn; each step starts from the previous
    (already rounded) interval.  Returns the intervals after each result."""
    out: List[int] = []
    cur = initial
    for ok in results:
        cur = staircase(cur, bool(ok), **kwargs)
        out.append(cur)
    return out


def log_likelihood(lam: float, intervals: Sequence[float], in_tol: Sequence[bool]) -> float:
    """ln L = -lam * sum_pass t_i + sum_fail ln(1 - exp(-lam t_i))."""
    t = np.asarray(intervals, dtype=float)
    ok = np.asarray(in_tol, dtype=bool)
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
    t = np.asarray(intervals, dtype=float)
    ok = np.asarray(in_tol, dtype=bool)
    if t.shape != ok.shape or t.ndim != 1 or t.size == 0:
        raise ValueError("intervals and in_tol must be non-empty and of equal length")
    if (t <= 0).any():
        raise ValueError("intervals must be positive")
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


def exponential_closed_form(interval: float, passes: int, n: int) -> float:
    """Closed form for equal intervals T: R = passes/n, lambda = -ln(R)/T."""
    if passes == 0:
        return math.inf
    return -math.log(passes / n) / interval


def reliability_interval(lam: float, target: float = 0.95) -> float:
    """Interval at which R(t) = exp(-lam t) falls to ``target``: -ln(target)/lam
    (inf if lam == 0, 0 if lam is inf)."""
    if not 0 < target < 1:
        raise ValueError("target must be in (0, 1)")
    if lam == 0:
        return math.inf
    return -math.log(target) / lam


def recommended_interval(intervals: Sequence[float], in_tol: Sequence[bool],
                         target: float = 0.95, min_days: int = 30,
                         max_days: int = 1095) -> int:
    """MLE interval for ``target`` reliability, clamped to [min_days, max_days]
    (all pass -> max_days, all fail -> min_days), rounded down to whole days."""
    t = reliability_interval(exponential_mle(intervals, in_tol), target)
    if math.isinf(t):
        return int(max_days)
    return int(min(max(math.floor(t), min_days), max_days))
