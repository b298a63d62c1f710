"""Conformity risk of a calibration result, after JCGM 106:2012 "Evaluation of measurement data - The role of
measurement uncertainty in conformity assessment". Pure: numbers (or numpy arrays) in, numbers out; no ORM.

Notation (JCGM 106 §3, §7, §9): the true error of the device is the measurand Y, its tolerance interval is
C = [lower, upper] (for a meter, [-MPE, +MPE]); a calibration measures it with a normal measurement model:
the measured error Y_m given the true error Y = eta is N(eta, u^2), u the standard uncertainty (U / k). The
acceptance interval A = [accept_lower, accept_upper] is where a measured error is accepted.

* ``conformance_probability`` - JCGM 106 §7.2-§7.3: with a normal PDF for Y given the measured value y
  and u, p_c = Phi((upper - y)/u) - Phi((lower - y)/u).
* ``global_risks`` - JCGM 106 §9.5 (global consumer's and producer's risk) for a normal prior
  Y ~ N(prior_mean, prior_sd^2) (§9.2, the "prior" of like items) and the normal measurement above:
      PFA = R_C = integral over eta outside C of g0(eta) * P(Y_m in A | eta) d eta
      PFR = R_P = integral over eta inside C of g0(eta) * P(Y_m outside A | eta) d eta
  Both are joint (unconditional) probabilities, as JCGM 106 §9.5.2-§9.5.3 define them and as ANSI/NCSL Z540.3
  bounds the probability of false accept at 2 % (its §5.3 b, first method). The scalar function integrates
  these one-dimensional integrals numerically (scipy.integrate.quad, absolute tolerance QUAD_EPSABS, the
  prior cut at +/- PRIOR_CUT standard deviations, whose tails weigh less than 2e-32).
* ``global_risks_array`` - the same for numpy arrays (the fleet), in closed form: (Y, Y_m) is bivariate
  normal, so each term is a rectangle probability of a bivariate normal distribution, evaluated with Owen's
  T function (D. B. Owen, "Tables for computing bivariate normal probabilities", Ann. Math. Statist. 27
  (1956) 1075-1090, eq. (2.1)); checked against the scalar integration and against scipy's dblquad in tests.
* ``acceptance_limits_for_pfa`` - JCGM 106 §8.3 (guarded acceptance, guard band w): A = [lower + w,
  upper - w], the smallest w >= 0 with PFA <= target_pfa (PFA falls as w grows; found by bisection to
  GUARD_TOLERANCE of the tolerance half-width). We never widen the acceptance interval beyond the tolerance
  (no negative guard band, JCGM 106 §8.3.3 "relaxed acceptance"): a measured error beyond the MPE is never
  accepted. When the target cannot be met with any w below the half-width the acceptance interval is empty
  (nothing is accepted) - the measurement is too weak for the target.

Every argument must be finite; u and prior_sd must be > 0, lower < upper, accept_lower <= accept_upper,
0 < target_pfa < 1; otherwise ValueError naming the argument.
"""
from __future__ import annotations

import math
from typing import Mapping

import numpy as np
from scipy import integrate, special

#: absolute tolerance of the numerical integration of global_risks (probabilities)
QUAD_EPSABS = 1e-12
#: the prior is integrated over prior_mean +/- PRIOR_CUT * prior_sd; the tails beyond weigh 2*Phi(-12) < 2e-32
PRIOR_CUT = 12.0
#: the guard band of acceptance_limits_for_pfa is found to this fraction of the tolerance half-width
GUARD_TOLERANCE = 1e-7


def _finite(name: str, value) -> float:
    try:
        v = float(value)
    except (TypeError, ValueError):
        raise ValueError(f"{name} must be a finite number, got {value!r}") from None
    if not math.isfinite(v):
        raise ValueError(f"{name} must be a finite number, got {value!r}")
    return v


def _positive(name: str, value) -> float:
    v = _finite(name, value)
    if v <= 0:
        raise ValueError(f"{name} must be > 0, got {value!r}")
    return v


def _interval(lo_name: str, lo, hi_name: str, hi, strict=True) -> tuple[float, float]:
    a, b = _finite(lo_name, lo), _finite(hi_name, hi)
    if (a >= b) if strict else (a > b):
        raise ValueError(f"{lo_name} must be {'<' if strict else '<='} {hi_name}, got {a!r} and {b!r}")
    return a, b


