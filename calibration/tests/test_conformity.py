"""calibration/conformity.py against independent computations and JCGM 106:2012.

Sources beside each check: closed forms of the normal distribution, JCGM 106:2012 statements (quoted from
memory where marked), scipy's dblquad over the joint density and scipy's bivariate normal CDF (Genz's
algorithm) as computations independent of ours.
"""
import math

import numpy as np
import pytest
from scipy import integrate, stats

from calibration import conformity as c

CASES = [
    # prior_mean, prior_sd, u, lower, upper, accept_lower, accept_upper
    (0.0, 0.5, 0.25, -1.0, 1.0, -0.5, 0.5),      # guard band w = U (k = 2), TUR 2:1
    (0.1, 0.4, 0.1, -1.0, 1.0, -1.0, 1.0),       # simple acceptance, TUR 5:1, prior off centre
    (-0.3, 0.6, 0.5, -1.0, 1.0, -0.8, 0.7),      # asymmetric acceptance, TUR 1:1
    (0.0, 1.0, 0.05, -1.0, 1.0, -1.0, 1.0),      # wide prior, good measurement
    (0.9, 0.05, 0.01, -1.0, 1.0, -0.99, 0.99),   # prior near the upper limit
    (2.0, 3.0, 1.5, -0.5, 4.0, 0.0, 3.0),        # absolute units, not centred on zero
]


def dblquad_risks(mu, sd, u, lower, upper, a_lo, a_hi):
    """Independent: scipy dblquad over the joint density g0(eta) h(y_m | eta) (JCGM 106 §9.5.2, §9.5.3)."""
    def joint(ym, eta):
        return stats.norm.pdf(eta, mu, sd) * stats.norm.pdf(ym, eta, u)

    def over(eta_a, eta_b, y_a, y_b):
        if eta_b <= eta_a or y_b <= y_a:
            return 0.0
        return integrate.dblquad(joint, eta_a, eta_b, y_a, y_b, epsabs=1e-13, epsrel=1e-10)[0]

    far = 12 * max(sd, u) + abs(mu) + abs(lower) + abs(upper)
    pfa = over(-far, lower, a_lo, a_hi) + over(upper, far, a_lo, a_hi)
    pfr = over(lower, upper, -far, a_lo) + over(lower, upper, a_hi, far)
    return pfa, pfr


def genz_risks(mu, sd, u, lower, upper, a_lo, a_hi):
    """Independent: the rectangle probabilities of (Y, Y_m) from scipy's multivariate normal CDF (Genz)."""
    cov = [[sd * sd, sd * sd], [sd * sd, sd * sd + u * u]]
    mvn = stats.multivariate_normal(mean=[mu, mu], cov=cov)
    both = mvn.cdf([upper, a_hi]) - mvn.cdf([lower, a_hi]) - mvn.cdf([upper, a_lo]) + mvn.cdf([lower, a_lo])
    sm = math.hypot(sd, u)
    p_accept = stats.norm.cdf(a_hi, mu, sm) - stats.norm.cdf(a_lo, mu, sm)
    p_conform = stats.norm.cdf(upper, mu, sd) - stats.norm.cdf(lower, mu, sd)
    return p_accept - both, p_conform - both


# JCGM 106 §7: conformance probability ------------------------------------------------------------------
def test_conformance_probability_closed_forms():
    # a measured value on a tolerance limit, far from the other: p_c = 50 % (JCGM 106 §7, normal PDF symmetry)
    assert c.conformance_probability(1.0, 0.1, -100.0, 1.0) == pytest.approx(0.5, abs=1e-12)
    # at w = U = 2u inside a one-sided limit: p_c = Phi(2) = 97.7 % (JCGM 106 §8.3.2; "97.7 %" quoted from memory)
    assert c.conformance_probability(0.8, 0.1, -100.0, 1.0) == pytest.approx(stats.norm.cdf(2.0), abs=1e-12)
    assert round(c.conformance_probability(0.8, 0.1, -100.0, 1.0), 3) == 0.977
    # w = 1.645 u gives 95 % (JCGM 106 §8.3.2 example of a 95 % guard band; from memory)
    assert c.conformance_probability(1.0 - 1.6448536269514722 * 0.1, 0.1, -100.0, 1.0) == pytest.approx(0.95, abs=1e-9)
    # centred, tolerance +/- 2u: 2 Phi(2) - 1 = 95.45 % (normal distribution, closed form)
    assert c.conformance_probability(0.0, 0.5, -1.0, 1.0) == pytest.approx(2 * stats.norm.cdf(2.0) - 1, abs=1e-12)


