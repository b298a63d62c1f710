"""The risk-based decision rule (issue 31; JCGM 106:2012 §8-§9): acceptance limits per point from the prior of like
devices and U so that the PFA stays within the target, named on the certificate with the target and the prior;
the low-TUR policy may require it. The PFA at the stored limit is checked with calibration.conformity.global_risks
(itself checked against scipy dblquad in test_conformity.py)."""
import datetime as dt

import pytest

from calibration import conformity, decision, uncertainty
from calibration.models import CalibrationEvent, ReferenceStandard
from tests.helpers import at, certificate_entry_data as entry_data, enter, flat, pdf_text, sign

pytestmark = pytest.mark.small_world("certificate")


def test_risk_rule_zones():
    # acceptance limit 0.3 against an MPE of 0.5
    assert decision.decide(0.29, 0.5, 0.3, "risk", accept_limit=0.3) == decision.PASS
    assert decision.decide(-0.3, 0.5, 0.3, "risk", accept_limit=0.3) == decision.PASS   # on the limit
    assert decision.decide(0.31, 0.5, 0.3, "risk", accept_limit=0.3) == decision.CONDITIONAL_PASS
    assert decision.decide(-0.5, 0.5, 0.3, "risk", accept_limit=0.3) == decision.CONDITIONAL_PASS
    assert decision.decide(0.51, 0.5, 0.3, "risk", accept_limit=0.3) == decision.FAIL


@pytest.mark.parametrize("limit", [None, float("nan"), -0.1, 0.6])
def test_risk_rule_needs_a_limit_within_the_mpe(limit):
    with pytest.raises(ValueError, match="accept_limit"):
        decision.decide(0.1, 0.5, 0.3, "risk", accept_limit=limit)


def test_verdict_wording_of_the_risk_rule():
    points = [decision.PASS, decision.CONDITIONAL_PASS]
    assert decision.verdict_text_for("risk", False, points).startswith("conformity not decided")
    assert decision.verdict_text_for("guarded", False, points) == "not conforming (guard band)"
    assert decision.verdict_text_for("risk", False, [decision.FAIL]) == "out of tolerance"


def test_observed_condition_ignores_the_rule():
    assert decision.observed_in_tolerance([0.45, -0.5], [0.5, 0.5]) is True
    assert decision.observed_in_tolerance([0.45, -0.51], [0.5, 0.5]) is False
    assert decision.observed_in_tolerance([], []) is None


def test_low_tur_policy_may_require_the_risk_rule():
    low = [1.7]
    assert uncertainty.low_tur_requires_guarded("simple", low, "require_guarded")
    assert not uncertainty.low_tur_requires_guarded("risk", low, "require_guarded")   # instead of guarded
    assert uncertainty.low_tur_requires_guarded("guarded", low, "require_risk")
    assert not uncertainty.low_tur_requires_guarded("risk", low, "require_risk")
    assert not uncertainty.low_tur_requires_guarded("simple", [5.0], "require_risk")


@pytest.fixture
def weak(db):
    """A reference with U = 0.3 % of reading against the meter's MPE of 0.5 %: TUR about 1.7:1."""
    return ReferenceStandard.objects.create(identification="RS-9", description="Older master meter", range_min=0,
                                            range_max=40, certificate_number="C-9", due_date=dt.date(2027, 6, 1),
                                            expanded_uncertainty=0.3, uncertainty_basis="pct_reading")


@pytest.mark.django_db
def test_risk_rule_end_to_end(client, device, weak, monkeypatch, settings):
    settings.CALIBRATION = {**settings.CALIBRATION, "low_tur_policy": "require_risk"}
    refused = client.post(f"/positions/{device.tag}/calibrate/", entry_data(weak, **{"ev-decision_rule": "guarded"}))
    assert refused.status_code == 400 and "requires risk-based acceptance" in refused.content.decode()
    assert not CalibrationEvent.objects.exists()   # nothing half-saved
    event = enter(client, device, weak, **{"ev-decision_rule": "risk"})
    target = settings.QUENBY_PFA_TARGET
    for p in event.points.filter(kind="as_found"):
        u = p.expanded_uncertainty / p.coverage_factor
        # no fleet recompute yet: the stated default prior, scaled by the MPE
        mean, sd = conformity.DEFAULT_PRIOR_MEAN * p.mpe, conformity.DEFAULT_PRIOR_SD * p.mpe
        assert 0 <= p.acceptance_limit <= p.mpe
        pfa = conformity.global_risks(mean, sd, u, -p.mpe, p.mpe, -p.acceptance_limit, p.acceptance_limit)["pfa"]
        assert pfa <= target + 1e-9   # the limit meets the target (JCGM 106 §9.5.2, by quadrature)
        if p.acceptance_limit < p.mpe:   # and is the widest that does: a little wider misses it
            wider = p.acceptance_limit + 1e-4 * p.mpe
            assert conformity.global_risks(mean, sd, u, -p.mpe, p.mpe, -wider, wider)["pfa"] > target
        expected = ("pass" if abs(p.error) <= p.acceptance_limit else
                    "conditional pass" if abs(p.error) <= p.mpe else "fail")
        assert p.decision == expected
    sign(client, event, at(dt.date(2026, 11, 23)), monkeypatch)
    content = CalibrationEvent.objects.get(pk=event.pk).signed_content
    assert content["decision"]["rule"] == "risk"
    assert content["conformity"]["target_pfa"] == target and content["conformity"]["prior"]["scope"] == "default"
    assert content["conformity"]["pfa"] <= target + 1e-9
    text = flat(pdf_text(client.get(f"/calibrations/{event.pk}/certificate.pdf").content)[1])
    assert "Risk-based acceptance (JCGM 106, PFA within the target)" in text
    assert "(target 2 %)" in text and "stated default (mean +0.00 MPE, SD 0.50 MPE)" in text


