"""Calibration records: tablet entry, computed results, sign-off and the lock on signed records."""
import datetime as dt
import html

import pytest
from django.contrib.auth.models import User
from django.core.exceptions import ValidationError

from calibration.forms import entry_post_data
from calibration.models import CalibrationEvent, CalibrationPoint, ReferenceStandard, SignedRecordError
from plant.models import Area, Fluid, Meter, Site

pytestmark = pytest.mark.django_db
TODAY = dt.date(2026, 11, 20)


@pytest.fixture
def meter():
    site = Site.objects.create(name="Test site")
    area = Area.objects.create(site=site, name="Hall A")
    water = Fluid.objects.create(name="Water", phase="liquid", conductivity_us_cm=500)
    return Meter.objects.create(tag="FT-9", principle="electromagnetic", area=area, fluid=water, line_size="DN50",
                                internal_diameter_mm=52.5, range_min=0, range_max=40, mpe_value=0.5,
                                mpe_basis="pct_reading", wetted_material="316L")


@pytest.fixture
def standard():
    return ReferenceStandard.objects.create(identification="RS-1", description="Master meter", range_min=0, range_max=50,
                                            certificate_number="C-100", due_date=dt.date(2027, 6, 1),
                                            expanded_uncertainty=0.1, uncertainty_basis="pct_reading")


def entry_data(standard, adjusted=False, found=None, left=None, **event):
    """POST data of the tablet form: 5 as-found rows, 5 as-left rows; `event` overrides "ev-..." keys."""
    found = found if found is not None else [(4, 4.01), (10, 10.02), (20, 20.05), (30, 29.97), (40, 40.04)]
    left = left if left is not None else [("", "")] * 5
    header = {
        "performed_on": TODAY.isoformat(), "reference_standards": [standard.pk],
        "procedure": "Comparison against portable master meter, five points", "reason": "scheduled",
        "condition_received": "Installed, in service, no visible damage",
        "decision_rule": "simple", "ambient_temp_c": "18", "fluid_temp_c": "12", "pressure_bar": "3",
    }
    if adjusted:
        header["adjusted"] = "on"
    data = entry_post_data(header, found, left)
    data.update(event)
    return data


def counts():
    return CalibrationEvent.objects.count(), CalibrationPoint.objects.count()


def test_entry_computes_errors_and_verdicts(client, meter, standard):
    response = client.post(f"/meters/{meter.tag}/calibrate/", entry_data(standard))
    assert response.status_code == 302
    event = CalibrationEvent.objects.get()
    points = sorted(event.points.filter(kind="as_found"), key=lambda p: p.nominal_pct)
    # 20.05 vs 20: error = 100*(0.05/20) = 0.25 % of reading
    assert points[2].error == pytest.approx(0.25)
    # U: reference 0.1 % (k=2) only, no repeats or resolution -> u = 0.05 % of reading, Type B with infinite
    # degrees of freedom, so k = z(0.975) = 1.960 (JCGM 100:2008 Table G.2, nu = inf, p = 95 %; from memory)
    # and U = 1.95996 x 0.05 = 0.0980 % of reading
    assert points[2].coverage_factor == pytest.approx(1.95996, abs=1e-5) and points[2].dof_effective is None
    assert points[2].expanded_uncertainty == pytest.approx(0.0980, abs=1e-4)
    assert [p.decision for p in points] == ["pass"] * 5
    assert event.as_found_in_tolerance is True
    page = client.get(event.get_absolute_url()).content.decode()
    assert "0.250" in page and "in tolerance" in page


def test_out_of_tolerance_and_guarded_rule(client, meter, standard):
    # 10.05 vs 10 -> 0.5 % : at the MPE. Simple: pass. Guarded (w=U=0.1 %): conditional pass.
    found = [(10, 10.05), (20, 20.2)]
    client.post(f"/meters/{meter.tag}/calibrate/", entry_data(standard, found=found, **{"ev-decision_rule": "guarded"}))
    event = CalibrationEvent.objects.get()
    decisions = {p.reference_value: p.decision for p in event.points.all()}
    assert decisions[10] == "conditional pass"
    assert decisions[20] == "fail"  # 1.0 % >= MPE + U = 0.6 %
    assert event.as_found_in_tolerance is False


@pytest.mark.parametrize("found,field_message", [
    ([(10, 10.0), ("", "")], "Enter the reference flow at this point"),
    ([(10, "ten")], "Enter the meter's indication as a number."),
    ([(-5, -5)], "The reference flow cannot be negative."),
    ([(55, 55)], "outside the meter's calibrated range 0–40"),
])
def test_bad_points_rejected_nothing_saved(client, meter, standard, found, field_message):
    before = counts()
    response = client.post(f"/meters/{meter.tag}/calibrate/", entry_data(standard, found=found))
    assert response.status_code == 400
    assert field_message in html.unescape(response.content.decode())
    assert counts() == before


@pytest.mark.parametrize("event,field_message", [
    ({"ev-performed_on": "2099-01-01"}, "The date of calibration is in the future."),
    ({"ev-pressure_bar": "-1.5"}, "A gauge pressure cannot be below full vacuum (-1.01325 bar g)."),
    ({"ev-ambient_temp_c": "-300"}, "Temperature is below absolute zero."),
])
def test_bad_header_rejected_nothing_saved(client, meter, standard, event, field_message):
    response = client.post(f"/meters/{meter.tag}/calibrate/", entry_data(standard, **event))
    assert response.status_code == 400
    assert field_message in html.unescape(response.content.decode())
    assert counts() == (0, 0)


