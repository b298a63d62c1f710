"""Next due date: the interval method sets the interval, risk and drift may only shorten it, every case
explained; the fleet recompute end to end. Hand-worked expectations are written beside each check."""
import datetime as dt

import pytest
from scipy import stats
from django.core.management import call_command

import math

from calibration import intervals
from calibration.models import CalibrationEvent, CalibrationPoint, ReferenceStandard
from plant.models import Area, Fluid, Device, Site
from plant.installations import commission
from scheduling import due

LAST = dt.date(2026, 1, 1)
STAIR = dict(extend=1.25, shorten=0.5, min_days=30, max_days=1095)  # the CALIBRATION policy's staircase


def days(n):
    return LAST + dt.timedelta(days=n)


# The interval method sets the interval (OIML D 10:2007 / ILAC-G24 method 1, the staircase) ---------------
def test_staircase_lengthening_takes_effect():
    """Two in-tolerance results from 365 d: 365 × 1.25 = 456.25 -> 456; 456 × 1.25 = 570 (OIML D 10 method 1,
    halves rounded up). Nothing shortens it, so the due date is 570 days on: the method sets the interval."""
    method = intervals.interval_by_method("staircase", 365, [365, 456], [True, True], **STAIR)
    assert method.days == 570
    d = due.decide_due(LAST, method.days, method.reason, risk_factor=1.0)
    assert d.winner == "method" and d.due == days(570) and d.interval_days == 570
    assert d.rationale()["interval_days"] == 570
    assert "365 → 456 → 570 d" in d.rationale()["candidates"][0]["reason"]


@pytest.mark.parametrize("method_name", ["staircase", "reliability"])
def test_long_in_tolerance_history_lengthens_up_to_the_maximum(method_name):
    """13 in-tolerance results from 365 d, staircase (OIML D 10 method 1): 456.25->456, 570, 712.5->713,
    891.25->891, 1113.75->1114 held to the 1095 d maximum, then 1095 onwards.
    Reliability method (NCSL RP-1 style, from memory): 13 of 13 against a 95 % target is not below it,
    one-sided P(X <= 13) = 1, so the model does not move the interval and the staircase does."""
    n = 13
    method = intervals.interval_by_method(method_name, 365, [365] * n, [True] * n, target=0.95,
                                          min_observations=8, **STAIR)
    assert method.days == 1095
    if method_name == "reliability":
        assert "k = 13 of n = 13 intervals in tolerance" in method.reason
        assert "H1: R < 95%: p = 1" in method.reason  # one-sided: P(X <= 13 | 13, 0.95) = 1
    d = due.decide_due(LAST, method.days, method.reason)
    assert d.due == days(1095) and d.winner == "method" and d.bounded == ""


def test_one_failure_then_adjustment_shortens_by_the_method_not_to_the_minimum():
    """Four in (365 -> 456 -> 570 -> 713 -> 891), then one out: 891 × 0.5 = 445.5 -> 446 d (OIML D 10 method 1).
    The as-found was out, so no crossing is predicted (the drift fit says "out of tolerance"); the method has
    counted the failure, and the 30 d minimum is not reached."""
    method = intervals.interval_by_method("staircase", 365, [365, 456, 570, 713, 891],
                                          [True, True, True, True, False], **STAIR)
    assert method.days == 446
    d = due.decide_due(LAST, method.days, method.reason, crossing_kind="out_of_tolerance", last_failed=True)
    assert d.due == days(446) and d.bounded == ""
    assert [c.name for c in d.candidates] == ["method"]
    assert d.findings == []


def test_reliability_method_shortens_an_out_of_tolerance_record_by_the_target():
    """20 intervals of 365 d, 15 in tolerance, target 95 % (NCSL RP-1 exponential model, equal intervals):
    binomial P(X <= 15 | n = 20, R = 0.95) = sum_k C(20,k) 0.95^k 0.05^(20-k), k = 0..15, below 0.025, so the
    record is significantly below the target; R = 15/20 = 0.75, lambda = -ln 0.75 / 365, interval
    = 365 × ln 0.95 / ln 0.75 = 365 × 0.051293 / 0.287682 = 65.08 -> 65 d (not the 30 d minimum)."""
    p_below = sum(math.comb(20, k) * 0.95 ** k * 0.05 ** (20 - k) for k in range(16))
    assert p_below < 0.025
    ok = [True] * 15 + [False] * 5
    verdict = intervals.reliability_method([365] * 20, ok, target=0.95, min_observations=8)
    assert verdict.p_below == pytest.approx(p_below, rel=1e-9)
    assert verdict.days == 65 and verdict.observations == 20 and verdict.failures == 5
    method = intervals.interval_by_method("reliability", 365, [365] * 20, ok, target=0.95, min_observations=8,
                                          **STAIR)
    assert method.days == 65 and "n = 20" in method.reason and "significantly below" in method.reason


