"""Measurement uncertainty of a calibration point, per the GUM
(JCGM 100:2008, "Evaluation of measurement data - Guide to the expression
of uncertainty in measurement"). Pure Python and scipy's special functions,
no Django imports.

All quantities are in flow units unless stated otherwise. The model is
E = ind - ref with unit sensitivity coefficients, so the combined standard
uncertainty is the root-sum-square of the components (GUM 5.1.2, eq. 10,
uncorrelated inputs). The coverage factor is not fixed at 2: it is the
Student-t quantile for the effective degrees of freedom of the point's budget
(Welch-Satterthwaite, GUM G.4.1, eq. G.2b), at the coverage probability
COVERAGE_PROBABILITY (95 %).
"""

from __future__ import annotations

import math
import statistics
from dataclasses import dataclass
from functools import lru_cache
from typing import Iterable, Sequence

from scipy import special

from plant import checks

#: Minimum test uncertainty ratio, 4:1 (ANSI/NCSL Z540.3-2006 §5.3 b, where no
#: false-accept risk is computed; Z540.3 Handbook).
TUR_WARNING = 4.0

#: Coverage probability of every expanded uncertainty U (and of the TUR's U): 95 %
#: (ANSI/NCSL Z540.3 defines TUR with the 95 % expanded uncertainty; GUM 6.2.2, G.3).
COVERAGE_PROBABILITY = 0.95

#: What the decision-rule policy can say about a point whose TUR is below TUR_WARNING:
#: "warn" - state it on the results page and the certificate only;
#: "require_guarded" - also refuse simple acceptance for that calibration (ILAC-G8:09/2019 §4.2.2
#: guarded acceptance, w = U, must be chosen).
LOW_TUR_POLICIES = ("warn", "require_guarded", "require_risk")


def _nonneg(name: str, v: float) -> float:
    try:
        f = float(v) if v is not None and not isinstance(v, bool) else math.nan
    except (TypeError, ValueError):
        f = math.nan
    if not math.isfinite(f) or f < 0:
        raise ValueError(f"{name} must be a finite number >= 0, got {v!r}")
    return f


def standard_from_expanded(U: float, k: float = 2) -> float:
    """Standard uncertainty u = U / k from an expanded uncertainty (GUM 6.2.1, 4.3.3)."""
    _nonneg("U", U)
    k = float(k)
    if not math.isfinite(k) or k <= 0:
        raise ValueError("coverage factor k must be > 0")
    return U / k


# Common practice (no standard document; a usual rule for flow references): a reference whose range is stated
# from zero is not used below 10 % of its range maximum, where a % of reading uncertainty is not credible.
STANDARD_USABLE_MIN_FRACTION = 0.10


def standard_usable_range(range_min: float, range_max: float) -> tuple[float, float, bool]:
    """The range over which a reference standard's stated uncertainty holds: its calibrated range
    (JCGM 200:2012 (VIM) 4.7 measuring interval: a stated uncertainty applies only there). When the range is
    stated from 0, the usable minimum is STANDARD_USABLE_MIN_FRACTION of the range maximum (common practice).

    Returns (low, high, low_is_rule_of_thumb)."""
    low, high = float(range_min), float(range_max)
    if low <= 0:
        return STANDARD_USABLE_MIN_FRACTION * high, high, True
    return low, high, False


def reference_standard_u(reference_value: float, U_ref: float, basis: str, k: float = 2) -> float:
    """Standard uncertainty of the reference (Type B, GUM 4.3.3) in flow units.

    basis "pct_reading": U_ref is a percentage of the reference reading;
    basis "absolute": U_ref is in flow units. Certificate U assumed at coverage k.
    """
    _nonneg("U_ref", U_ref)
    try:
        ref_ok = reference_value is not None and math.isfinite(float(reference_value))
    except (TypeError, ValueError):
        ref_ok = False
    if not ref_ok:
        raise ValueError(f"reference_value must be a finite number, got {reference_value!r}")
    if basis == "pct_reading":
        U_flow = U_ref * abs(float(reference_value)) / 100.0
    elif basis == "absolute":
        U_flow = U_ref
    else:
        raise ValueError(f"unknown reference uncertainty basis {basis!r}")
    return standard_from_expanded(U_flow, k)


