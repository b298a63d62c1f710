"""Calibration records: tablet entry, computed results, sign-off and the lock on signed records."""
import datetime as dt
import html

import pytest
from django.contrib.auth.models import User
from django.core.exceptions import ValidationError

from calibration.models import CalibrationEvent, CalibrationPoint, ReferenceStandard, SignedRecordError
from plant.models import Fluid, Device
from plant.installations import commission
from tests.helpers import TODAY, entry_data

pytestmark = pytest.mark.django_db


def counts():
    return CalibrationEvent.objects.count(), CalibrationPoint.objects.count()


def test_entry_computes_errors_and_verdicts(client, device, standard):
    response = client.post(f"/positions/{device.tag}/calibrate/", entry_data(standard))
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


def test_out_of_tolerance_and_guarded_rule(client, device, standard):
    # 10.05 vs 10 -> 0.5 % : at the MPE. Simple: pass. Guarded (w=U=0.1 %): conditional pass.
    found = [(10, 10.05), (20, 20.2)]
    client.post(f"/positions/{device.tag}/calibrate/", entry_data(standard, found=found, **{"ev-decision_rule": "guarded"}))
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
def test_bad_points_rejected_nothing_saved(client, device, standard, found, field_message):
    before = counts()
    response = client.post(f"/positions/{device.tag}/calibrate/", entry_data(standard, found=found))
    assert response.status_code == 400
    assert field_message in html.unescape(response.content.decode())
    assert counts() == before


@pytest.mark.parametrize("event,field_message", [
    ({"ev-performed_on": "2099-01-01"}, "The date of calibration is in the future."),
    ({"ev-pressure_bar": "-1.5"}, "A gauge pressure cannot be below full vacuum (-1.01325 bar g)."),
    ({"ev-ambient_temp_c": "-300"}, "Temperature is below absolute zero."),
])
def test_bad_header_rejected_nothing_saved(client, device, standard, event, field_message):
    response = client.post(f"/positions/{device.tag}/calibrate/", entry_data(standard, **event))
    assert response.status_code == 400
    assert field_message in html.unescape(response.content.decode())
    assert counts() == (0, 0)


def test_adjustment_without_as_left_rejected(client, device, standard):
    response = client.post(f"/positions/{device.tag}/calibrate/", entry_data(standard, adjusted=True))
    assert response.status_code == 400
    assert "An adjustment was made: enter the as-left points." in response.content.decode()
    assert counts() == (0, 0)


def test_expired_or_out_of_range_standard_refused(client, device, standard):
    ReferenceStandard.objects.filter(pk=standard.pk).update(due_date=dt.date(2026, 1, 1))
    response = client.post(f"/positions/{device.tag}/calibrate/", entry_data(standard))
    assert response.status_code == 400
    assert "was past its due date (2026-01-01)" in response.content.decode()
    # a standard whose range (0–30) does not cover the meter's (0–40) is neither offered nor accepted
    ReferenceStandard.objects.filter(pk=standard.pk).update(due_date=dt.date(2027, 6, 1), range_max=30)
    assert f'name="ev-reference_standards" value="{standard.pk}"' not in client.get(f"/positions/{device.tag}/calibrate/").content.decode()
    response = client.post(f"/positions/{device.tag}/calibrate/", entry_data(standard))
    assert response.status_code == 400
    assert "is withdrawn or does not suit this meter (phase, measuring principle or range)" in html.unescape(response.content.decode())
    assert counts() == (0, 0)


def test_half_save_impossible_when_a_point_fails_at_db(client, device, standard, monkeypatch):
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
        client.post(f"/positions/{device.tag}/calibrate/", entry_data(standard))
    assert counts() == (0, 0)


@pytest.fixture
def signed_event(client, device, standard):
    client.post(f"/positions/{device.tag}/calibrate/", entry_data(standard))
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


def test_correction_supersedes_signed_event(device, standard, signed_event):
    """A correction (ISO/IEC 17025:2017 §7.8.8) names the signed record it replaces and says why."""
    correction = CalibrationEvent.objects.create(device=device, performed_on=TODAY, technician="A. Fieldtech",
                                                 procedure="re-entry", supersedes=signed_event,
                                                 correction_reason="Indications typed in the wrong rows")
    assert signed_event.superseded_by == correction


def test_a_correction_without_a_reason_or_of_a_draft_is_refused(device, standard, signed_event):
    before = counts()
    with pytest.raises(ValidationError) as refused:
        CalibrationEvent.objects.create(device=device, performed_on=TODAY, technician="T", procedure="p",
                                        supersedes=signed_event, correction_reason="  ")
    assert "State why the calibration is corrected" in refused.value.message_dict["correction_reason"][0]
    draft = CalibrationEvent.objects.create(device=device, performed_on=TODAY, technician="T", procedure="p")
    with pytest.raises(ValidationError) as refused:
        CalibrationEvent.objects.create(device=device, performed_on=TODAY, technician="T", procedure="p",
                                        supersedes=draft, correction_reason="typo")
    assert "Only a signed calibration can be corrected" in refused.value.message_dict["supersedes"][0]
    assert counts() == (before[0] + 1, before[1])  # only the draft was saved