def test_reliability_needs_enough_observations_and_says_the_sample_size():
    """Two intervals, one failed: the exponential MLE alone would give 365 × ln 0.95 / ln 0.5 = 27 d -> 30 d.
    With fewer than the minimum (8, our policy; NCSL RP-1 style, from memory) the model may not move the
    interval: the staircase does, 365 × 1.25 = 456.25 -> 456, then × 0.5 = 228 d."""
    assert intervals.recommended_interval([365, 365], [True, False]) == 30
    verdict = intervals.reliability_method([365, 365], [True, False], min_observations=8)
    assert verdict.days is None and "k = 1 of n = 2 intervals in tolerance" in verdict.reason
    method = intervals.interval_by_method("reliability", 365, [365, 456], [True, False], min_observations=8,
                                          **STAIR)
    assert method.days == 228 and "n = 2" in method.reason and "too few" in method.reason


def test_reliability_not_significant_keeps_the_method_interval():
    """10 intervals, 9 in tolerance, target 95 %: P(X <= 9) = 1 - 0.95^10 = 1 - 0.59874 = 0.40126, not
    significant (one-sided 5 %): the model does not move the interval (NCSL RP-1 style, from memory)."""
    verdict = intervals.reliability_method([365] * 10, [True] * 9 + [False], target=0.95, min_observations=8)
    assert verdict.p_below == pytest.approx(1 - 0.95 ** 10, rel=1e-12)
    assert verdict.days is None and "not shown below the target" in verdict.reason


def test_a_crossing_on_or_before_the_last_calibration_is_refused():
    """Issue 26 item 1: a crossing is only ever after the last calibration; the rule refuses one that is not."""
    for day in (days(-10), LAST):
        with pytest.raises(ValueError, match="crossing"):
            due.decide_due(LAST, 570, "staircase", crossing=day)


def test_scatter_is_a_finding_that_shortens_by_the_method_and_never_says_already_out():
    """The drift model's bound already reaches the limit on the day the meter was found in tolerance: not a
    crossing but a finding, and the method shortens by its out-of-tolerance step: 570 d × 0.5 = 285 d (OIML D 10
    method 1). The residual SD is given beside the MPE."""
    d = due.decide_due(LAST, 570, "staircase", crossing_kind="scatter", shorten_factor=0.5,
                       scatter_reason="residual SD 0.31 beside the MPE 0.5")
    assert d.due == days(285) and d.winner == "method" and d.bounded == ""
    assert [c.name for c in d.candidates] == ["method"]
    assert d.findings[0].startswith("Scatter too large to predict")
    assert "residual SD 0.31 beside the MPE 0.5" in d.findings[0]
    assert "found the meter in tolerance" in d.findings[0] and "570 d × 0.5 = 285 d" in d.findings[0]
    text = due.rationale_text(d.rationale())
    assert "already out" not in text and "285 days" in text and "scatter finding" in text
    # found out of tolerance that day: the method has already counted it, no second halving
    failed = due.decide_due(LAST, 285, "staircase", crossing_kind="scatter", last_failed=True)
    assert failed.due == days(285) and "already shortened" in failed.findings[0]


@pytest.mark.parametrize("k, n", [(11, 14), (12, 15), (21, 25), (35, 40)])
def test_reliability_test_is_the_one_sided_exact_binomial_test_below_the_target(k, n):
    """Issue 26 item 2: H1: R < R*, p as scipy.stats.binomtest(k, n, R*, alternative="less") gives it. scipy is
    the independent computation here (our p comes from binomial_tails, scipy.stats.binom.cdf). All four records
    are significantly below 95 % at 5 % one-sided (11/14: p = 0.030; 12/15: 0.036; 21/25: 0.034; 35/40: 0.048),
    so the exponential model sets the interval, and the rationale prints k, n, the target and p."""
    expected = stats.binomtest(k, n, 0.95, alternative="less").pvalue
    ok = [True] * k + [False] * (n - k)
    verdict = intervals.reliability_method([180] * n, ok, target=0.95, min_observations=8)
    assert verdict.p_below == pytest.approx(expected, rel=1e-12)
    assert expected < 0.05 and verdict.days is not None
    assert f"k = {k} of n = {n}" in verdict.reason and "target 95%" in verdict.reason
    assert f"p = {expected:.2g}" in verdict.reason and "H1: R < 95%" in verdict.reason


