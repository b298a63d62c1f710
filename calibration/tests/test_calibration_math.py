"""Pure-math tests for calibration.errors / uncertainty / decision (no database)."""

import math
import random

import pytest
from uncertainties import ufloat

from calibration import decision, errors, uncertainty as unc


# ---------------------------------------------------------------- errors
@pytest.mark.parametrize(
    "ref, ind, basis, span, expected",
    [
        (100.0, 101.0, "pct_reading", None, 1.0),
        (50.0, 49.5, "pct_reading", None, -1.0),
        (40.0, 41.0, "pct_span", 200.0, 0.5),
        (40.0, 38.0, "pct_span", 200.0, -1.0),
        (12.5, 12.75, "absolute", None, 0.25),
        (12.5, 12.0, "absolute", None, -0.5),
        # reverse flow (issue 26 item 8): % of reading divides by |ref|, as the MPE does (mpe * |ref| / 100),
        # so the error keeps the sign of ind - ref: -11 against -10 reads -10 %, -9 against -10 reads +10 %
        (-10.0, -11.0, "pct_reading", None, -10.0),
        (-10.0, -9.0, "pct_reading", None, 10.0),
    ],
)
def test_point_error(ref, ind, basis, span, expected):
    assert errors.point_error(ref, ind, basis, span) == pytest.approx(expected)


@pytest.mark.parametrize(
    "args",
    [
        (0.0, 1.0, "pct_reading", None),
        (10.0, 11.0, "pct_span", None),
        (10.0, 11.0, "pct_span", 0.0),
        (10.0, 11.0, "pct_span", -5.0),
        (10.0, 11.0, "bogus", None),
        (float("nan"), 1.0, "absolute", None),
    ],
)
def test_point_error_invalid(args):
    with pytest.raises(ValueError):
        errors.point_error(*args)


def test_mpe_and_error_units_roundtrip():
    # 0.5 % of reading at 80 -> 0.4 flow units; 1 % of span 200 -> 2
    assert errors.mpe_in_flow_units(0.5, "pct_reading", 80.0, None) == pytest.approx(0.4)
    assert errors.mpe_in_flow_units(1.0, "pct_span", 80.0, 200.0) == pytest.approx(2.0)
    assert errors.mpe_in_flow_units(0.3, "absolute", 80.0, None) == pytest.approx(0.3)
    assert errors.to_error_units(0.4, "pct_reading", 80.0, None) == pytest.approx(0.5)
    assert errors.to_error_units(2.0, "pct_span", 80.0, 200.0) == pytest.approx(1.0)
    assert errors.to_error_units(0.3, "absolute", 80.0, None) == pytest.approx(0.3)
    with pytest.raises(ValueError):
        errors.to_error_units(1.0, "pct_reading", 0.0, None)
    with pytest.raises(ValueError):
        errors.mpe_in_flow_units(1.0, "pct_span", 10.0, None)


# ---------------------------------------------------------------- uncertainty
def test_standard_from_expanded():
    assert unc.standard_from_expanded(0.2) == pytest.approx(0.1)
    assert unc.standard_from_expanded(0.3, k=3) == pytest.approx(0.1)
    with pytest.raises(ValueError):
        unc.standard_from_expanded(0.2, k=0)
    with pytest.raises(ValueError):
        unc.standard_from_expanded(-1)


def test_reference_standard_u():
    # 0.2 % of reading at 50 -> U = 0.1, u = 0.05
    assert unc.reference_standard_u(50.0, 0.2, "pct_reading") == pytest.approx(0.05)
    assert unc.reference_standard_u(50.0, 0.1, "absolute") == pytest.approx(0.05)
    with pytest.raises(ValueError):
        unc.reference_standard_u(50.0, 0.1, "pct_span")


def test_repeatability_u():
    # readings 1, 2, 3: s = 1, u = 1/sqrt(3)
    assert unc.repeatability_u([1, 2, 3]) == pytest.approx(1 / math.sqrt(3))
    assert unc.repeatability_u([5.0]) == 0.0
    assert unc.repeatability_u([]) == 0.0


def test_gum_resolution_rectangular():
    # GUM 4.3.7 / F.2.2.1 (numbers from memory): resolution dx -> half-width dx/2,
    # u = dx / (2*sqrt(3)) ~= 0.2887 dx.
    assert unc.resolution_u(1.0) == pytest.approx(0.2887, abs=5e-5)
    assert unc.resolution_u(0.01) == pytest.approx(0.01 / (2 * math.sqrt(3)))