def test_conformance_probability_against_scipy_integration():
    for y, u, lo, hi in [(0.12, 0.05, -0.2, 0.2), (-0.125, 0.1, -0.2, 0.2), (0.3, 0.05, -0.2, 0.2)]:
        expected = integrate.quad(lambda eta: stats.norm.pdf(eta, y, u), lo, hi, epsabs=1e-13)[0]
        assert c.conformance_probability(y, u, lo, hi) == pytest.approx(expected, abs=1e-10)


def test_field_finding_tur_2_points_are_likely_conforming():
    """The issue's field finding: errors -0.10 to -0.125 % against +/-0.2 % with a TUR 2:1 reference
    (U = 0.1 %, k = 2, u = 0.05 %): p_c is 93 % to 98 %, not a failure."""
    for error in (-0.10, -0.125):
        p = c.conformance_probability(error, 0.05, -0.2, 0.2)
        expected = stats.norm.cdf((0.2 - error) / 0.05) - stats.norm.cdf((-0.2 - error) / 0.05)
        assert p == pytest.approx(expected, abs=1e-12)
        assert 0.93 < p < 0.98


def test_conformance_probability_array_matches_scalar():
    ys = np.linspace(-0.3, 0.3, 13)
    us = np.linspace(0.01, 0.2, 13)
    got = c.conformance_probability_array(ys, us, -0.2, 0.2)
    for y, u, p in zip(ys, us, got):
        assert p == pytest.approx(c.conformance_probability(y, u, -0.2, 0.2), abs=1e-15)


# JCGM 106 §9: global risks ----------------------------------------------------------------------------
@pytest.mark.parametrize("case", CASES)
def test_global_risks_against_dblquad_and_genz(case):
    risks = c.global_risks(*case)
    pfa, pfr = dblquad_risks(*case)
    assert risks["pfa"] == pytest.approx(pfa, abs=1e-9)
    assert risks["pfr"] == pytest.approx(pfr, abs=1e-9)
    g_pfa, g_pfr = genz_risks(*case)
    assert risks["pfa"] == pytest.approx(g_pfa, abs=1e-6)   # Genz's CDF is accurate to about 1e-7 here
    assert risks["pfr"] == pytest.approx(g_pfr, abs=1e-6)


@pytest.mark.parametrize("case", CASES)
def test_global_risks_identity(case):
    """PFA - PFR = P(Y_m in A) - P(Y in C), with Y_m ~ N(mu, sd^2 + u^2): an identity of the definitions."""
    mu, sd, u, lo, hi, a_lo, a_hi = case
    risks = c.global_risks(*case)
    sm = math.hypot(sd, u)
    expected = (stats.norm.cdf(a_hi, mu, sm) - stats.norm.cdf(a_lo, mu, sm)
                - (stats.norm.cdf(hi, mu, sd) - stats.norm.cdf(lo, mu, sd)))
    assert risks["pfa"] - risks["pfr"] == pytest.approx(expected, abs=1e-10)


def test_global_risks_closed_form_limits():
    # acceptance interval covering everything: PFA = P(Y outside C), PFR = 0 (definition, closed form)
    risks = c.global_risks(0.2, 0.5, 0.1, -1.0, 1.0, -50.0, 50.0)
    assert risks["pfa"] == pytest.approx(stats.norm.sf(1.0, 0.2, 0.5) + stats.norm.cdf(-1.0, 0.2, 0.5), abs=1e-10)
    assert risks["pfr"] == pytest.approx(0.0, abs=1e-10)
    # empty acceptance interval: nothing accepted, PFA = 0, PFR = P(Y in C)
    risks = c.global_risks(0.0, 0.5, 0.1, -1.0, 1.0, 0.0, 0.0)
    assert risks["pfa"] == 0.0
    assert risks["pfr"] == pytest.approx(stats.norm.cdf(1.0, 0, 0.5) - stats.norm.cdf(-1.0, 0, 0.5), abs=1e-10)
    # a very good measurement (u -> 0) with A = C: PFA ~ PFR ~ u * sum of g0 at the limits / sqrt(2 pi)
    # (first-order expansion of the JCGM 106 §9.5 integrals: integral of Phi(-t) over t > 0 is 1/sqrt(2 pi))
    u = 1e-4
    approx = u * (stats.norm.pdf(1.0, 0, 0.5) + stats.norm.pdf(-1.0, 0, 0.5)) / math.sqrt(2 * math.pi)
    risks = c.global_risks(0.0, 0.5, u, -1.0, 1.0, -1.0, 1.0)
    assert risks["pfa"] == pytest.approx(approx, rel=1e-3)
    assert risks["pfr"] == pytest.approx(approx, rel=1e-3)