@pytest.mark.parametrize("method_name", ["staircase", "reliability"])
def test_a_failure_never_lengthens_the_interval_just_completed(method_name):
    """Issue 26 item 2 (common practice; OIML D 10 / ILAC-G24 simple response): the last as-found out of tolerance
    never gives an interval longer than the one just completed. Staircase from 1095 d: after 12 in tolerance the
    step is 1095 d, then the failure halves it to 548 d, but the interval just completed was 200 d (calibrated
    early), so 200 d. Reliability: 11 in tolerance of 14 at 180 d each (significantly below 95 %, p = 0.030 by
    scipy.stats.binomtest) gives the exponential model 180 × ln 0.95 / ln(11/14) = 38 d, already shorter."""
    elapsed = [365] * 12 + [200]
    ok = [True] * 12 + [False]
    method = intervals.interval_by_method(method_name, 1095, elapsed, ok, target=0.95, min_observations=8, **STAIR)
    assert method.days <= 200
    if method_name == "staircase":
        assert method.days == 200 and "no longer than the 200 d interval just completed" in method.reason
    last_out = intervals.interval_by_method(method_name, 180, [180] * 14, [True] * 11 + [False] * 3,
                                            target=0.95, min_observations=8, **STAIR)
    assert last_out.days <= 180
    if method_name == "reliability":
        assert last_out.days == round(180 * math.log(0.95) / math.log(11 / 14))


def test_one_calibration_only_uses_the_base_interval():
    method = intervals.interval_by_method("reliability", 365, [], [], **STAIR)
    assert method.days == 365 and method.reason.startswith("no interval observed yet")
    d = due.decide_due(LAST, method.days, method.reason)
    assert d.due == days(365) and d.winner == "method"


# Risk and drift may only shorten ---------------------------------------------------------------------
def test_risk_shortens_the_method_interval():
    """Risk factor 0.5 on the method's 570 d: 285 d (interval × factor, halves up)."""
    d = due.decide_due(LAST, 570, "staircase", risk_factor=0.5, risk_reason="duty risk (high)")
    assert d.winner == "risk" and d.due == days(285)
    assert "570 d × risk factor 0.50 = 285 d" in due.rationale_text(d.rationale())


def test_drift_candidate_shortens_with_margin():
    d = due.decide_due(LAST, 365, "m", crossing=days(200), margin_days=30)
    assert d.winner == "drift" and d.due == days(170)
    assert due.rationale_text(d.rationale()).splitlines()[1].startswith("→ chosen: drift")


def test_later_drift_and_risk_do_not_lengthen():
    d = due.decide_due(LAST, 300, "m", crossing=days(900), risk_factor=1.0)
    assert d.winner == "method" and d.due == days(300)


def test_minimum_bound_applies_and_is_named():
    """Misapplied duty (factor 0.25) on a 30 d interval: 7.5 -> 8 d, held to the 30 d minimum."""
    d = due.decide_due(LAST, 30, "m", risk_factor=0.25, min_days=30)
    assert d.due == days(30) and d.bounded == "minimum" and d.winner == "risk"
    assert "Held to the minimum interval" in due.rationale_text(d.rationale())
    assert due.decide_due(LAST, 3000, "m", max_days=1095).due == days(1095)  # the method is held to the maximum


def test_one_rounding_rule_for_intervals():
    """Halves go up everywhere (not banker's rounding, which would give 182 for 182.5)."""
    assert intervals.whole_days(182.5) == 183 and intervals.whole_days(182.49) == 182
    assert due.decide_due(LAST, 365, "m", risk_factor=0.5).due == days(183)
    assert intervals.staircase(365, False) == 183


@pytest.fixture
def drifting_meter(db):
    site = Site.objects.create(name="S")
    area = Area.objects.create(site=site, name="A")
    fluid = Fluid.objects.create(name="W", phase="liquid", conductivity_us_cm=400)
    device = commission(tag="FT-D", principle="electromagnetic", area=area, fluid=fluid, line_size="DN50",
                                 internal_diameter_mm=52.5, range_max=100, mpe_value=1.0, mpe_basis="absolute",
                                 wetted_material="316L", base_interval_days=2000)
    standard = ReferenceStandard.objects.create(identification="RS", description="ref", range_max=200,
                                                certificate_number="C", due_date=dt.date(2099, 1, 1),
                                                expanded_uncertainty=0.0, uncertainty_basis="absolute")
    return device, standard