def test_gum_h1_end_gauge_combined():
    # JCGM 100:2008 H.1 end-gauge calibration, table H.1 (numbers from memory):
    # |c_i| u(x_i) = 25 nm (l_s), 9.7 nm (d), 0 (alpha_s), 0 (theta),
    # 2.9 nm (delta alpha), 16.6 nm (delta theta)  ->  u_c(l) = 32 nm.
    u_c = unc.combine(25.0, 9.7, 0.0, 0.0, 2.9, 16.6)
    assert round(u_c) == 32


def test_combine_rss():
    assert unc.combine(3.0, 4.0) == pytest.approx(5.0)
    assert unc.combine() == 0.0


def test_point_uncertainty_budget():
    # reference 0.2 % of reading at 100 (k=2) -> u_ref = 0.1; repeats 99, 100, 101 -> s = 1, u_rep = 1/sqrt(3), nu = 2;
    # resolution 0.1 -> u_res = 0.1/sqrt(12) (GUM 4.3.3, 4.2.3, F.2.2.1)
    pu = unc.point_uncertainty(100.0, [(0.2, "pct_reading")], [99.0, 100.0, 101.0], 0.1)
    assert pu.u_ref == pytest.approx(0.1)
    assert pu.u_rep == pytest.approx(1 / math.sqrt(3))
    assert pu.u_res == pytest.approx(0.1 / math.sqrt(12))
    u_c2 = 0.01 + 1 / 3 + 0.01 / 12
    assert pu.u_c == pytest.approx(math.sqrt(u_c2))
    # Welch-Satterthwaite (GUM G.2b): only the repeatability has finite dof: nu_eff = 2 (u_c^2 / u_rep^2)^2
    assert pu.nu_eff == pytest.approx(2 * (u_c2 * 3) ** 2)
    assert pu.U == pytest.approx(pu.k * pu.u_c) and pu.p == 0.95


def test_issue_example_three_repeats_and_a_005_pct_reference():
    """Issue 17 item 1, worked by hand: repeats 50.0, 50.3, 50.6 at reference 50, reference U 0.05 % (k=2).

    u_rep = s/sqrt(3) = 0.3/sqrt(3) = 0.173205, nu = 2 (GUM 4.2.3, G.3.3); u_ref = 0.05 % x 50 / 2 = 0.0125 (nu = inf);
    u_c = sqrt(0.03 + 0.00015625) = 0.173656; nu_eff = 2 (u_c/u_rep)^4 = 2 x 1.0052083^2 = 2.0209 (GUM G.2b);
    k = t_0.975(2.0209) = 4.2603 (t of GUM Table G.2 at nu = 2 is 4.30, from memory);
    U = 4.2603 x 0.173656 = 0.7398 -> 0.740, not k = 2: 0.347. In % of span for a 0-100 span: 0.740 %."""
    pu = unc.point_uncertainty(50.0, [(0.05, "pct_reading")], [50.0, 50.3, 50.6], 0.0)
    assert pu.u_rep == pytest.approx(0.173205, abs=1e-6)
    assert pu.u_ref == pytest.approx(0.0125)
    assert pu.u_c == pytest.approx(0.173656, abs=1e-6)
    assert pu.nu_eff == pytest.approx(2.0209, abs=1e-4)
    assert pu.k == pytest.approx(4.2603, abs=1e-4)
    assert round(pu.U, 3) == 0.740
    assert round(2 * pu.u_c, 3) == 0.347  # what the fixed k = 2 gave
    assert errors.to_error_units(pu.U, "pct_span", 50.0, 100.0) == pytest.approx(0.740, abs=5e-4)


@pytest.mark.parametrize("nu,p,k", [
    # JCGM 100:2008 Table G.2, t_p(nu) (values from memory)
    (1, 0.95, 12.71), (2, 0.95, 4.30), (3, 0.95, 3.18), (10, 0.95, 2.23), (16, 0.99, 2.92), (50, 0.95, 2.01),
    (math.inf, 0.95, 1.960), (math.inf, 0.9545, 2.000), (math.inf, 0.99, 2.576), (2, 0.9545, 4.53),
])
def test_coverage_factor_gum_table_g2(nu, p, k):
    assert unc.coverage_factor(nu, p) == pytest.approx(k, abs=0.006)