def test_guard_band_lowers_pfa_and_raises_pfr():
    """JCGM 106 §8.3: a guard band trades consumer's risk for producer's risk."""
    simple = c.global_risks(0.0, 0.5, 0.25, -1.0, 1.0, -1.0, 1.0)
    guarded = c.global_risks(0.0, 0.5, 0.25, -1.0, 1.0, -0.5, 0.5)
    assert guarded["pfa"] < simple["pfa"]
    assert guarded["pfr"] > simple["pfr"]


def test_global_risks_array_matches_scalar():
    arrays = [np.array(col, dtype=float) for col in zip(*CASES)]
    got = c.global_risks_array(*arrays)
    for k, case in enumerate(CASES):
        scalar = c.global_risks(*case)
        assert got["pfa"][k] == pytest.approx(scalar["pfa"], abs=1e-10)
        assert got["pfr"][k] == pytest.approx(scalar["pfr"], abs=1e-10)


def test_global_risks_array_zero_arguments_of_owens_t():
    """Owen's T route at h = 0 and k = 0 (prior centred on a limit or an acceptance limit): the scalar
    integration is the reference."""
    for case in [(1.0, 0.5, 0.2, -1.0, 1.0, -0.8, 0.8), (0.0, 0.5, 0.2, -1.0, 1.0, 0.0, 0.0),
                 (0.0, 0.5, 0.2, 0.0, 1.0, 0.0, 0.8), (0.8, 0.5, 0.2, -1.0, 1.0, -0.8, 0.8)]:
        got = c.global_risks_array(*case)
        scalar = c.global_risks(*case)
        assert float(got["pfa"]) == pytest.approx(scalar["pfa"], abs=1e-10)
        assert float(got["pfr"]) == pytest.approx(scalar["pfr"], abs=1e-10)


# JCGM 106 §8: acceptance limits for a PFA target ------------------------------------------------------
@pytest.mark.parametrize("prior_mean, prior_sd, u", [(0.0, 0.5, 0.25), (0.1, 0.6, 0.5), (-0.2, 0.4, 0.1)])
def test_acceptance_limits_meet_the_target(prior_mean, prior_sd, u):
    target = 0.02   # ANSI/NCSL Z540.3 §5.3 b: PFA <= 2 %
    a_lo, a_hi = c.acceptance_limits_for_pfa(prior_mean, prior_sd, u, -1.0, 1.0, target)
    assert -1.0 <= a_lo <= a_hi <= 1.0
    w = a_lo + 1.0
    assert 1.0 - a_hi == pytest.approx(w, abs=1e-12)
    at = c.global_risks(prior_mean, prior_sd, u, -1.0, 1.0, a_lo, a_hi)["pfa"]
    assert at <= target + 1e-9
    if w > 0:   # the smallest guard band: a little less and the target is missed (independent dblquad)
        narrower = dblquad_risks(prior_mean, prior_sd, u, -1.0, 1.0, a_lo - 1e-4, a_hi + 1e-4)[0]
        assert narrower > target
        assert at == pytest.approx(target, abs=1e-6)


def test_acceptance_limits_no_guard_band_when_simple_acceptance_meets_target():
    # prior well inside the tolerance, good measurement: PFA of simple acceptance below 2 %, so w = 0
    assert c.global_risks(0.0, 0.3, 0.05, -1.0, 1.0, -1.0, 1.0)["pfa"] < 0.02
    assert c.acceptance_limits_for_pfa(0.0, 0.3, 0.05, -1.0, 1.0, 0.02) == (-1.0, 1.0)


def test_acceptance_limits_array_matches_scalar():
    mus, sds, us = np.array([0.0, 0.1, -0.2]), np.array([0.5, 0.6, 0.4]), np.array([0.25, 0.5, 0.1])
    lo, hi = c.acceptance_limits_for_pfa_array(mus, sds, us, -1.0, 1.0, 0.02)
    for k in range(3):
        s_lo, s_hi = c.acceptance_limits_for_pfa(mus[k], sds[k], us[k], -1.0, 1.0, 0.02)
        assert lo[k] == pytest.approx(s_lo, abs=1e-12)
        assert hi[k] == pytest.approx(s_hi, abs=1e-12)