def repeatability_u(readings: Iterable[float]) -> float:
    """Type A standard uncertainty of the mean: s(q)/sqrt(n), s with ddof=1 (GUM 4.2.2-4.2.3).

    Returns 0.0 for fewer than two readings (no Type A estimate possible from them; ``point_uncertainty``
    then uses the device's known repeatability, see ``KnownRepeatability``). NaN or inf refused.
    """
    values = [float(x) for x in readings]
    for v in values:
        if not math.isfinite(v):
            raise ValueError(f"readings must be finite numbers, got {v!r}")
    n = len(values)
    if n < 2:
        return 0.0
    return statistics.stdev(values) / math.sqrt(n)


def resolution_u(resolution: float) -> float:
    """Resolution of a digital indication: rectangular distribution of half-width
    res/2, u = res/sqrt(12) = res/(2*sqrt(3)) (GUM 4.3.7, F.2.2.1).

    A blank (None) resolution is refused, not taken as 0: a resolution left out would drop a component."""
    if resolution is None:
        raise ValueError("resolution is blank: enter the resolution of the indication (the smallest step it shows)")
    return _nonneg("resolution", resolution) / math.sqrt(12.0)


@dataclass(frozen=True)
class KnownRepeatability:
    """The repeatability of a device known before this point, for a point with fewer than two readings.

    sd: standard deviation of a single reading, in flow units at this point; dof: its degrees of freedom
    (math.inf for a stated specification, Type B, GUM G.4.2; the pooled n - k for a pooled Type A estimate,
    GUM 4.2.4, G.3.3); source: which it is, in words ("the device's stated repeatability", "pooled SD of the
    device's own past repeats (n readings in k points)")."""

    sd: float
    dof: float
    source: str


def pooled_sd(groups: Iterable[Sequence[float]]) -> tuple[float, int]:
    """Pooled standard deviation of groups of repeat readings and its degrees of freedom (GUM 4.2.4):
    s_p^2 = sum (n_i - 1) s_i^2 / sum (n_i - 1), dof = sum (n_i - 1). Groups of fewer than two are left out;
    with none left, ValueError."""
    num, dof = 0.0, 0
    for group in groups:
        values = [float(v) for v in group]
        for v in values:
            if not math.isfinite(v):
                raise ValueError(f"groups: repeat readings must be finite numbers, got {v!r}")
        if len(values) >= 2:
            num += (len(values) - 1) * statistics.variance(values)
            dof += len(values) - 1
    if dof == 0:
        raise ValueError("groups: no group has two or more readings; a pooled SD needs repeats")
    return math.sqrt(num / dof), dof


def combine(*components: float) -> float:
    """Combined standard uncertainty, root-sum-square of uncorrelated components
    with unit sensitivity (GUM 5.1.2, eq. 10)."""
    return math.sqrt(sum(_nonneg("components", c) ** 2 for c in components))


def effective_dof(components: Iterable[tuple[float, float]]) -> float:
    """Effective degrees of freedom of u_c by the Welch-Satterthwaite formula
    (JCGM 100:2008 G.4.1, eq. G.2b): nu_eff = u_c^4 / sum(u_i^4 / nu_i).

    `components` are (u_i, nu_i) pairs with unit sensitivity; nu_i = inf for a
    component known exactly enough (Type B from a certificate or a rectangular
    bound, GUM G.4.2-G.4.3) contributes nothing to the sum. Returns inf when every
    nu_i is infinite or u_c is 0 (nothing uncertain: the normal quantile applies).
    """
    pairs = [(_nonneg("components (u)", u), nu) for u, nu in components]
    for _, nu in pairs:
        if nu is None or isinstance(nu, bool) or not (float(nu) > 0):  # also refuses NaN
            raise ValueError(f"components (nu): degrees of freedom must be > 0, got {nu!r}")
    pairs = [(u, float(nu)) for u, nu in pairs]
    u_c = math.sqrt(sum(u * u for u, _ in pairs))
    denominator = sum((u / u_c) ** 4 / nu for u, nu in pairs if math.isfinite(nu)) if u_c > 0 else 0.0
    if denominator == 0:
        return math.inf
    return 1.0 / denominator  # (u_c^4 / sum(u_i^4/nu_i)), scaled by u_c^4 to stay in range


