"""Issue 26 item 6: every public pure function in calibration/ (the pure modules), maintenance/loop.py,
maintenance/tasks.py and plant/risk.py refuses NaN, ±inf and out-of-domain values with a ValueError naming the
argument — never another exception, never a NaN out.

Each case below is one function with valid arguments and, per argument, the values it must refuse. Hypothesis
draws the bad value (and which argument gets it); the call must raise ValueError whose message names that
argument. A second sweep draws valid values and checks no NaN comes out. Not swept: functions that take model
objects or text only (errors.error_unit, due.rationale_text, units.unit/code_for/label_for/conversion_needs,
drift.path_anchor over a built series); their inputs are not numbers.
"""
import datetime as dt
import math
import re
from types import SimpleNamespace

import numpy as np
import pandas as pd
import pytest
from hypothesis import given, settings
from hypothesis import strategies as st

from calibration import decision, drift, errors, intervals
from plant import units
from scheduling import drift_fleet, due
from calibration import uncertainty as unc
from maintenance import loop, tasks
from plant import risk

NAN, INF = float("nan"), float("inf")
NONFINITE = [NAN, INF, -INF]
DAY = dt.date(2026, 1, 1)


def history(**override):
    """A valid drift history; `override` replaces fields of its last event (e.g. day=NaN)."""
    events = [dict(day=0.0, as_found=0.0), dict(day=365.0, as_found=0.1), dict(day=730.0, as_found=0.2),
              dict(day=1095.0, as_found=0.3)]
    events[-1].update(override)
    return [drift.HistoryEvent(**e) for e in events]


def fleet_rows(**override):
    rows = pd.DataFrame({"series": [0, 0, 0], "day": [0.0, 100.0, 200.0], "order": [0, 1, 2],
                         "as_found": [0.0, 0.2, 0.4], "as_left": [np.nan] * 3, "adjusted": [False] * 3})
    for column, value in override.items():
        rows.loc[2, column] = value
    return rows


def finding(**fields):
    return SimpleNamespace(**{"code": "TURBINE_STICKY", "severity": "medium", "interval_factor": 0.75, **fields})


FLUID = dict(phase="liquid", conductivity_us_cm=500.0, density_kg_m3=1000.0, viscosity_mpa_s=1.0, temperature_c=20.0)