# Bad input ---------------------------------------------------------------------------------------------
@pytest.mark.parametrize("kwargs, name", [
    (dict(measured_error=float("nan"), u=0.1, lower=-1, upper=1), "measured_error"),
    (dict(measured_error=0.0, u=float("inf"), lower=-1, upper=1), "u"),
    (dict(measured_error=0.0, u=0.0, lower=-1, upper=1), "u"),
    (dict(measured_error=0.0, u=-0.1, lower=-1, upper=1), "u"),
    (dict(measured_error=0.0, u=0.1, lower=1, upper=-1), "lower"),
    (dict(measured_error=0.0, u=0.1, lower=-1, upper=None), "upper"),
    (dict(measured_error="x", u=0.1, lower=-1, upper=1), "measured_error"),
])
def test_conformance_probability_refuses_bad_input(kwargs, name):
    with pytest.raises(ValueError, match=name):
        c.conformance_probability(**kwargs)


@pytest.mark.parametrize("position, value, name", [
    (0, float("nan"), "prior_mean"), (1, 0.0, "prior_sd"), (1, -1.0, "prior_sd"), (2, float("inf"), "u"),
    (2, 0.0, "u"), (3, 2.0, "lower"), (5, 1.5, "accept_lower"),
])
def test_global_risks_refuses_bad_input(position, value, name):
    args = [0.0, 0.5, 0.1, -1.0, 1.0, -0.9, 0.9]
    args[position] = value
    with pytest.raises(ValueError, match=name):
        c.global_risks(*args)
    with pytest.raises(ValueError, match=name):
        c.global_risks_array(*args)


@pytest.mark.parametrize("target", [0.0, 1.0, -0.1, float("nan")])
def test_acceptance_limits_refuse_bad_target(target):
    with pytest.raises(ValueError, match="target_pfa"):
        c.acceptance_limits_for_pfa(0.0, 0.5, 0.1, -1.0, 1.0, target)
    with pytest.raises(ValueError, match="target_pfa"):
        c.acceptance_limits_for_pfa_array(0.0, 0.5, 0.1, -1.0, 1.0, target)


# The prior of like devices (JCGM 106 §9.2) ------------------------------------------------------------
def test_fit_normal_against_the_statistics_module():
    import statistics

    values = [0.12, -0.3, 0.05, 0.41, -0.07, 0.0, 0.22]
    mean, sd, count = c.fit_normal(values + [float("nan")])   # a NaN is left out
    assert (mean, count) == (pytest.approx(statistics.fmean(values), abs=1e-15), 7)
    assert sd == pytest.approx(statistics.stdev(values), rel=1e-12)   # n - 1
    with pytest.raises(ValueError, match="values"):
        c.fit_normal([0.1])


def test_choose_prior_falls_back_from_fluid_to_principle_to_the_default():
    enough, few = c.PRIOR_MIN_COUNT, c.PRIOR_MIN_COUNT - 1
    fits = {("vortex", 3): (0.1, 0.3, enough), ("vortex", None): (0.0, 0.4, 200),
            ("turbine", 5): (0.2, 0.2, few), ("turbine", None): (0.05, 0.45, few)}
    assert c.choose_prior(fits, "vortex", 3) == (0.1, 0.3, enough, "principle and fluid")
    assert c.choose_prior(fits, "vortex", 9) == (0.0, 0.4, 200, "principle")
    assert c.choose_prior(fits, "vortex", None) == (0.0, 0.4, 200, "principle")
    assert c.choose_prior(fits, "turbine", 5) == (c.DEFAULT_PRIOR_MEAN, c.DEFAULT_PRIOR_SD, 0, "default")
    assert c.choose_prior({}, "coriolis", 1)[3] == "default"
    # the stated default: about 95 % of like devices within the MPE (2 Phi(2) - 1 = 95.45 %)
    inside = stats.norm.cdf(1, c.DEFAULT_PRIOR_MEAN, c.DEFAULT_PRIOR_SD) - stats.norm.cdf(-1, c.DEFAULT_PRIOR_MEAN,
                                                                                         c.DEFAULT_PRIOR_SD)
    assert inside == pytest.approx(0.9545, abs=1e-4)