def test_gum_h1_end_gauge_effective_dof_and_U99():
    """JCGM 100:2008 H.1.6 (end-gauge calibration; numbers from memory): components |c_i| u(x_i) with their dof
    25 nm (18), 9.7 nm (25.6), 2.9 nm (50), 16.6 nm (2), the two zero terms aside -> u_c = 32 nm,
    nu_eff = 16.7, truncated to 16 as H.1.6 does; t_99(16) = 2.92 and U_99 = 2.92 x 32 nm = 93 nm."""
    components = [(25.0, 18), (9.7, 25.6), (2.9, 50), (16.6, 2), (0.0, math.inf)]
    nu = unc.effective_dof(components)
    assert nu == pytest.approx(16.7, abs=0.1)
    k = unc.coverage_factor(math.floor(nu), 0.99)
    assert k == pytest.approx(2.92, abs=0.005)
    assert round(k * round(unc.combine(*(u for u, _ in components)))) == 93


def test_effective_dof_edge_cases():
    # every component Type B with infinite dof -> inf (normal quantile); nothing uncertain -> inf
    assert unc.effective_dof([(0.1, math.inf), (0.2, math.inf)]) == math.inf
    assert unc.effective_dof([(0.0, 2)]) == math.inf
    # one component alone keeps its own dof (G.2b with N = 1)
    assert unc.effective_dof([(0.3, 4)]) == pytest.approx(4)
    with pytest.raises(ValueError):
        unc.effective_dof([(0.1, 0)])
    with pytest.raises(ValueError):
        unc.coverage_factor(float("nan"))
    with pytest.raises(ValueError):
        unc.coverage_factor(3, 1.0)


def test_every_reference_standard_enters_u():
    """Issue 17 item 8: two standards used, 0.2 % of reading and 0.1 flow units absolute (each U at k=2) at 50:
    u = 0.05 and 0.05, combined by RSS: u_ref = sqrt(0.0025 + 0.0025) = 0.070711 (GUM 5.1.2); no Type A -> k = 1.96."""
    pu = unc.point_uncertainty(50.0, [(0.2, "pct_reading"), (0.1, "absolute")], [], 0.0)
    assert pu.u_ref == pytest.approx(0.070711, abs=1e-6)
    assert pu.nu_eff == math.inf and pu.k == pytest.approx(1.95996, abs=1e-5)
    assert pu.U == pytest.approx(1.95996 * 0.070711, abs=1e-5)
    single = unc.point_uncertainty(50.0, [(0.2, "pct_reading")], [], 0.0)
    assert single.U < pu.U


@pytest.mark.parametrize("seed", range(10))
def test_combined_matches_uncertainties_package(seed):
    rng = random.Random(seed)
    ref_value = rng.uniform(1, 500)
    U_ref_pct = rng.uniform(0.05, 1.0)
    resolution = rng.choice([0.001, 0.01, 0.1, 1.0])
    repeats = [ref_value * (1 + rng.gauss(0, 0.003)) for _ in range(rng.randint(2, 8))]

    pu = unc.point_uncertainty(ref_value, [(U_ref_pct, "pct_reading")], repeats, resolution)

    # Independent propagation: E = (mean indication + resolution term) - reference
    ref = ufloat(ref_value, U_ref_pct * ref_value / 100 / 2)
    mean_ind = ufloat(sum(repeats) / len(repeats), unc.repeatability_u(repeats))
    res = ufloat(0.0, resolution / math.sqrt(12))
    err = (mean_ind + res) - ref

    assert pu.u_c == pytest.approx(err.std_dev, rel=1e-12)
    # nu_eff from G.2b written out here, k from scipy's t quantile
    from scipy import stats

    nu = err.std_dev ** 4 / (mean_ind.std_dev ** 4 / (len(repeats) - 1))
    assert pu.nu_eff == pytest.approx(nu, rel=1e-9)
    assert pu.U == pytest.approx(stats.t.ppf(0.975, nu) * err.std_dev, rel=1e-9)