# (name, function, valid keyword arguments, {argument: (values to refuse, names the message may use)})
CASES = [
    # calibration/decision.py
    ("decide", decision.decide, dict(error=0.1, mpe=0.5, U=0.1, rule="simple"),
     {"error": NONFINITE, "mpe": NONFINITE + [0.0, -1.0], "U": NONFINITE + [-0.1], "rule": ["bogus"]}),
    ("verdict_in_tolerance", decision.verdict_in_tolerance, dict(decisions=["pass"]), {"decisions": [["maybe"]]}),
    ("guard_band_only", decision.guard_band_only, dict(decisions=["pass"]), {"decisions": [["maybe"]]}),
    ("verdict_text", decision.verdict_text, dict(in_tolerance=False, decisions=["fail"]), {"decisions": [["maybe"]]}),
    ("drift_status_given_verdict", decision.drift_status_given_verdict,
     dict(status="flat", last_as_found_in_tolerance=True), {"status": ["bogus", ""]}),
    ("at_limit", decision.at_limit, dict(e=0.5, limits=(0.5,)),
     {"e": NONFINITE + [None], "limits": [(NAN,), (INF,), (None,)]}),
    # calibration/drift.py
    ("bound_words", drift.bound_words, dict(confidence=0.95), {"confidence": NONFINITE + [0.0, 1.0, 1.5]}),
    ("bound_side", drift.bound_side, dict(slope=0.1), {"slope": NONFINITE}),
    ("bound_name", drift.bound_name, dict(slope=-0.1), {"slope": NONFINITE, "confidence": [NAN, 0.0, 1.0]}),
    ("linear_fit", drift.linear_fit, dict(x=[0.0, 1.0, 2.0], y=[0.0, 1.0, 3.0]),
     {"x": [[NAN, 1.0, 2.0], [0.0, INF, 2.0]], "y": [[NAN, 1.0, 2.0], [0.0, -INF, 2.0]]}),
    ("HistoryEvent", lambda **kw: drift.HistoryEvent(**kw), dict(day=0.0, as_found=0.1),
     {"day": NONFINITE + [None], "as_found": NONFINITE, "as_left": NONFINITE}),
    ("fit_drift", lambda **kw: drift.fit_drift(history(), **kw), dict(mpe=0.5),
     {"mpe": NONFINITE + [0.0, -1.0], "guard": NONFINITE + [-0.1, 0.5, 0.7], "alpha": [NAN, 0.0, 1.0],
      "confidence": [NAN, 0.0, 1.0, INF], "negligible_rate": [NAN, INF, -1.0]}),
    ("predict_crossing", lambda **kw: drift.predict_crossing(history(), **kw), dict(mpe=0.5),
     {"mpe": NONFINITE + [0.0, -1.0, None], "guard": [NAN, -0.1, 0.5], "confidence": [NAN, 0.0, 1.0],
      "horizon_days": NONFINITE + [0.0, -5.0]}),
    ("fitted_current_error", lambda **kw: drift.fitted_current_error(drift.cumulative_drift(history()), **kw),
     dict(slope=0.001), {"slope": NONFINITE}),
    # scheduling/drift_fleet.py
    ("predict_crossings", lambda rows_override=None, limit=1.0, **kw: drift_fleet.predict_crossings(
        fleet_rows(**(rows_override or {})), pd.Series({0: limit}), **kw), dict(),
     {"limit": NONFINITE + [0.0, -1.0], "confidence": [NAN, 0.0, 1.0], "alpha": [NAN, 1.0],
      "horizon_days": [NAN, INF, 0.0], "negligible_rate": [NAN, -1.0],
      "rows_override": ([{"day": NAN}, {"day": INF}, {"as_found": INF}, {"as_left": -INF}], ("rows",))}),
    # scheduling/due.py
    ("decide_due", due.decide_due, dict(last=DAY, method_interval_days=365),
     {"method_interval_days": NONFINITE + [0, -1, 1.5, None], "risk_factor": NONFINITE + [0.0, -0.5, 1.5],
      "shorten_factor": NONFINITE + [0.0, 2.0], "margin_days": [NAN, INF, -1], "min_days": [NAN, 0],
      "max_days": [NAN, 10], "last": ["2026-01-01", None], "crossing": [DAY, DAY - dt.timedelta(days=3), "x"]}),
    # calibration/errors.py
    ("point_error", errors.point_error, dict(reference=10.0, indicated=11.0, basis="pct_reading"),
     {"reference": NONFINITE + [0.0], "indicated": NONFINITE, "basis": ["bogus"]}),
    ("point_error span", errors.point_error, dict(reference=10.0, indicated=11.0, basis="pct_span", span=100.0),
     {"span": NONFINITE + [0.0, -1.0, None]}),
    ("indication_for_error", errors.indication_for_error, dict(reference=10.0, error=1.0, basis="pct_reading"),
     {"reference": NONFINITE + [0.0], "error": NONFINITE, "basis": ["bogus"]}),
    ("mpe_in_flow_units", errors.mpe_in_flow_units, dict(mpe_value=0.5, basis="pct_reading", reference=10.0),
     {"mpe_value": NONFINITE + [-1.0], "reference": NONFINITE + [0.0], "basis": ["bogus"]}),
    ("to_error_units", errors.to_error_units, dict(value_in_flow_units=0.1, basis="pct_reading", reference=10.0),
     {"value_in_flow_units": NONFINITE, "reference": NONFINITE + [0.0]}),
    # calibration/intervals.py
    ("whole_days", intervals.whole_days, dict(x=10.4), {"x": NONFINITE + [None]}),
    ("staircase", intervals.staircase, dict(interval_days=365, in_tolerance=True),
     {"interval_days": NONFINITE + [0, -1], "extend": [NAN, INF, 0.0], "shorten": [NAN, 0.0, 1.5],
      "min_days": [NAN, -1, 1.5], "max_days": [NAN, 0]}),
    ("staircase_sequence", intervals.staircase_sequence, dict(initial=365, results=[True, False]),
     {"initial": NONFINITE + [0, -1], "extend": [NAN, 0.0], "shorten": [NAN, 0.0], "max_days": [NAN, 0]}),
    ("log_likelihood", intervals.log_likelihood, dict(lam=0.001, intervals=[100.0], in_tol=[False]),
     {"lam": NONFINITE + [-1.0], "intervals": [[NAN], [INF], [0.0], [-1.0]], "in_tol": [[True, False]]}),
    ("exponential_mle", intervals.exponential_mle, dict(intervals=[100.0, 200.0], in_tol=[True, False]),
     {"intervals": [[NAN, 200.0], [100.0, INF], [0.0, 200.0], [-1.0, 200.0]], "in_tol": [[True]]}),
    ("exponential_closed_form", intervals.exponential_closed_form, dict(interval=365.0, passes=3, n=4),
     {"interval": NONFINITE + [0.0], "passes": [NAN, -1, 5, 1.5], "n": [NAN, INF, 0]}),
    ("reliability_interval", intervals.reliability_interval, dict(lam=0.001, target=0.95),
     {"lam": [NAN, -1.0, None], "target": NONFINITE + [0.0, 1.0]}),
    ("recommended_interval", intervals.recommended_interval, dict(intervals=[100.0, 200.0], in_tol=[True, False]),
     {"intervals": [[NAN, 200.0], [INF, 200.0]], "target": [NAN, 1.0], "min_days": [NAN, -1], "max_days": [NAN, 0]}),
    ("binomial_tails", intervals.binomial_tails, dict(n=10, passes=9, target=0.95),
     {"n": [NAN, INF, -1, 1.5], "passes": [NAN, -1, 11, 2.5], "target": NONFINITE + [0.0, 1.0]}),
    ("reliability_method", intervals.reliability_method, dict(intervals=[100.0] * 10, in_tol=[True] * 10),
     {"intervals": [[NAN] + [100.0] * 9, [INF] * 10, [0.0] * 10], "in_tol": [[True] * 9], "target": [NAN, 1.0],
      "alpha": [NAN, 0.0], "min_observations": [NAN, 0], "min_days": [NAN], "max_days": [NAN, 0]}),
    ("interval_by_method", intervals.interval_by_method,
     dict(method="reliability", base_days=365, elapsed=[100.0], in_tol=[True]),
     {"method": ["bogus"], "base_days": NONFINITE + [0, -5, 1.5], "elapsed": [[NAN], [INF], [0.0], [-1.0]],
      "in_tol": [[True, True]], "target": [NAN, 0.0], "extend": [NAN, 0.0], "shorten": [NAN, 0.0, 2.0],
      "min_days": [NAN, -1], "max_days": [NAN, 0], "min_observations": [NAN, 0]}),
    ("first_calibration_found_out", intervals.first_calibration_found_out,
     dict(method=intervals.MethodInterval(365, "", 0)),
     {"shorten": NONFINITE + [0.0, 2.0], "min_days": [NAN, -1], "max_days": [NAN, 0]}),
    # calibration/uncertainty.py
    ("standard_from_expanded", unc.standard_from_expanded, dict(U=0.2, k=2),
     {"U": NONFINITE + [-1.0, None], "k": NONFINITE + [0.0, -2.0]}),
    ("reference_standard_u", unc.reference_standard_u, dict(reference_value=10.0, U_ref=0.2, basis="pct_reading"),
     {"reference_value": NONFINITE + [None], "U_ref": NONFINITE + [-1.0], "basis": ["bogus"], "k": [NAN, 0.0]}),
    ("repeatability_u", unc.repeatability_u, dict(readings=[1.0, 2.0]), {"readings": [[NAN, 1.0], [1.0, INF]]}),
    ("resolution_u", unc.resolution_u, dict(resolution=0.01), {"resolution": NONFINITE + [-1.0, None]}),
    ("pooled_sd", unc.pooled_sd, dict(groups=[[1.0, 2.0]]), {"groups": [[[NAN, 1.0]], [[1.0]], [[INF, 2.0]]]}),
    ("combine", lambda components: unc.combine(*components), dict(components=[0.1, 0.2]),
     {"components": [[NAN], [INF, 0.1], [-0.1]]}),
    ("effective_dof", unc.effective_dof, dict(components=[(0.1, 2)]),
     {"components": [[(NAN, 2)], [(0.1, NAN)], [(0.1, 0)], [(-1.0, 2)], [(INF, 2)]]}),
    ("coverage_factor", unc.coverage_factor, dict(dof=5.0, p=0.95),
     {"dof": [NAN, -INF, 0.0, -1.0, None], "p": NONFINITE + [0.0, 1.0]}),
    ("point_uncertainty", unc.point_uncertainty,
     dict(reference_value=50.0, references=[(0.2, "pct_reading")], repeats=[50.0, 50.1], resolution=0.01),
     {"reference_value": NONFINITE, "references": ([[], [(NAN, "pct_reading")], [(0.2, "bogus")]],
                                                   ("references", "U_ref", "basis")),
      "repeats": [[NAN, 50.0], [50.0, INF]], "resolution": NONFINITE + [-1.0, None], "p": [NAN, 1.0]}),
    ("test_uncertainty_ratio", unc.test_uncertainty_ratio, dict(mpe=0.5, U=0.1),
     {"mpe": NONFINITE + [-1.0], "U": NONFINITE + [-1.0]}),
    ("tur_warning", unc.tur_warning, dict(tur=5.0), {"tur": [NAN, -1.0, None]}),
    ("low_tur_requires_guarded", unc.low_tur_requires_guarded, dict(rule="simple", turs=[5.0], policy="warn"),
     {"turs": [[NAN], [-1.0]], "rule": ["bogus"], "policy": ["bogus"]}),
    # plant/units.py
    ("convert", units.convert, dict(value=1.0, from_code="m3/h", to_code="kg/h", density_kg_m3=1000.0),
     {"value": NONFINITE, "density_kg_m3": (NONFINITE + [0.0, -1.0], ("density_kg_m3", "density"))}),
    ("convert line", units.convert,
     dict(value=1.0, from_code="Nm3/h", to_code="m3/h", line_pressure_kpa_abs=500.0, line_temp_c=20.0),
     {"line_pressure_kpa_abs": (NONFINITE + [0.0], ("line_pressure_kpa_abs", "pressure")),
      "line_temp_c": (NONFINITE + [-300.0], ("line_temp_c", "temperature")),
      "compressibility": (NONFINITE + [0.0], ("compressibility", "Z"))}),
    # maintenance/loop.py
    ("bounds", loop.bounds, dict(start_days=100), {"start_days": NONFINITE + [0, 1.5, None]}),
    ("step", loop.step, dict(current=100, streak=0, condition="clean", lower=25, upper=400),
     {"current": [NAN, INF, 0], "streak": [NAN, -1], "condition": (["bogus"], ("condition",)),
      "lower": [NAN, 0], "upper": [NAN, 10]}),
    ("next_frequency", loop.next_frequency, dict(start_days=100, conditions=["clean"]),
     {"start_days": NONFINITE + [0], "conditions": [["bogus"]], "dates": [[None, None]]}),
    ("next_due", loop.next_due, dict(last_done=DAY, frequency_days=30, since=DAY),
     {"frequency_days": NONFINITE + [0, 1.5]}),
    ("due_sentence", loop.due_sentence, dict(last_done=DAY, frequency_days=30, since=DAY),
     {"frequency_days": NONFINITE + [0]}),
    ("fouling_finding", loop.fouling_finding, dict(recent=[(DAY, "clean")] * 4), {"recent": [[(DAY, "bogus")]]}),
    ("failures_after_fouling", loop.failures_after_fouling, dict(inspections=[], calibrations=[]),
     {"window_days": NONFINITE + [-1]}),
    # maintenance/tasks.py
    ("shortened", tasks.shortened, dict(base_days=365, factor=0.5),
     {"base_days": NONFINITE + [0, 1.5], "factor": NONFINITE + [0.0, 1.5]}),
    ("derive_tasks", tasks.derive_tasks, dict(principle="turbine", findings=[]),
     {"principle": ["bogus"], "findings": ([[finding(interval_factor=v)] for v in NONFINITE + [0.0, 2.0]],
                                           ("findings",))}),
    # plant/risk.py
    ("reynolds_number", risk.reynolds_number, dict(density_kg_m3=1000, viscosity_mpa_s=1, flow_m3_h=10,
                                                   diameter_mm=50),
     {name: NONFINITE + [0.0, -1.0, None] for name in ("density_kg_m3", "viscosity_mpa_s", "flow_m3_h",
                                                      "diameter_mm")}),
    ("FluidProps", lambda **kw: risk.FluidProps(**{**FLUID, **kw}), dict(),
     {"conductivity_us_cm": NONFINITE + [-1.0], "density_kg_m3": NONFINITE + [-1.0],
      "viscosity_mpa_s": NONFINITE + [-1.0], "temperature_c": NONFINITE + [-300.0], "phase": ["plasma"]}),
    ("Finding", lambda **kw: risk.Finding(**{"code": "X", "severity": "low", "reason": "", "interval_factor": 0.9,
                                             **kw}), dict(),
     {"interval_factor": NONFINITE + [0.0, -0.5, 1.5], "severity": ["bogus"]}),
    ("worst_severity", risk.worst_severity, dict(findings=[]), {"findings": [[finding(severity="bogus")]]}),
    ("interval_factor", risk.interval_factor, dict(findings=[]),
     {"findings": [[finding(interval_factor=v)] for v in NONFINITE + [0.0, -1.0, 1.5]]}),
    ("recommendation", risk.recommendation, dict(findings=[]), {"findings": [[finding(severity="bogus")]]}),
    ("assess", risk.assess, dict(principle="vortex", wetted_material="316L", fluid=risk.FluidProps(**FLUID),
                                 min_flow_m3_h=10.0, diameter_mm=50.0),
     {"principle": ["bogus"], "fluid": [None, "water"], "min_flow_m3_h": NONFINITE + [-1.0],
      "diameter_mm": NONFINITE + [-1.0], "normal_flow_m3_h": NONFINITE + [-1.0]}),
    ("assess_each_principle", risk.assess_each_principle,
     dict(wetted_material="316L", fluid=risk.FluidProps(**FLUID)),
     {"min_flow_m3_h": NONFINITE + [-1.0], "diameter_mm": [NAN, -1.0], "fluid": [None]}),
]

