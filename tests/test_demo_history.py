"""The demo history: every demo meter has years of signed, locked calibrations with varied drift."""
import datetime as dt

import pytest
from django.db.models import Count, Min

from calibration.forms import EventForm
from calibration.models import CalibrationEvent, SignedRecordError
from plant.models import Meter

pytestmark = pytest.mark.django_db
GENERATED_ON = dt.date(2026, 11, 30)  # the generator's fixed "today"


def test_every_meter_has_three_to_eight_years_of_signed_history(demo_history):
    rows = CalibrationEvent.objects.values("meter").annotate(first=Min("performed_on"), n=Count("id"))
    assert len(rows) == Meter.objects.count()
    for row in rows:
        years = (GENERATED_ON - row["first"]).days / 365.25
        assert 2.9 <= years <= 8.0
        assert row["n"] >= 4
    assert not CalibrationEvent.objects.exclude(state="signed").exists()


def test_history_mixes_in_and_out_of_tolerance(demo_history):
    total = CalibrationEvent.objects.count()
    out = CalibrationEvent.objects.filter(as_found_in_tolerance=False).count()
    assert 0 < out < total / 2
    assert CalibrationEvent.objects.filter(adjusted=True, as_left_in_tolerance=True).exists()


def test_risky_duties_drift_more(demo_history):
    """The generator scales drift by 1/risk factor: meters with findings fail more often at as-found."""
    fail_rate = {True: [0, 0], False: [0, 0]}
    for meter in Meter.objects.select_related("fluid"):
        risky = meter.risk_factor() < 1
        events = list(meter.calibrations.all())
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
    assert client.get(f"/meters/{event.meter.tag}/").status_code == 200