@lru_cache(maxsize=4096)  # most points have nu_eff = inf or a few repeats: the same k again and again
def coverage_factor(dof: float, p: float = COVERAGE_PROBABILITY) -> float:
    """Coverage factor k = t_p(nu): the two-sided Student-t quantile for coverage
    probability p (JCGM 100:2008 G.3.2, G.4.1 step d, Table G.2). A non-integer nu_eff is
    used as it is: the t quantile is computed at the fractional nu (scipy's stdtrit), neither
    truncated to the next lower integer (GUM G.4.1 b) nor linearly interpolated in Table G.2
    (G.4.1 note 1 allows interpolation); the three differ by less than 0.02 in k for nu >= 2 (our
    check, from memory). nu = inf gives the normal quantile (1.960 for p = 95 %)."""
    if p is None or isinstance(p, bool) or not 0 < float(p) < 1:  # NaN fails too
        raise ValueError(f"p: coverage probability must lie between 0 and 1, got {p!r}")
    p = float(p)
    if dof is None or isinstance(dof, bool) or not (float(dof) > 0):
        raise ValueError(f"dof: degrees of freedom must be > 0, got {dof!r}")
    dof = float(dof)
    q = 0.5 + p / 2
    if math.isinf(dof):
        return float(special.ndtri(q))
    return float(special.stdtrit(dof, q))


@dataclass(frozen=True)
class PointUncertainty:
    """Uncertainty budget of one point, all in flow units (nu_eff = inf when no component has finite dof).
    rep_source: where the repeatability came from ("the n repeat readings", a KnownRepeatability source)."""

    u_ref: float
    u_rep: float
    u_res: float
    u_c: float
    U: float
    k: float
    nu_eff: float
    p: float = COVERAGE_PROBABILITY
    rep_source: str = ""


def point_uncertainty(
    reference_value: float,
    references: Sequence[tuple[float, str]],
    repeats: Iterable[float],
    resolution: float,
    p: float = COVERAGE_PROBABILITY,
    repeatability: KnownRepeatability | None = None,
    require_repeatability: bool = False,
) -> PointUncertainty:
    """Budget for E = ind - ref (GUM 5.1.2, unit sensitivities, uncorrelated):

    * every reference standard used, each a Type B component from its certificate U at k=2,
      nu = inf (GUM 4.3.3, G.4.2), combined by RSS into u_ref (all standards used enter); at least one
      standard is required (ValueError naming `references`: no standard, no uncertainty);
    * repeatability of the indications: with two or more readings, Type A, u = s/sqrt(n), nu = n - 1
      (GUM 4.2.3, G.3.3); with fewer, the device's known repeatability (`repeatability`: its stated
      specification or the pooled SD of its own past repeats, GUM 4.2.4), u = sd/sqrt(max(n, 1)), nu as
      given; with fewer and none known, no repeatability term (rep_source says so) or, with
      `require_repeatability`, ValueError naming `repeats` (a single reading says nothing of it);
    * resolution of the indication, Type B rectangular, nu = inf (GUM F.2.2.1, G.4.3); blank refused;

    u_c by RSS, nu_eff by Welch-Satterthwaite (GUM G.4.1), k = t_p(nu_eff) and U = k u_c
    (GUM 6.2.1, G.4.1). `references` is a sequence of (U_ref, basis) pairs.
    """
    references = list(references)
    if not references:
        raise ValueError("references: no reference standard given; the uncertainty of a point cannot be computed "
                         "without the standard it was compared with")
    ref = float(reference_value)
    if not math.isfinite(ref):
        raise ValueError(f"reference_value must be a finite number, got {reference_value!r}")
    u_refs = [reference_standard_u(ref, U_ref, basis) for U_ref, basis in references]
    u_ref = combine(*u_refs)
    values = checks.numbers_in("repeats", repeats)
    u_res = resolution_u(resolution)
    if len(values) >= 2:
        u_rep, rep_dof, source = repeatability_u(values), len(values) - 1, f"the {len(values)} repeat readings"
    elif repeatability is not None:
        sd = _nonneg("repeatability.sd", repeatability.sd)
        rep_dof = float(repeatability.dof)
        if not rep_dof > 0:
            raise ValueError(f"repeatability.dof must be > 0, got {repeatability.dof!r}")
        repeatability_u(values)  # refuses a NaN or inf reading
        u_rep, source = sd / math.sqrt(max(len(values), 1)), repeatability.source
    elif require_repeatability:
        raise ValueError("repeats: fewer than two readings and no repeatability known for this device (no stated "
                         "repeatability, no past repeats to pool); enter at least two repeat readings")
    else:
        repeatability_u(values)  # refuses a NaN or inf reading
        u_rep, rep_dof = 0.0, math.inf
        source = "none: fewer than two readings and no repeatability known for this device"
    u_c = combine(u_ref, u_rep, u_res)
    nu_eff = effective_dof([(u, math.inf) for u in u_refs] + [(u_res, math.inf), (u_rep, rep_dof)])
    k = coverage_factor(nu_eff, p)
    return PointUncertainty(u_ref=u_ref, u_rep=u_rep, u_res=u_res, u_c=u_c, U=k * u_c, k=k, nu_eff=nu_eff, p=p,
                            rep_source=source)


