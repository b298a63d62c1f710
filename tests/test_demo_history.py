"""The demo history: every demo meter has years of signed, locked calibrations with varied drift."""
import datetime as dt

import pytest
from django.core.management import call_command
from django.db.models import Count, Min

from calibration.forms import EventForm
from calibration.models import CalibrationEvent, SignedRecordError
from plant.models import Device

pytestmark = pytest.mark.django_db
GENERATED_ON = dt.date(2026, 12, 4)  # the generator's fixed "today" (build_demo_history.TODAY)


def test_every_meter_has_three_to_eight_years_of_signed_history(demo_history):
    rows = CalibrationEvent.objects.values("device").annotate(first=Min("performed_on"), n=Count("id"))
    assert len(rows) == Device.objects.exclude(serial="SN730342").count()  # all but the spare never calibrated
    bench = Device.objects.get(serial="SN730118").pk  # the spare calibrated once, on the bench, a month ago
    for row in rows:
        if row["device"] == bench:
            assert row["n"] == 1 and (GENERATED_ON - row["first"]).days == 30
            continue
        years = (GENERATED_ON - row["first"]).days / 365.25
        assert 2.9 <= years <= 8.0
        assert row["n"] >= 3  # a stable meter on a 730 d base interval, lengthened by the staircase
    assert not CalibrationEvent.objects.exclude(state="signed").exists()


def test_history_mixes_in_and_out_of_tolerance(demo_history):
    total = CalibrationEvent.objects.count()
    out = CalibrationEvent.objects.filter(as_found_in_tolerance=False).count()
    assert 0 < out < total / 2
    assert CalibrationEvent.objects.filter(adjusted=True, as_left_in_tolerance=True).exists()


def test_risky_duties_drift_more(demo_history):
    """The generator scales drift by 1/risk factor: meters with findings fail more often at as-found."""
    fail_rate = {True: [0, 0], False: [0, 0]}
    for device in Device.objects.filter(position__isnull=False).select_related("position__fluid"):
        risky = device.risk_factor() < 1
        events = list(device.calibrations.all())
        fail_rate[risky][0] += sum(1 for e in events if e.as_found_in_tolerance is False)
        fail_rate[risky][1] += len(events)
    assert fail_rate[True][0] / fail_rate[True][1] > fail_rate[False][0] / fail_rate[False][1]


def test_signed_event_refuses_a_model_form_edit(demo_history):
    event = CalibrationEvent.objects.first()
    original = event.technician
    form = EventForm(data={"performed_on": event.performed_on, "contractor": "Someone", "procedure": "x",
                           "condition_received": "x",
                           "reference_standards": [s.pk for s in event.reference_standards.all()],
                           "reason": "scheduled", "decision_rule": "simple"}, instance=event)
    assert form.is_valid(), form.errors
    with pytest.raises(SignedRecordError):
        form.save()
    assert CalibrationEvent.objects.get(pk=event.pk).technician == original
    assert CalibrationEvent.objects.get(pk=event.pk).contractor == ""


def test_demo_meter_page_and_event_page_render(client, demo_history):
    event = CalibrationEvent.objects.filter(adjusted=True).first()
    assert client.get(f"/calibrations/{event.pk}/").status_code == 200
    assert client.get(f"/positions/{event.device.tag}/").status_code == 200


def test_demo_plant_looks_looked_after(demo_history):
    """On the day the history was generated: most meters in date, a few overdue (their last calibration was
    missed), a few whose due date the drift model shortens or flags, one or two last found out of tolerance.
    The due dates do not depend on the day of the recompute, only "overdue" does."""
    call_command("recompute_due_dates")
    devices = list(Device.objects.filter(position__isnull=False).select_related("position"))
    total = len(devices)
    overdue = [m.tag for m in devices if m.next_due_date < GENERATED_ON]
    drifting = [m.tag for m in devices
                if m.due_rationale["winner"] == "drift" or m.due_rationale["findings"]
                and m.drift_status in ("drifting", "scatter")]
    failed = [m.tag for m in devices if m.last_in_tolerance is False]
    assert total == 44
    assert total - len(overdue) >= 0.8 * total, overdue  # most in date
    assert 2 <= len(overdue) <= 6, overdue  # a few overdue
    assert 2 <= len(drifting) <= 12, drifting  # a few drifting
    assert 1 <= len(failed) <= 2, failed  # one or two failed
    # nothing is due before the calibration it follows, nor sooner than the policy minimum
    assert all((m.next_due_date - m.last_calibrated).days >= 30 for m in devices)
    # and the interval method lengthens intervals where the record is clean
    assert any((m.next_due_date - m.last_calibrated).days > m.base_interval_days for m in devices)