SWEEP = [(name, function, valid, argument, (bad if isinstance(bad, list) else bad[0]),
          ((argument,) if isinstance(bad, list) else bad[1]))
         for name, function, valid, refusals in CASES for argument, bad in refusals.items()]


@pytest.mark.parametrize("name, function, valid, argument, bad, names", SWEEP,
                         ids=[f"{case[0]}-{case[3]}" for case in SWEEP])
@settings(max_examples=20, deadline=None)
@given(data=st.data())
def test_refuses_nonsense_with_a_value_error_naming_the_argument(name, function, valid, argument, bad, names, data):
    value = data.draw(st.sampled_from(bad), label=argument)
    with pytest.raises(ValueError) as refused:  # any other exception fails the test
        function(**{**valid, argument: value})
    message = str(refused.value)
    assert any(re.search(rf"(?<![\w]){re.escape(n)}(?![a-z])", message) for n in names), (argument, message)


@pytest.mark.parametrize("name, function, valid", [(c[0], c[1], c[2]) for c in CASES], ids=[c[0] for c in CASES])
def test_the_valid_arguments_are_accepted(name, function, valid):
    """The sweep's baseline: the valid arguments give a result (so each refusal above is the bad value's)."""
    result = function(**valid)
    if isinstance(result, float):
        assert not math.isnan(result)