def test_tur_is_tolerance_span_over_the_points_own_U_span():
    """ANSI/NCSL Z540.3 §3.11 (from memory): TUR = span of the tolerance / span of the 95 % U of the calibration
    process. MPE +-0.5 %, U 0.125 % -> (1.0) / (0.25) = 4.0; issue 15 item 5: the point's U, not the reference's."""
    assert unc.test_uncertainty_ratio(0.5, 0.125) == pytest.approx(4.0)
    assert unc.test_uncertainty_ratio(1.0, 0.0) == math.inf
    # the issue's example: the reference alone, 0.05 % of 50 = 0.025 (k=2), would give 0.5 / 0.025 = 20:1 on a
    # 0-100 span; with the repeats the point's own U is 0.740 % of span: 0.5 / 0.7398 = 0.676:1
    pu = unc.point_uncertainty(50.0, [(0.05, "pct_reading")], [50.0, 50.3, 50.6], 0.0)
    assert unc.test_uncertainty_ratio(0.5, errors.to_error_units(pu.U, "pct_span", 50.0, 100.0)) == pytest.approx(
        0.676, abs=1e-3)
    assert unc.TUR_WARNING == 4.0
    assert unc.tur_warning(4.0) is None
    assert unc.tur_warning(10.0) is None
    msg = unc.tur_warning(3.0)
    assert msg and "3.00:1" in msg


def test_low_tur_policy():
    assert unc.low_tur_requires_guarded("simple", [5.0, 3.9], "require_guarded")
    assert not unc.low_tur_requires_guarded("guarded", [3.9], "require_guarded")
    assert not unc.low_tur_requires_guarded("simple", [3.9], "warn")
    assert not unc.low_tur_requires_guarded("simple", [4.0, math.inf], "require_guarded")  # 4:1 itself is enough
    with pytest.raises(ValueError):
        unc.low_tur_requires_guarded("simple", [3.0], "ignore")


# ---------------------------------------------------------------- decision
# ILAC-G8:09/2019, §4.2.1 (simple acceptance, w = 0) and §4.2.2 (guard band
# w = U: pass / conditional pass / conditional fail / fail).
# MPE = 1.0, U = 0.25 (binary-exact, so the boundaries are exact).
MPE, U = 1.0, 0.25


@pytest.mark.parametrize("sign", [1, -1])
@pytest.mark.parametrize(
    "mag, expected",
    [
        (0.0, "pass"),
        (0.5, "pass"),
        (0.75, "pass"),  # |E| = MPE - U  (boundary, inclusive)
        (0.875, "conditional pass"),
        (1.0, "conditional pass"),  # |E| = MPE (boundary, inclusive)
        (1.125, "conditional fail"),
        (1.25, "fail"),  # |E| = MPE + U (boundary)
        (2.0, "fail"),
    ],
)
def test_guarded_zones_ilac_g8_2019(sign, mag, expected):
    assert decision.decide(sign * mag, MPE, U, "guarded") == expected


@pytest.mark.parametrize("sign", [1, -1])
@pytest.mark.parametrize(
    "mag, expected",
    [(0.0, "pass"), (0.875, "pass"), (1.0, "pass"), (1.125, "fail"), (1.25, "fail")],
)
def test_simple_acceptance_ilac_g8_2019(sign, mag, expected):
    assert decision.decide(sign * mag, MPE, U, "simple") == expected


def test_guarded_with_zero_U_equals_simple():
    for e in (-1.5, -1.0, -0.5, 0.0, 0.5, 1.0, 1.5):
        g = decision.decide(e, MPE, 0.0, "guarded")
        s = decision.decide(e, MPE, 0.0, "simple")
        assert (g in decision.IN_TOLERANCE) == (s == "pass")


def test_guarded_U_larger_than_mpe():
    # no "pass" zone left when U >= MPE
    assert decision.decide(0.0, 1.0, 1.5, "guarded") == "conditional pass"
    assert decision.decide(2.0, 1.0, 1.5, "guarded") == "conditional fail"
    assert decision.decide(2.5, 1.0, 1.5, "guarded") == "fail"


@pytest.mark.parametrize(
    "args",
    [(0.1, 0.0, 0.1, "simple"), (0.1, -1.0, 0.1, "guarded"), (0.1, 1.0, -0.1, "guarded"),
     (0.1, 1.0, 0.1, "shared"), (float("nan"), 1.0, 0.1, "simple")],
)
def test_decide_invalid(args):
    with pytest.raises(ValueError):
        decision.decide(*args)