def test_sign_refused_when_problems(device, standard):
    event = CalibrationEvent.objects.create(device=device, performed_on=TODAY, technician="T", procedure="p")
    with pytest.raises(ValidationError) as info:
        event.sign("T")
    assert "No as-found points recorded." in info.value.messages
    assert not CalibrationEvent.objects.get(pk=event.pk).is_signed


def test_entry_page_is_tablet_ready(client, device, standard):
    body = client.get(f"/positions/{device.tag}/calibrate/").content.decode()
    assert 'inputmode="decimal"' in body
    assert "permit to work" in body
    assert 'name="viewport"' in body


def test_only_suitable_standards_are_offered(client, device, standard):
    """Issue 15 item 6: withdrawn, expired today, another phase, or a range not covering the meter: not offered."""
    def make(ident, **kw):
        values = dict(identification=ident, description="ref", range_min=0, range_max=50, certificate_number="C",
                      due_date=dt.date(2099, 1, 1), expanded_uncertainty=0.1)
        values.update(kw)
        return ReferenceStandard.objects.create(**values)

    withdrawn = make("RS-WD", withdrawn=True)
    expired = make("RS-EXP", due_date=dt.date(2020, 1, 1))
    gas = make("RS-GAS", phase="gas")
    liquid = make("RS-LIQ", phase="liquid")
    short = make("RS-SHORT", range_max=30)
    offset = make("RS-OFF", range_min=5)
    body = client.get(f"/positions/{device.tag}/calibrate/").content.decode()
    offered = {s.identification for s in ReferenceStandard.objects.all() if f'name="ev-reference_standards" value="{s.pk}"' in body}
    assert offered == {standard.identification, liquid.identification}
    for refused in (withdrawn, gas, short, offset):
        before = counts()
        response = client.post(f"/positions/{device.tag}/calibrate/", entry_data(refused))
        assert response.status_code == 400
        assert "is withdrawn or does not suit this meter" in html.unescape(response.content.decode())
        assert counts() == before
    # expired on the date of calibration: refused at the field with its due date, nothing saved
    response = client.post(f"/positions/{device.tag}/calibrate/", entry_data(expired))
    assert response.status_code == 400
    assert "Reference standard RS-EXP was past its due date (2020-01-01) on 2026-11-20." in response.content.decode()
    assert response.context["entry"].event_form.errors["reference_standards"]
    assert counts() == (0, 0)


def test_standard_of_a_principle_unfit_for_the_fluid_is_not_offered(client, device):
    """Issue 27 item 4: a standard whose stated principle the principle×fluid rules call not fit for the meter's
    fluid (plant/risk.py: a magnetic meter needs a conductive liquid, common practice about 5 µS/cm) is not offered
    and refused if sent; no principle stated, or a primary method, is offered as before."""
    oil = Fluid.objects.create(name="Vegetable oil", phase="liquid", conductivity_us_cm=0.0001)
    turbine = commission(tag="FT-OIL", principle="turbine", area=device.area, fluid=oil, line_size="DN50",
                         internal_diameter_mm=52.5, range_min=2, range_max=40, mpe_value=0.5,
                         mpe_basis="pct_reading", wetted_material="316L")

    def make(ident, principle):
        return ReferenceStandard.objects.create(
            identification=ident, description="ref", range_min=0, range_max=50, certificate_number="C",
            due_date=dt.date(2099, 1, 1), expanded_uncertainty=0.1, principle=principle)

    magnetic, thermal = make("RS-EM", "electromagnetic"), make("RS-TH", "thermal_mass")
    unstated, weighed, master = make("RS-NONE", ""), make("RS-GRAV", "gravimetric"), make("RS-TURB", "turbine")
    offered = set(ReferenceStandard.offered_for(turbine).values_list("identification", flat=True))
    assert offered == {unstated.identification, weighed.identification, master.identification}
    # on water of 500 µS/cm the same magnetic reference is fit and offered (a thermal one, for gas only, is not)
    on_water = set(ReferenceStandard.offered_for(device).values_list("identification", flat=True))
    assert magnetic.identification in on_water and thermal.identification not in on_water
    body = client.get(f"/positions/{turbine.tag}/calibrate/").content.decode()
    assert f'name="ev-reference_standards" value="{magnetic.pk}"' not in body
    assert f'name="ev-reference_standards" value="{weighed.pk}"' in body
    before = counts()
    response = client.post(f"/positions/{turbine.tag}/calibrate/", entry_data(magnetic))
    assert response.status_code == 400
    assert "is withdrawn or does not suit this meter" in html.unescape(response.content.decode())
    assert counts() == before