def test_uncertainty_ratio(mpe: float, U: float) -> float:
    """Test uncertainty ratio per ANSI/NCSL Z540.3-2006 §3.11: the span of the tolerance
    (-MPE..+MPE) over the span of the 95 % expanded uncertainty of the *calibration process*
    (-U..+U), i.e. (2 MPE) / (2 U) = MPE / U, where U is the point's own U (reference standards,
    repeatability, resolution), not the reference standard's alone. MPE and U on the same basis.
    Returns inf when U is 0."""
    mpe = _nonneg("mpe", mpe)
    U = _nonneg("U", U)
    if U == 0:
        return math.inf
    return (2 * mpe) / (2 * U)


# Keep pytest from collecting the function above as a test when imported.
test_uncertainty_ratio.__test__ = False


def tur_warning(tur: float) -> str | None:
    """Message if TUR is below 4:1 (TUR_WARNING, ANSI/NCSL Z540.3 §5.3 b), else None."""
    if tur is None or isinstance(tur, bool) or math.isnan(float(tur)) or float(tur) < 0:
        raise ValueError(f"tur must be a number >= 0 (inf allowed), got {tur!r}")
    if tur < TUR_WARNING:
        return (
            f"Test uncertainty ratio {tur:.2f}:1 is below {TUR_WARNING:g}:1: the uncertainty of the calibration "
            "is large against this tolerance, so the risk of a false accept is higher."
        )
    return None


def low_tur_requires_guarded(rule: str, turs: Iterable[float], policy: str) -> bool:
    """True when the decision-rule policy refuses `rule` for a calibration with these TURs below TUR_WARNING:
    "require_guarded" refuses simple acceptance (guarded or risk-based acceptance are allowed); "require_risk"
    refuses every rule but the risk-based one (JCGM 106, PFA <= target; issue 31)."""
    if policy not in LOW_TUR_POLICIES:
        raise ValueError(f"unknown low-TUR policy {policy!r}; expected one of {LOW_TUR_POLICIES}")
    if rule not in ("simple", "guarded", "risk"):
        raise ValueError(f"rule must be 'simple', 'guarded' or 'risk', not {rule!r}")
    turs = list(turs)
    for t in turs:
        if t is None or isinstance(t, bool) or math.isnan(float(t)) or float(t) < 0:
            raise ValueError(f"turs: a TUR must be a number >= 0 (inf allowed), got {t!r}")
    if not any(t < TUR_WARNING for t in turs):
        return False
    if policy == "require_guarded":
        return rule == "simple"
    return policy == "require_risk" and rule != "risk"