@pytest.mark.django_db
@pytest.mark.parametrize("rule", ["guarded", "risk"])
def test_the_field_finding(rule):
    """The issue's field finding: MPE ±0.2 % of reading, a reference giving U = 0.1 % (TUR 2:1), as-found errors of
    -0.10 % and -0.125 % (indications 19.98 and 19.975 at 20 m³/h). Guarded acceptance leaves them in the guard
    band: the statement is "not conforming (guard band)", but the device's interval is not shortened (observed
    |E| <= MPE). The risk-based rule with the stated default prior (SD 0.1 %, u = U / 1.96 = 0.051 %) has a PFA of
    simple acceptance below 2 % (checked here by quadrature), so it accepts them: in tolerance. (-0.11 % is used
    for the first point: -0.10 % lies exactly on MPE - U, where guarded acceptance still passes.)"""
    import math

    from calibration.uncertainty import coverage_factor
    from plant.installations import commission
    from plant.models import Area, Fluid, Device, Site

    site = Site.objects.create(name="Field site")
    area = Area.objects.create(site=site, name="Hall F")
    water = Fluid.objects.create(name="Process water", phase="liquid", conductivity_us_cm=500)
    device = commission(tag="FT-F1", principle="electromagnetic", area=area, fluid=water, line_size="DN50",
                       internal_diameter_mm=52.5, range_min=0, range_max=40, mpe_value=0.2, mpe_basis="pct_reading",
                       wetted_material="316L", base_interval_days=365)
    ref = ReferenceStandard.objects.create(identification="RS-F", description="Master meter", range_min=0,
                                           range_max=40, certificate_number="C-F", due_date=dt.date(2027, 6, 1),
                                           expanded_uncertainty=0.1 * 2 / coverage_factor(math.inf),
                                           uncertainty_basis="pct_reading")
    day = dt.date(2026, 11, 20)
    event = CalibrationEvent.objects.create(device=device, performed_on=day, technician="A. Tester",
                                            procedure="Comparison against the master meter", decision_rule=rule)
    event.reference_standards.add(ref)
    from calibration.models import CalibrationPoint

    for i, indicated in enumerate((19.978, 19.975)):
        CalibrationPoint.objects.create(event=event, kind="as_found", nominal_pct=50 + i, reference_value=20,
                                        indicated_value=indicated)
    event.sign(by="A. Tester", role="Technician", at=dt.datetime.combine(day, dt.time(12), tzinfo=dt.timezone.utc))
    event.refresh_from_db()
    points = list(event.points.order_by("nominal_pct"))
    assert [p.error for p in points] == [pytest.approx(-0.11), pytest.approx(-0.125)]
    assert points[0].expanded_uncertainty == pytest.approx(0.1, rel=1e-9)
    device = Device.objects.get(pk=device.pk)
    assert event.as_found_observed_in_tolerance is True
    assert device.next_due_date == day + dt.timedelta(days=365)   # the base interval: not shortened
    assert device.drift_status == "insufficient"
    risks = event.signed_content["conformity"]
    if rule == "guarded":
        assert [p.decision for p in points] == ["conditional pass", "conditional pass"]
        assert event.as_found_in_tolerance is False
        assert event.signed_content["decision"]["as_found_verdict"] == "not conforming (guard band)"
        assert len(risks["not_decided"]) == 2 and "(TUR 2.0:1)" in risks["not_decided"][0]
    else:
        u = points[0].expanded_uncertainty / points[0].coverage_factor
        simple = conformity.global_risks(0.0, 0.1, u, -0.2, 0.2, -0.2, 0.2)["pfa"]
        assert simple < 0.02
        assert [p.acceptance_limit for p in points] == [pytest.approx(0.2), pytest.approx(0.2)]
        assert [p.decision for p in points] == ["pass", "pass"] and event.as_found_in_tolerance is True
        assert risks["pfa"] == pytest.approx(simple, abs=1e-9) and risks["not_decided"] == []