def _norm_cdf(x):
    return special.ndtr(x)


# JCGM 106 §7 -------------------------------------------------------------------------------------------
def conformance_probability(measured_error, u, lower, upper) -> float:
    """Probability that the true error lies in [lower, upper] given the measured error and its standard
    uncertainty u, normal PDF (JCGM 106:2012 §7.2-§7.3): Phi((upper - y)/u) - Phi((lower - y)/u)."""
    y = _finite("measured_error", measured_error)
    u = _positive("u", u)
    lower, upper = _interval("lower", lower, "upper", upper)
    return float(_norm_cdf((upper - y) / u) - _norm_cdf((lower - y) / u))


def _array(name: str, value, positive=False) -> np.ndarray:
    try:
        a = np.asarray(value, dtype=float)
    except (TypeError, ValueError):
        raise ValueError(f"{name} must be finite numbers") from None
    if not np.all(np.isfinite(a)):
        raise ValueError(f"{name} must be finite numbers (NaN or infinity found)")
    if positive and np.any(a <= 0):
        raise ValueError(f"{name} must be > 0")
    return a


def conformance_probability_array(measured_error, u, lower, upper) -> np.ndarray:
    """conformance_probability for numpy arrays (broadcast), same formula and checks."""
    y = _array("measured_error", measured_error)
    u = _array("u", u, positive=True)
    lower, upper = _array("lower", lower), _array("upper", upper)
    if np.any(lower >= upper):
        raise ValueError("lower must be < upper")
    return _norm_cdf((upper - y) / u) - _norm_cdf((lower - y) / u)


# JCGM 106 §9 -------------------------------------------------------------------------------------------
def _check_global(prior_mean, prior_sd, u, lower, upper, accept_lower, accept_upper):
    return (_finite("prior_mean", prior_mean), _positive("prior_sd", prior_sd), _positive("u", u),
            *_interval("lower", lower, "upper", upper),
            *_interval("accept_lower", accept_lower, "accept_upper", accept_upper, strict=False))


def global_risks(prior_mean, prior_sd, u, lower, upper, accept_lower, accept_upper) -> Mapping[str, float]:
    """Global consumer's risk (probability of false accept, "pfa") and producer's risk (probability of false
    reject, "pfr") for a normal prior N(prior_mean, prior_sd^2) of the true error and a normal measurement with
    standard uncertainty u; tolerance [lower, upper], acceptance [accept_lower, accept_upper].
    JCGM 106:2012 §9.5.2 (R_C) and §9.5.3 (R_P), by numerical integration (absolute tolerance QUAD_EPSABS)."""
    mu, sd, u, lower, upper, a_lo, a_hi = _check_global(prior_mean, prior_sd, u, lower, upper,
                                                        accept_lower, accept_upper)

    def accepted(eta):
        return _norm_cdf((a_hi - eta) / u) - _norm_cdf((a_lo - eta) / u)

    def prior(eta):
        return math.exp(-0.5 * ((eta - mu) / sd) ** 2) / (sd * math.sqrt(2 * math.pi))

    lo_cut, hi_cut = mu - PRIOR_CUT * sd, mu + PRIOR_CUT * sd
    # P(Y_m in A | eta) changes within a few u of the acceptance limits: break the integration there so that a
    # narrow step (u much smaller than prior_sd) is not stepped over; beyond PRIOR_CUT * u of A it is < 2e-32
    reach = PRIOR_CUT * u
    breaks = (a_lo - reach, a_lo, a_lo + reach, a_hi - reach, a_hi, a_hi + reach, mu)

    def part(f, a, b):
        if b <= a:
            return 0.0
        inside = sorted(p for p in breaks if a < p < b)
        value, _ = integrate.quad(f, a, b, points=inside or None, epsabs=QUAD_EPSABS, epsrel=1e-10, limit=200)
        return value

    def false_accept_density(e):
        return prior(e) * accepted(e)

    def false_reject_density(e):
        return prior(e) * (1.0 - accepted(e))

    false_accept = (part(false_accept_density, max(lo_cut, a_lo - reach), min(lower, hi_cut))
                    + part(false_accept_density, max(upper, lo_cut), min(hi_cut, a_hi + reach)))
    false_reject = part(false_reject_density, max(lower, lo_cut), min(upper, hi_cut))
    return {"pfa": max(false_accept, 0.0), "pfr": max(false_reject, 0.0)}


