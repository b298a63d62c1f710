"""Next due date: each candidate can win and the rationale names it; the fleet recompute end to end."""
import datetime as dt

import pytest
from django.core.management import call_command

from calibration import due
from calibration.models import CalibrationEvent, CalibrationPoint, ReferenceStandard
from plant.models import Area, Fluid, Meter, Site

LAST = dt.date(2026, 1, 1)


def test_risk_candidate_wins():
    d = due.decide_due(LAST, 365, 0.5, crossing=dt.date(2027, 6, 1), method_interval_days=300)
    assert d.winner == "risk" and d.due == LAST + dt.timedelta(days=182)
    assert "risk factor 0.50" in due.rationale_text(d.rationale()).splitlines()[0]


def test_drift_candidate_wins_with_margin():
    d = due.decide_due(LAST, 365, 1.0, crossing=dt.date(2026, 6, 1), margin_days=30, method_interval_days=300)
    assert d.winner == "drift" and d.due == dt.date(2026, 5, 2)
    assert due.rationale_text(d.rationale()).startswith("→ chosen: drift")


def test_method_candidate_wins():
    d = due.decide_due(LAST, 365, 1.0, method_interval_days=200, method_reason="staircase")
    assert d.winner == "method" and d.due == LAST + dt.timedelta(days=200)


def test_bounds_apply_and_are_named():
    d = due.decide_due(LAST, 365, 1.0, crossing=LAST, min_days=30)
    assert d.due == LAST + dt.timedelta(days=30) and d.bounded == "minimum"
    d = due.decide_due(LAST, 3000, 1.0, max_days=1095)
    assert d.due == LAST + dt.timedelta(days=1095) and d.bounded == "maximum"
    assert "Bounded by the maximum interval" in due.rationale_text(d.rationale())


@pytest.fixture
def drifting_meter(db):
    site = Site.objects.create(name="S")
    area = Area.objects.create(site=site, name="A")
    fluid = Fluid.objects.create(name="W", phase="liquid", conductivity_us_cm=400)
    meter = Meter.objects.create(tag="FT-D", principle="electromagnetic", area=area, fluid=fluid, line_size="DN50",
                                 internal_diameter_mm=52.5, range_max=100, mpe_value=1.0, mpe_basis="absolute",
                                 wetted_material="316L", base_interval_days=2000)
    standard = ReferenceStandard.objects.create(identification="RS", description="ref", range_max=200,
                                                certificate_number="C", due_date=dt.date(2099, 1, 1),
                                                expanded_uncertainty=0.0, uncertainty_basis="absolute")
    return meter, standard


def add_event(meter, standard, day, found_error, left_error=None):
    event = CalibrationEvent.objects.create(meter=meter, performed_on=day, technician="T", procedure="p",
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
    meter, standard = drifting_meter
    start = dt.date(2020, 1, 1)
    days = [0, 100, 200, 300]
    for d in days:
        add_event(meter, standard, start + dt.timedelta(days=d), found_error=0.002 * d)
    meter.refresh_from_db()
    last = start + dt.timedelta(days=300)
    # not adjusted: baseline is the last as-found 0.6, so 0.4 remains -> 200 days
    assert meter.predicted_crossing == last + dt.timedelta(days=200)
    assert meter.due_rationale["winner"] == "drift"
    assert meter.next_due_date == last + dt.timedelta(days=170)
    # adjust back to zero at day 400 (as-found 0.8): the baseline resets, 1.0 remains -> 500 days
    add_event(meter, standard, start + dt.timedelta(days=400), found_error=0.8, left_error=0.0)
    meter.refresh_from_db()
    assert meter.predicted_crossing == start + dt.timedelta(days=900)
    assert meter.drift_rate_per_year == pytest.approx(0.002 * 365.25)


def test_meter_without_history_has_no_due_date_and_says_so(drifting_meter):
    call_command("recompute_due_dates")
    meter = Meter.objects.get()
    assert meter.next_due_date is None
    assert "No signed calibration" in meter.due_rationale["note"]


def test_recompute_command_on_demo_fleet(demo_history, client):
    call_command("recompute_due_dates")
    meters = list(Meter.objects.all())
    assert all(m.next_due_date is not None for m in meters)
    winners = {m.due_rationale["winner"] for m in meters}
    assert winners == {"risk", "drift", "method"}
    page = client.get(f"/meters/{meters[0].tag}/").content.decode()
    assert "chosen:" in page and "<svg" in page


def test_recompute_stores_the_latest_verdict_and_the_duty_risk(drifting_meter):
    meter, standard = drifting_meter
    add_event(meter, standard, dt.date(2025, 1, 1), found_error=2.0, left_error=0.0)  # out of tolerance
    meter.refresh_from_db()
    assert meter.last_in_tolerance is False
    add_event(meter, standard, dt.date(2026, 1, 1), found_error=0.1)  # the latest one counts
    meter.refresh_from_db()
    assert meter.last_in_tolerance is True and meter.risk_severity == ""
    # the fluid turns out to be demineralised water: an electromagnetic meter on it is misapplied
    meter.fluid.conductivity_us_cm = 0.5
    meter.fluid.save()
    meter.refresh_from_db()
    assert meter.risk_severity == "misapplied"
    Meter.objects.filter(pk=meter.pk).update(risk_severity="")
    call_command("recompute_due_dates")
    assert Meter.objects.get(pk=meter.pk).risk_severity == "misapplied"