finite = st.floats(min_value=-1e6, max_value=1e6, allow_nan=False, allow_infinity=False)
positive = st.floats(min_value=1e-3, max_value=1e6, allow_nan=False, allow_infinity=False)
unit_interval = st.floats(min_value=1e-6, max_value=1 - 1e-6)


@settings(max_examples=200, deadline=None)
@given(ref=positive, ind=finite, basis=st.sampled_from(["pct_reading", "pct_span", "absolute"]), span=positive,
       U=positive, k=positive, dof=st.one_of(positive, st.just(INF)), p=unit_interval, rho=positive, mu=positive,
       q=positive, d=positive, days=st.integers(1, 5000), ok=st.booleans(), factor=st.floats(1e-3, 1.0))
def test_valid_numbers_never_give_nan(ref, ind, basis, span, U, k, dof, p, rho, mu, q, d, days, ok, factor):
    outputs = [errors.point_error(ref, ind, basis, span), errors.to_error_units(U, basis, ref, span),
               unc.standard_from_expanded(U, k), unc.coverage_factor(dof, p), unc.resolution_u(U),
               risk.reynolds_number(rho, mu, q, d), intervals.staircase(days, ok),
               tasks.shortened(days, factor), intervals.reliability_interval(factor if factor < 1 else 0.5, p),
               decision.at_limit(ind, (ref,))]
    assert not any(isinstance(v, float) and math.isnan(v) for v in outputs), outputs