def test_a_point_outside_the_standards_usable_range_is_refused_at_its_reference_field(client, device):
    """Issue 27 item 4: a standard's stated uncertainty holds only within its calibrated range (JCGM 200:2012
    (VIM) 4.7); from a range starting at 0 it is used from 10 % of its range maximum (common practice). A
    0–500 m³/h reference at 1 m³/h on a 0–10 m³/h meter is refused at the row's reference field, nothing saved."""
    small = commission(tag="FT-SMALL", principle="electromagnetic", area=device.area, fluid=device.fluid,
                       line_size="DN15", internal_diameter_mm=16, range_min=0, range_max=10, mpe_value=0.5,
                       mpe_basis="pct_reading", wetted_material="316L")
    wide = ReferenceStandard.objects.create(identification="RS-500", description="portable master", range_min=0,
                                            range_max=500, certificate_number="C-500", due_date=dt.date(2099, 1, 1),
                                            expanded_uncertainty=0.1)
    response = client.post(f"/positions/{small.tag}/calibrate/", entry_data(wide, found=[(1, 1.01)]))
    assert response.status_code == 400
    row = response.context["entry"].as_found.forms[0]
    usable_from = 0.10 * 500  # the common-practice minimum, 10 % of the range maximum
    assert row.errors["reference_value"] == [
        f"Reference standard RS-500 is calibrated over 0–500 m³/h and usable from {usable_from:g} m³/h (common "
        "practice: 10 % of its range maximum when its range starts at 0); its uncertainty is not stated at 1 m³/h. "
        "Use a standard whose range covers this point."]
    assert counts() == (0, 0)
    # a stated range minimum is the limit itself (no rule of thumb): 2 is inside 2–50, 1.5 below it
    stated = ReferenceStandard.objects.create(identification="RS-2", description="bench", range_min=2, range_max=50,
                                              certificate_number="C-2", due_date=dt.date(2099, 1, 1),
                                              expanded_uncertainty=0.1)
    assert stated.range_problem([2, 50]) == ""
    assert stated.range_problem([1.5]) == (
        "Reference standard RS-2 is calibrated over 2–50 m³/h; its uncertainty is not stated at 1.5 m³/h. Use a "
        "standard whose range covers this point.")
    # the same wide reference within its usable range (50 m³/h and up) raises nothing
    assert wide.range_problem([50, 500]) == ""


def test_repeats_rule_the_indication_is_their_mean(client, device, standard):
    """Issue 17 item 6: with repeat readings the indication used is their mean; an indication typed beside them
    must be that mean to the digits typed, else it is refused at the field and nothing is saved."""
    # indicated 20.4, repeats 20, 20, 20: mean 20 is not 20.4 (+-0.05) -> refused
    data = entry_data(standard, found=[(20, 20.4)], **{"af-0-repeats": "20 20 20"})
    response = client.post(f"/positions/{device.tag}/calibrate/", data)
    assert response.status_code == 400
    assert ("The indication 20.4 is not the mean of the repeat readings (20); with repeat readings the mean is "
            "used") in html.unescape(response.content.decode())
    assert counts() == (0, 0)
    # 20.03 typed for repeats 20.0, 20.0, 20.1 (mean 20.0333, within +-0.005 of 20.03) -> accepted; the mean is used
    # and stored: error = 100 x 0.0333.. / 20 = 0.16667 % of reading
    # (guarded acceptance: its TUR is below 4:1, 3 repeats give k = 4.3)
    data = entry_data(standard, found=[(20, 20.03)], **{"af-0-repeats": "20.0; 20.0; 20.1", "ev-decision_rule": "guarded"})
    response = client.post(f"/positions/{device.tag}/calibrate/", data)
    assert response.status_code == 302
    point = CalibrationPoint.objects.get()
    assert point.repeats == [20.0, 20.0, 20.1] and point.indicated_value == pytest.approx(20.033333, abs=1e-6)
    assert point.error == pytest.approx(0.166667, abs=1e-6)
    page = html.unescape(client.get(point.event.get_absolute_url()).content.decode())
    assert "20.0333" in page and "mean of 3: 20.0, 20.0, 20.1" in page


