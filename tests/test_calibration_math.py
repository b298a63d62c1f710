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
    pu = unc.point_uncertainty(100.0, 0.2, "pct_reading", [99.0, 100.0, 101.0], 0.1)
    assert pu.u_ref == pytest.approx(0.1)
    assert pu.u_rep == pytest.approx(1 / math.sqrt(3))
    assert pu.u_res == pytest.approx(0.1 / math.sqrt(12))
    assert pu.u_c == pytest.approx(math.sqrt(0.01 + 1 / 3 + 0.01 / 12))
    assert pu.U == pytest.approx(2 * pu.u_c)
    assert pu.k == 2


@pytest.mark.parametrize("seed", range(10))
def test_combined_matches_uncertainties_package(seed):
    rng = random.Random(seed)
    ref_value = rng.uniform(1, 500)
    U_ref_pct = rng.uniform(0.05, 1.0)
    resolution = rng.choice([0.001, 0.01, 0.1, 1.0])
    repeats = [ref_value * (1 + rng.gauss(0, 0.003)) for _ in range(rng.randint(2, 8))]
    k = rng.choice([2, 2.5, 3])

    pu = unc.point_uncertainty(ref_value, U_ref_pct, "pct_reading", repeats, resolution, k=k)

    # Independent propagation: E = (mean indication + resolution term) - reference
    ref = ufloat(ref_value, U_ref_pct * ref_value / 100 / 2)
    mean_ind = ufloat(sum(repeats) / len(repeats), unc.repeatability_u(repeats))
    res = ufloat(0.0, resolution / math.sqrt(12))
    err = (mean_ind + res) - ref

    assert pu.u_c == pytest.approx(err.std_dev, rel=1e-12)
    assert pu.U == pytest.approx(k * err.std_dev, rel=1e-12)


def test_tur():
    assert unc.test_uncertainty_ratio(1.0, 0.25) == pytest.approx(4.0)
    assert unc.test_uncertainty_ratio(1.0, 0.0) == math.inf
    assert unc.TUR_WARNING == 4.0
    assert unc.tur_warning(4.0) is None
    assert unc.tur_warning(10.0) is None
    msg = unc.tur_warning(3.0)
    assert msg and "3.00:1" in msg


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