def add_event(device, standard, day, found_error, left_error=None):
    event = CalibrationEvent.objects.create(device=device, performed_on=day, technician="T", procedure="p",
                                            adjusted=left_error is not None)
    event.reference_standards.add(standard)
    CalibrationPoint.objects.create(event=event, kind="as_found", nominal_pct=50, reference_value=50,
                                    indicated_value=50 + found_error)
    if left_error is not None:
        CalibrationPoint.objects.create(event=event, kind="as_left", nominal_pct=50, reference_value=50,
                                        indicated_value=50 + left_error)
    event.sign("T")
    return event


def test_synthetic_meter_exact_crossing_and_adjustment_reset(drifting_meter, settings):
    """Drift 0.002 flow units/day exactly (no scatter), MPE 1.0 absolute: from an as-left of 0 the error
    reaches the MPE 500 days after the last calibration; the due date is that minus the 30-day margin."""
    settings.CALIBRATION = {**settings.CALIBRATION, "interval_method": "staircase", "max_interval_days": 3000}
    device, standard = drifting_meter
    start = dt.date(2020, 1, 1)
    days = [0, 100, 200, 300]
    for d in days:
        add_event(device, standard, start + dt.timedelta(days=d), found_error=0.002 * d)
    device.refresh_from_db()
    last = start + dt.timedelta(days=300)
    # not adjusted: baseline is the last as-found 0.6, so 0.4 remains -> 200 days
    assert device.predicted_crossing == last + dt.timedelta(days=200)
    assert device.due_rationale["winner"] == "drift"
    assert device.next_due_date == last + dt.timedelta(days=170)
    # adjust back to zero at day 400 (as-found 0.8): the baseline resets, 1.0 remains -> 500 days
    add_event(device, standard, start + dt.timedelta(days=400), found_error=0.8, left_error=0.0)
    device.refresh_from_db()
    assert device.predicted_crossing == start + dt.timedelta(days=900)
    assert device.drift_rate_per_year == pytest.approx(0.002 * 365.25)


def test_meter_without_history_has_no_due_date_and_says_so(drifting_meter):
    call_command("recompute_due_dates")
    device = Device.objects.get()
    assert device.next_due_date is None
    assert "No signed calibration" in device.due_rationale["note"]


def test_recompute_command_on_demo_fleet(demo_history, client):
    call_command("recompute_due_dates")
    devices = list(Device.objects.filter(position__isnull=False))
    assert all(m.next_due_date is not None for m in devices)
    winners = {m.due_rationale["winner"] for m in devices}
    assert winners == {"risk", "drift", "method"}
    page = client.get(f"/positions/{devices[0].tag}/").content.decode()
    assert "(chosen)" in page and "<svg" in page


def test_recompute_stores_the_latest_verdict_and_the_duty_risk(drifting_meter):
    device, standard = drifting_meter
    add_event(device, standard, dt.date(2025, 1, 1), found_error=2.0, left_error=0.0)  # out of tolerance
    device.refresh_from_db()
    assert device.last_in_tolerance is False
    add_event(device, standard, dt.date(2026, 1, 1), found_error=0.1)  # the latest one counts
    device.refresh_from_db()
    assert device.last_in_tolerance is True and device.risk_severity == ""
    # the fluid turns out to be demineralised water: an electromagnetic meter on it is misapplied
    device.fluid.conductivity_us_cm = 0.5
    device.fluid.save()
    device.refresh_from_db()
    assert device.risk_severity == "misapplied"
    Device.objects.filter(pk=device.pk).update(risk_severity="")
    call_command("recompute_due_dates")
    assert Device.objects.get(pk=device.pk).risk_severity == "misapplied"