def test_results_page_shows_k_tur_and_units(client, device, standard):
    """Issue 17 item 1 / issue 15 item 5 on the results page (hand-worked in test_certificate's k test): repeats
    20.00, 20.04, 20.08 at 20 with the 0.1 % standard: nu_eff 2.8, k 3.30, U 0.415 % of reading, TUR 1.2:1 < 4:1."""
    data = entry_data(standard, found=[(20, "")], **{"af-0-repeats": "20.00 20.04 20.08", "ev-decision_rule": "guarded"})
    assert client.post(f"/positions/{device.tag}/calibrate/", data).status_code == 302
    event = CalibrationEvent.objects.get()
    body = html.unescape(client.get(event.get_absolute_url()).content.decode())
    assert "Error<br>(% of reading)" in body and "MPE<br>(± % of reading)" in body
    assert "U, 95\xa0%<br>(% of reading)" in body and "Reference<br>(m³/h)" in body
    assert ">0.415<" in body and "3.30<br><small>(2.8)" in body and "1.2:1<br>" in body and "⚠ below 4:1" in body
    assert 'id="low-tur"' in body and "Guarded acceptance (w = U) was used." in body


def test_low_tur_policy_refuses_simple_acceptance(client, device, standard, settings):
    """Issue 15 item 5: the decision-rule policy says what a TUR below 4:1 means. With "require_guarded" a simple
    acceptance is refused at the decision-rule field, nothing saved; with "warn" it is accepted and marked."""
    data = entry_data(standard, found=[(20, "")], **{"af-0-repeats": "20.00 20.04 20.08"})
    settings.CALIBRATION = {**settings.CALIBRATION, "low_tur_policy": "require_guarded"}
    response = client.post(f"/positions/{device.tag}/calibrate/", data)
    assert response.status_code == 400
    message = response.context["entry"].event_form.errors["decision_rule"][0]
    assert message.startswith("The test uncertainty ratio is below 4:1 at 20 m³/h (1.2:1): the decision-rule policy "
                              "requires guarded acceptance")
    assert counts() == (0, 0)
    settings.CALIBRATION = {**settings.CALIBRATION, "low_tur_policy": "warn"}
    assert client.post(f"/positions/{device.tag}/calibrate/", data).status_code == 302
    body = client.get(CalibrationEvent.objects.get().get_absolute_url()).content.decode()
    assert "Simple acceptance was used." in body


def test_every_standard_used_enters_u(client, device, standard):
    """Issue 17 item 8: two standards ticked, 0.1 % of reading and 0.02 m³/h absolute (both U at k=2), point 20:
    u = 0.01 and 0.01 m³/h -> u_ref = 0.014142 (RSS, GUM 5.1.2), k = 1.96, U = 0.027718 m³/h = 0.13859 % of reading
    (TUR 0.5 / 0.13859 = 3.6:1, so guarded acceptance, as the policy asks)."""
    second = ReferenceStandard.objects.create(identification="RS-2", description="Flow computer", range_min=0,
                                              range_max=50, certificate_number="C-2", due_date=dt.date(2027, 6, 1),
                                              expanded_uncertainty=0.02, uncertainty_basis="absolute", issuer="Lab B")
    data = entry_data(standard, found=[(20, 20.05)], **{"ev-reference_standards": [standard.pk, second.pk],
                                                                "ev-decision_rule": "guarded"})
    assert client.post(f"/positions/{device.tag}/calibrate/", data).status_code == 302
    point = CalibrationPoint.objects.get()
    assert point.expanded_uncertainty == pytest.approx(0.13859, abs=1e-5)
    event = point.event
    event.sign("Administrator Tester")
    assert [s["identification"] for s in CalibrationEvent.objects.get(pk=event.pk).standards_snapshot] == ["RS-1", "RS-2"]
    assert CalibrationPoint.objects.get().expanded_uncertainty == pytest.approx(0.13859, abs=1e-5)


def test_performer_is_the_logged_in_user_and_item_condition_required(client, device, standard, admin_user):
    """Issue 15 item 7: no free-text performer for staff; the condition as received is required (ISO/IEC 17025
    §7.8.2.1), deviations from the method are kept."""
    body = client.get(f"/positions/{device.tag}/calibrate/").content.decode()
    assert 'name="ev-technician"' not in body and 'name="ev-contractor"' in body
    response = client.post(f"/positions/{device.tag}/calibrate/", entry_data(standard, **{"ev-condition_received": " "}))
    assert response.status_code == 400
    assert "Describe the meter's condition as received" in html.unescape(response.content.decode())
    assert counts() == (0, 0)
    data = entry_data(standard, **{"ev-technician": "Somebody Else", "ev-deviations": "Four points only: 100 % "
                                   "not reachable in service"})
    assert client.post(f"/positions/{device.tag}/calibrate/", data).status_code == 302
    event = CalibrationEvent.objects.get()
    assert event.performed_by == admin_user and event.technician == "Administrator Tester" and not event.contractor
    assert event.deviations.startswith("Four points only")
    body = html.unescape(client.get(event.get_absolute_url()).content.decode())
    assert "Installed, in service, no visible damage" in body and "Four points only" in body