def test_adjustment_without_as_left_rejected(client, meter, standard):
    response = client.post(f"/meters/{meter.tag}/calibrate/", entry_data(standard, adjusted=True))
    assert response.status_code == 400
    assert "An adjustment was made: enter the as-left points." in response.content.decode()
    assert counts() == (0, 0)


def test_expired_or_out_of_range_standard_refused(client, meter, standard):
    ReferenceStandard.objects.filter(pk=standard.pk).update(due_date=dt.date(2026, 1, 1))
    response = client.post(f"/meters/{meter.tag}/calibrate/", entry_data(standard))
    assert response.status_code == 400
    assert "was past its due date (2026-01-01)" in response.content.decode()
    # a standard whose range (0–30) does not cover the meter's (0–40) is neither offered nor accepted
    ReferenceStandard.objects.filter(pk=standard.pk).update(due_date=dt.date(2027, 6, 1), range_max=30)
    assert f'value="{standard.pk}"' not in client.get(f"/meters/{meter.tag}/calibrate/").content.decode()
    response = client.post(f"/meters/{meter.tag}/calibrate/", entry_data(standard))
    assert response.status_code == 400
    assert "is withdrawn or does not suit this meter (phase or range)" in html.unescape(response.content.decode())
    assert counts() == (0, 0)


def test_half_save_impossible_when_a_point_fails_at_db(client, meter, standard, monkeypatch):
    """A failure while writing the 3rd point rolls back the event and the first points."""
    original = CalibrationPoint.save
    calls = {"n": 0}

    def failing_save(self, *args, **kwargs):
        calls["n"] += 1
        if calls["n"] == 3:
            raise RuntimeError("disk full")
        return original(self, *args, **kwargs)

    monkeypatch.setattr(CalibrationPoint, "save", failing_save)
    with pytest.raises(RuntimeError):
        client.post(f"/meters/{meter.tag}/calibrate/", entry_data(standard))
    assert counts() == (0, 0)


@pytest.fixture
def signed_event(client, meter, standard):
    client.post(f"/meters/{meter.tag}/calibrate/", entry_data(standard))
    event = CalibrationEvent.objects.get()
    response = client.post(f"/calibrations/{event.pk}/sign/", {"signed_by": "A. Fieldtech", "signed_role": "Technician"})
    assert response.status_code == 302
    event.refresh_from_db()
    assert event.is_signed and event.signed_at and event.signed_by == "Administrator Tester"
    return event


def test_signed_event_locked_on_model_save_and_delete(signed_event):
    signed_event.notes = "tampered"
    with pytest.raises(SignedRecordError):
        signed_event.save()
    with pytest.raises(SignedRecordError):
        signed_event.delete()
    point = signed_event.points.first()
    point.indicated_value = 99
    with pytest.raises(SignedRecordError):
        point.save()
    with pytest.raises(SignedRecordError):
        point.delete()
    fresh = CalibrationEvent.objects.get(pk=signed_event.pk)
    assert fresh.notes == "" and fresh.points.count() == 5  # as-left left blank: no adjustment


def test_signed_event_locked_on_queryset_paths(signed_event):
    with pytest.raises(SignedRecordError):
        CalibrationEvent.objects.filter(pk=signed_event.pk).update(notes="x")
    with pytest.raises(SignedRecordError):
        CalibrationEvent.objects.all().delete()
    with pytest.raises(SignedRecordError):
        CalibrationPoint.objects.filter(event=signed_event).update(indicated_value=0)
    with pytest.raises(SignedRecordError):
        CalibrationPoint.objects.all().delete()
    assert CalibrationPoint.objects.filter(event=signed_event, indicated_value=0).count() == 0


def test_signed_event_locked_in_admin_and_sign_again(client, signed_event):
    response = client.post(f"/calibrations/{signed_event.pk}/sign/")
    assert response.status_code == 400
    assert "already signed" in response.content.decode()
    admin = User.objects.create_superuser("root", "r@example.invalid", "pw")
    client.force_login(admin)
    url = f"/admin/calibration/calibrationevent/{signed_event.pk}/change/"
    response = client.post(url, {"notes": "tampered"})
    assert response.status_code in (302, 403)
    response = client.post(f"/admin/calibration/calibrationevent/{signed_event.pk}/delete/", {"post": "yes"})
    assert response.status_code == 403
    response = client.post(f"/calibrations/{signed_event.pk}/sign/")
    assert response.status_code == 403  # not the technician who entered it
    fresh = CalibrationEvent.objects.get(pk=signed_event.pk)
    assert fresh.notes == "" and fresh.signed_by == "Administrator Tester"


def test_correction_supersedes_signed_event(meter, standard, signed_event):
    correction = CalibrationEvent.objects.create(meter=meter, performed_on=TODAY, technician="A. Fieldtech",
                                                 procedure="re-entry", supersedes=signed_event)
    assert signed_event.superseded_by == correction


def test_sign_refused_when_problems(meter, standard):
    event = CalibrationEvent.objects.create(meter=meter, performed_on=TODAY, technician="T", procedure="p")
    with pytest.raises(ValidationError) as info:
        event.sign("T")
    assert "No as-found points recorded." in info.value.messages
    assert not CalibrationEvent.objects.get(pk=event.pk).is_signed


def test_entry_page_is_tablet_ready(client, meter, standard):
    body = client.get(f"/meters/{meter.tag}/calibrate/").content.decode()
    assert 'inputmode="decimal"' in body
    assert "permit to work" in body
    assert 'name="viewport"' in body