def _bvn_lower(h, k, rho):
    """P(X <= h, Z <= k) for standard bivariate normal X, Z with correlation rho (0 <= rho < 1), arrays;
    Owen (1956) eq. (2.1) through Owen's T function (scipy.special.owens_t)."""
    h, k, rho = np.broadcast_arrays(np.asarray(h, float), np.asarray(k, float), np.asarray(rho, float))
    s = np.sqrt(1.0 - rho * rho)
    with np.errstate(divide="ignore", invalid="ignore"):
        a_h = (k - rho * h) / (h * s)
        a_k = (h - rho * k) / (k * s)
    # h = 0 (or k = 0): T(0, a) = arctan(a) / (2 pi), whose limit at a = +/-inf is +/-1/4 (sign of the numerator)
    a_h = np.where(h == 0, np.copysign(np.inf, k - rho * h), a_h)
    a_k = np.where(k == 0, np.copysign(np.inf, h - rho * k), a_k)
    beta = np.where((h * k < 0) | ((h * k == 0) & (h + k < 0)), 0.5, 0.0)
    value = 0.5 * (_norm_cdf(h) + _norm_cdf(k)) - special.owens_t(h, a_h) - special.owens_t(k, a_k) - beta
    # h = k = 0: Sheppard's formula 1/4 + arcsin(rho) / (2 pi)
    both_zero = (h == 0) & (k == 0)
    value = np.where(both_zero, 0.25 + np.arcsin(rho) / (2 * np.pi), value)
    return np.clip(value, 0.0, 1.0)


def _bvn_rectangle(h1, h2, k1, k2, rho):
    """P(h1 < X <= h2, k1 < Z <= k2), standard bivariate normal with correlation rho."""
    return (_bvn_lower(h2, k2, rho) - _bvn_lower(h1, k2, rho) - _bvn_lower(h2, k1, rho) + _bvn_lower(h1, k1, rho))


def global_risks_array(prior_mean, prior_sd, u, lower, upper, accept_lower, accept_upper) -> dict:
    """global_risks for numpy arrays (broadcast), in closed form: (Y, Y_m) is bivariate normal with
    sd(Y) = prior_sd, sd(Y_m) = sqrt(prior_sd^2 + u^2), correlation prior_sd / sd(Y_m), so
        PFA = P(Y_m in A) - P(Y in C, Y_m in A),   PFR = P(Y in C) - P(Y in C, Y_m in A).
    Returns {"pfa": array, "pfr": array}. An empty acceptance interval (accept_lower == accept_upper) gives
    PFA = 0."""
    mu = _array("prior_mean", prior_mean)
    sd = _array("prior_sd", prior_sd, positive=True)
    u = _array("u", u, positive=True)
    lower, upper = _array("lower", lower), _array("upper", upper)
    a_lo, a_hi = _array("accept_lower", accept_lower), _array("accept_upper", accept_upper)
    if np.any(lower >= upper):
        raise ValueError("lower must be < upper")
    if np.any(a_lo > a_hi):
        raise ValueError("accept_lower must be <= accept_upper")
    sm = np.sqrt(sd * sd + u * u)
    rho = sd / sm
    c1, c2 = (lower - mu) / sd, (upper - mu) / sd
    m1, m2 = (a_lo - mu) / sm, (a_hi - mu) / sm
    both = _bvn_rectangle(c1, c2, m1, m2, rho)
    p_accept = _norm_cdf(m2) - _norm_cdf(m1)
    p_conform = _norm_cdf(c2) - _norm_cdf(c1)
    return {"pfa": np.clip(p_accept - both, 0.0, 1.0), "pfr": np.clip(p_conform - both, 0.0, 1.0)}


# JCGM 106 §8 -------------------------------------------------------------------------------------------
def _check_target(target_pfa) -> float:
    t = _finite("target_pfa", target_pfa)
    if not 0 < t < 1:
        raise ValueError(f"target_pfa must be between 0 and 1 (exclusive), got {target_pfa!r}")
    return t