def test_verdict_in_tolerance():
    # ILAC-G8:09/2019 §4.2.2: under guarded acceptance the acceptance limit is MPE - U, so only a plain
    # "pass" shows conformity; a guard-band point (conditional pass) does not.
    assert decision.verdict_in_tolerance(["pass", "pass", "pass"])
    assert not decision.verdict_in_tolerance(["pass", "conditional pass", "pass"])
    assert not decision.verdict_in_tolerance(["pass", "conditional fail"])
    assert not decision.verdict_in_tolerance(["fail"])
    assert decision.verdict_in_tolerance([])


def test_verdict_text_names_the_guard_band():
    assert decision.verdict_text(True, ["pass"]) == "in tolerance"
    assert decision.verdict_text(False, ["pass", "conditional pass"]) == "not conforming (guard band)"
    assert decision.verdict_text(False, ["conditional pass", "conditional fail"]) == "out of tolerance"
    assert decision.verdict_text(False, ["fail"]) == "out of tolerance"
    assert decision.verdict_text(None, []) == "not determined"


def test_a_verdict_not_conforming_makes_the_drift_status_out_of_tolerance():
    for status in ("insufficient", "flat", "improving", "drifting", "out_of_tolerance"):
        assert decision.drift_status_given_verdict(status, False) == "out_of_tolerance"
        assert decision.drift_status_given_verdict(status, True) == status
        assert decision.drift_status_given_verdict(status, None) == status


@pytest.mark.parametrize("basis,span", [("pct_reading", None), ("pct_span", 40.0), ("absolute", None)])
def test_indication_for_error_inverts_point_error(basis, span):
    for reference, error in [(4.0, 0.25), (10.0, -1.5), (37.5, 0.0), (0.5, 2.0)]:
        indicated = errors.indication_for_error(reference, error, basis, span)
        assert errors.point_error(reference, indicated, basis, span) == pytest.approx(error, abs=1e-12)


@pytest.mark.parametrize("reference,indicated,basis,span,mpe", [
    # 10.05 against 10 is 0.5 % of reading exactly, 0.50000000000007 in binary
    (10.0, 10.05, "pct_reading", None, 0.5),
    # 2000.1 against 2000 is 0.1 flow units, 0.09999999999990905 in binary
    (2000.0, 2000.1, "absolute", None, 0.1),
    # 0.1 + 0.2 above 0 on a span of 3 is 10 % of span, 10.000000000000002 in binary
    (0.0, 0.1 + 0.2, "pct_span", 3.0, 10.0),
])
def test_errors_on_the_limit_are_on_it(reference, indicated, basis, span, mpe):
    """Issue 17 item 8: limits compared with the documented tolerance (decision.LIMIT_TOLERANCE, 1e-9 relative),
    not with raw binary noise; a real excess of 1e-6 relative still fails (ILAC-G8 §4.2.1 simple acceptance,
    §4.2.2 guarded zones)."""
    error = errors.point_error(reference, indicated, basis, span)
    assert error != mpe and error == pytest.approx(mpe, rel=1e-12)  # binary noise is there
    assert decision.decide(error, mpe, 0.0, "simple") == "pass"
    assert decision.decide(mpe * (1 + 1e-6), mpe, 0.0, "simple") == "fail"
    assert decision.decide(error, mpe, mpe / 4, "guarded") == "conditional pass"
    assert decision.decide(mpe * 0.75 * (1 + 1e-13), mpe, mpe / 4, "guarded") == "pass"
    assert decision.decide(mpe * 1.25 * (1 - 1e-13), mpe, mpe / 4, "guarded") == "fail"


def test_reverse_flow_error_and_mpe_share_one_sign_convention():
    """Issue 26 item 8: in reverse flow the error in % of reading and the MPE in flow units both use |ref|, so an
    error of -10 % at -10 is 1 flow unit in magnitude, as the MPE of 10 % is: |E| in flow units = |ind - ref|."""
    e = errors.point_error(-10.0, -11.0, "pct_reading")
    assert abs(e) * abs(-10.0) / 100 == pytest.approx(abs(-11.0 - -10.0))
    assert errors.mpe_in_flow_units(10.0, "pct_reading", -10.0) == pytest.approx(1.0)
    assert errors.indication_for_error(-10.0, e, "pct_reading") == pytest.approx(-11.0)  # the inverse agrees