def test_another_meters_failures_do_not_pull_a_meter_that_always_passed(drifting_meter, settings):
    """Two electromagnetic meters on the same liquid. The reliability method reads each meter's own record
    (no pooling): the meter that always passed lengthens by the staircase from its base 365 d
    (365 × 1.25 = 456.25 -> 456, × 1.25 = 570 d, OIML D 10 method 1), whatever the other one did."""
    settings.CALIBRATION = {**settings.CALIBRATION, "interval_method": "reliability", "max_interval_days": 1095}
    good, standard = drifting_meter
    Device.objects.filter(pk=good.pk).update(base_interval_days=365)
    bad = commission(tag="FT-BAD", principle="electromagnetic", area=good.area, fluid=good.fluid,
                               line_size="DN50", internal_diameter_mm=52.5, range_max=100, mpe_value=1.0,
                               mpe_basis="absolute", wetted_material="316L", base_interval_days=365)
    for year in (2023, 2024, 2025):
        add_event(good, standard, dt.date(year, 3, 1), found_error=0.1)
        add_event(bad, standard, dt.date(year, 3, 1), found_error=2.0, left_error=0.0)
    good.refresh_from_db()
    assert good.next_due_date == dt.date(2025, 3, 1) + dt.timedelta(days=570)
    assert "k = 2 of n = 2 intervals in tolerance" in good.due_rationale["candidates"][0]["reason"]
    bad.refresh_from_db()
    assert bad.last_in_tolerance is False and bad.next_due_date < good.next_due_date


def test_meter_page_shows_one_truth(demo_history, client):
    """The heading's interval is the one the due date uses (due - last calibrated), and every candidate is
    listed beside it with its date, days and reason; findings are said in words."""
    call_command("recompute_due_dates")
    for device in Device.objects.exclude(next_due_date=None).select_related("position"):
        body = client.get(device.get_absolute_url()).content.decode()
        used = (device.next_due_date - device.last_calibrated).days
        assert f'<strong id="used-interval">{used} days</strong>' in body, device.tag
        assert device.due_rationale["interval_days"] == used
        for candidate in device.due_rationale["candidates"]:
            assert f"<td>{candidate['due']}</td><td>{candidate['days']}</td>" in body, device.tag
        for finding in device.due_rationale["findings"]:
            assert finding.split(";")[0] in body.replace("&#x27;", "'"), device.tag
        assert "effective interval" not in body


def test_a_first_calibration_found_out_shortens_the_base_interval_by_one_staircase_step():
    # OIML D 10:2007 method 1: an out-of-tolerance result multiplies the interval by the shorten factor;
    # with no interval observed yet the base interval is the one shortened. Hand-worked: 365 × 0.5 = 182.5 -> 183 d
    # (halves upward); 50 × 0.5 = 25 d, held to the 30 d minimum.
    from calibration import intervals

    base = intervals.interval_by_method("staircase", 365, [], [])
    assert (base.days, base.observations) == (365, 0)
    first = intervals.first_calibration_found_out(base, shorten=0.5, min_days=30, max_days=1095)
    assert first.days == 183 and "365 d × 0.5 = 183 d" in first.reason
    short = intervals.first_calibration_found_out(intervals.interval_by_method("staircase", 50, [], []), shorten=0.5)
    assert short.days == 30 and "held to the bounds" in short.reason
    # with an observed interval the method has already counted the failure: unchanged
    counted = intervals.interval_by_method("staircase", 365, [365], [False])
    assert intervals.first_calibration_found_out(counted) == counted


def test_improving_meter_crossing_rate_and_chart_on_the_side_it_heads_to(drifting_meter, settings):
    """Issue 26 items 1 and 7, worked by hand: as-founds 0.4, 0.3, 0.2, 0.1 a year (365 d) apart, never adjusted,
    MPE 1.0 absolute: the error falls exactly 0.1 per 365 d toward zero and, continuing, reaches -1.0 after
    (0.1 + 1.0) / (0.1 / 365) = 4015 days past the last calibration. The page shows that slope with its standard
    uncertainty (0 on an exact line), and the chart draws the 50 % points and the lower bound."""
    from reports.trend import meter_drift_chart

    settings.CALIBRATION = {**settings.CALIBRATION, "interval_method": "staircase", "max_interval_days": 3000}
    device, standard = drifting_meter
    start = dt.date(2020, 1, 1)
    for k, error in enumerate([0.4, 0.3, 0.2, 0.1]):
        add_event(device, standard, start + dt.timedelta(days=365 * k), found_error=error)
    device.refresh_from_db()
    last = start + dt.timedelta(days=3 * 365)
    assert device.drift_status == "improving"
    assert device.predicted_crossing == last + dt.timedelta(days=4015)
    assert device.drift_rate_per_year == pytest.approx(-0.1 * 365.25 / 365, rel=1e-6)
    assert device.due_rationale["drift_rate_u_per_year"] == pytest.approx(0.0, abs=1e-9)
    assert device.due_rationale["drift_chart_pct"] == 50
    svg = meter_drift_chart(device)
    assert "one-sided 95 % lower prediction bound" in svg and "as found (50 % of range)" in svg
    assert f"predicted crossing {device.predicted_crossing.isoformat()}" in svg