def acceptance_limits_for_pfa(prior_mean, prior_sd, u, lower, upper, target_pfa) -> tuple[float, float]:
    """Acceptance limits (accept_lower, accept_upper) = (lower + w, upper - w) with the smallest guard band
    w >= 0 for which the global PFA (JCGM 106 §9.5.2) is <= target_pfa; JCGM 106:2012 §8.3.2 (guarded
    acceptance). w = 0 when simple acceptance already meets the target; an empty interval (both limits at the
    middle of the tolerance) when no w does."""
    mu, sd, u = _finite("prior_mean", prior_mean), _positive("prior_sd", prior_sd), _positive("u", u)
    lower, upper = _interval("lower", lower, "upper", upper)
    target = _check_target(target_pfa)
    lo, hi = acceptance_limits_for_pfa_array(mu, sd, u, lower, upper, target)
    return float(lo), float(hi)


def acceptance_limits_for_pfa_array(prior_mean, prior_sd, u, lower, upper, target_pfa):
    """acceptance_limits_for_pfa for numpy arrays (broadcast): a bisection on w over all items at once, with the
    closed-form PFA of global_risks_array, to GUARD_TOLERANCE of the half-width, rounded towards the safe side
    (the wider guard band). Returns (accept_lower, accept_upper) arrays."""
    mu = _array("prior_mean", prior_mean)
    sd = _array("prior_sd", prior_sd, positive=True)
    u = _array("u", u, positive=True)
    lower, upper = _array("lower", lower), _array("upper", upper)
    target = _array("target_pfa", target_pfa)
    if np.any((target <= 0) | (target >= 1)):
        raise ValueError("target_pfa must be between 0 and 1 (exclusive)")
    if np.any(lower >= upper):
        raise ValueError("lower must be < upper")
    mu, sd, u, lower, upper, target = np.broadcast_arrays(mu, sd, u, lower, upper, target)
    half = (upper - lower) / 2.0

    def pfa(w):
        return global_risks_array(mu, sd, u, lower, upper, lower + w, upper - w)["pfa"]

    w_lo = np.zeros_like(half)             # PFA(w_lo) > target, unless already met at 0
    w_hi = half.copy()                      # PFA(half) = 0 <= target
    met = pfa(w_lo) <= target
    w_hi = np.where(met, 0.0, w_hi)
    steps = int(math.ceil(math.log2(1.0 / GUARD_TOLERANCE))) + 1
    for _ in range(steps):
        active = w_hi - w_lo > GUARD_TOLERANCE * half
        if not np.any(active):
            break
        mid = (w_lo + w_hi) / 2.0
        ok = pfa(mid) <= target
        w_hi = np.where(active & ok, mid, w_hi)
        w_lo = np.where(active & ~ok, mid, w_lo)
    return lower + w_hi, upper - w_hi


# The prior of like devices (JCGM 106 §9.2) -------------------------------------------------------------
#: fewest as-found errors for a normal fit of a group of like devices (common practice: about 30 values give a
#: standard deviation to within about 13 % at one standard uncertainty, 1/sqrt(2(n-1)), GUM Table E.1)
PRIOR_MIN_COUNT = 30
#: the prior when no group has enough history, in MPE units: centred, SD = MPE / 2, so about 95 % of like devices
#: are found within their MPE - the end-of-period reliability target usual in interval analysis (common practice)
DEFAULT_PRIOR_MEAN = 0.0
DEFAULT_PRIOR_SD = 0.5


def fit_normal(values) -> tuple[float, float, int]:
    """(mean, standard deviation with n - 1, count) of finite values; the normal fit of the prior (JCGM 106
    §9.2: the distribution of the property over like items, from their history). Fewer than two values: ValueError."""
    a = np.asarray(values, dtype=float)
    a = a[np.isfinite(a)]
    if a.size < 2:
        raise ValueError(f"values must hold at least two finite numbers, got {a.size}")
    return float(a.mean()), float(a.std(ddof=1)), int(a.size)


def choose_prior(fits: Mapping, principle: str, fluid_id, min_count: int = PRIOR_MIN_COUNT):
    """The prior for a device: its principle and fluid's fit when it counts min_count values or more, else its
    principle's, else the stated default. `fits` maps (principle, fluid_id) and (principle, None) to (mean, sd,
    count). Returns (mean, sd, count, scope) with scope "principle and fluid", "principle" or "default"."""
    for key, scope in (((principle, fluid_id), "principle and fluid"), ((principle, None), "principle")):
        if key[1] is None and scope != "principle":
            continue
        fit = fits.get(key)
        if fit is not None and fit[2] >= min_count and fit[1] > 0:
            return fit[0], fit[1], fit[2], scope
    return DEFAULT_PRIOR_MEAN, DEFAULT_PRIOR_SD, 0, "default"