def test_a_point_without_a_reference_standard_is_refused():
    """Issue 26 item 4: no standard, no uncertainty (not U = 0 and an infinite TUR)."""
    with pytest.raises(ValueError, match="references"):
        unc.point_uncertainty(50.0, [], [50.0, 50.1], 0.01)


def test_a_blank_resolution_is_refused_not_taken_as_zero():
    with pytest.raises(ValueError, match="resolution"):
        unc.point_uncertainty(50.0, [(0.2, "pct_reading")], [50.0, 50.1], None)
    with pytest.raises(ValueError, match="resolution"):
        unc.resolution_u(None)


def test_a_single_reading_uses_the_known_repeatability_and_says_which():
    """Issue 26 item 4. One reading, the device's pooled SD of past repeats s_p = 0.2 with 6 degrees of freedom
    (GUM 4.2.4): u_rep = s_p / sqrt(1) = 0.2, nu = 6; u_ref = 0.2 % x 50 / 2 = 0.05 (nu = inf); no resolution term.
    u_c = sqrt(0.04 + 0.0025) = 0.206155; nu_eff = 6 (u_c / u_rep)^4 = 6 x 1.0625^2 = 6.7734 (GUM G.2b);
    k = t_0.975(6.7734), computed here with scipy (independent computation)."""
    from scipy import stats

    known = unc.KnownRepeatability(sd=0.2, dof=6, source="pooled SD of the device's own past repeats")
    pu = unc.point_uncertainty(50.0, [(0.2, "pct_reading")], [50.1], 0.0, repeatability=known)
    assert pu.u_rep == pytest.approx(0.2) and pu.u_c == pytest.approx(0.206155, abs=1e-6)
    assert pu.nu_eff == pytest.approx(6.7734, abs=1e-4)
    assert pu.k == pytest.approx(stats.t.ppf(0.975, 6.0 * 1.0625 ** 2), rel=1e-10)
    assert pu.rep_source == "pooled SD of the device's own past repeats"
    # none known: no repeatability term, and said so; refused where the caller needs repeatability
    bare = unc.point_uncertainty(50.0, [(0.2, "pct_reading")], [50.1], 0.0)
    assert bare.u_rep == 0.0 and bare.rep_source.startswith("none")
    with pytest.raises(ValueError, match="repeats"):
        unc.point_uncertainty(50.0, [(0.2, "pct_reading")], [50.1], 0.0, require_repeatability=True)
    # two or more readings: their own Type A estimate, whatever is known
    own = unc.point_uncertainty(50.0, [(0.2, "pct_reading")], [50.0, 50.2], 0.0, repeatability=known)
    assert own.rep_source == "the 2 repeat readings" and own.u_rep == pytest.approx(0.1)


def test_pooled_sd_gum_4_2_4():
    """s_p^2 = sum (n_i - 1) s_i^2 / sum (n_i - 1) (GUM 4.2.4). Groups (1, 2, 3): s^2 = 1, 2 dof; (5, 7): s^2 = 2,
    1 dof; (4,): left out. s_p^2 = (2 x 1 + 1 x 2) / 3 = 4/3; checked against numpy's var(ddof=1) per group."""
    import numpy as np

    groups = [[1.0, 2.0, 3.0], [5.0, 7.0], [4.0]]
    sd, dof = unc.pooled_sd(groups)
    expected = (2 * np.var(groups[0], ddof=1) + 1 * np.var(groups[1], ddof=1)) / 3
    assert dof == 3 and sd == pytest.approx(math.sqrt(expected)) and sd ** 2 == pytest.approx(4 / 3)
    with pytest.raises(ValueError, match="groups"):
        unc.pooled_sd([[1.0]])


def test_coverage_factor_at_fractional_dof_is_the_t_quantile_there():
    """Issue 26 item 8: the code takes the t quantile at the fractional nu_eff (as its docstring and docs/method.md
    say), not the integer below it: checked against scipy.stats.t.ppf (independent computation)."""
    from scipy import stats

    for nu in (2.5, 4.2, 7.77):
        assert unc.coverage_factor(nu) == pytest.approx(stats.t.ppf(0.975, nu), rel=1e-12)
        assert unc.coverage_factor(nu) < unc.coverage_factor(math.floor(nu))
