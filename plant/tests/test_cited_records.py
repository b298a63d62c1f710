"""What a signed record points at stays (plant/citations.py, issue 25): the reference standards, devices, positions,
areas, sites, fluids, maintenance tasks, duty periods, installations and users that signed calibrations,
countersignatures and signed maintenance records cite are neither deleted nor re-pointed, on every path (model,
queryset, many-to-many link, form, admin page, admin bulk action, import, restore), each refusal one sentence naming
what cites the object. What nothing signed cites may still be deleted."""
import datetime as dt
import json
import zipfile
from contextlib import contextmanager

import pytest
from django.contrib.auth.models import User
from django.core.management import call_command
from django.db import transaction
from django.db.models import ProtectedError
from django.forms import modelform_factory
from django.forms.models import model_to_dict
from django.test import Client

from calibration.models import (CalibrationEvent, CalibrationPoint, Countersignature, ReferenceStandard,
                                SignedRecordError, StandardLink)
from maintenance.models import MaintenancePhoto, MaintenanceRecord, MaintenanceTask
from plant import backups, citations, importer, installations
from plant.citations import CitedRecordError
from plant.installations import commission
from plant.models import Area, DutyPeriod, Fluid, Installation, Device, Position, Site
from tests.helpers import user_with_role

pytestmark = pytest.mark.django_db

SINCE = dt.date(2025, 1, 6)  # when the cited device was installed
WORKED_ON = dt.date(2025, 6, 3)  # the date of its signed calibration and its signed maintenance record


def signed_calibration(device, standard, user, day):
    event = CalibrationEvent.objects.create(device=device, performed_on=day, technician="C. Tester", performed_by=user,
                                            created_by=user, procedure="Comparison against a master meter")
    event.reference_standards.add(standard)
    for nominal, reference, indicated in ((25, 10.0, 10.02), (50, 20.0, 20.05)):
        CalibrationPoint.objects.create(event=event, kind="as_found", nominal_pct=nominal, reference_value=reference,
                                        indicated_value=indicated)
    return event.sign(by=user.get_full_name(), role="Technician")


@pytest.fixture
def world(db, tmp_path, settings):
    settings.MEDIA_ROOT = tmp_path / "media"
    site = Site.objects.create(name="Cited site")
    area = Area.objects.create(site=site, name="Hall")
    water = Fluid.objects.create(name="Process water", phase="liquid", conductivity_us_cm=500)
    device = commission(tag="FT-C1", principle="electromagnetic", area=area, fluid=water, line_size="DN50",
                       internal_diameter_mm=52.5, range_max=40, mpe_value=0.5, wetted_material="316L", serial="SN-C1",
                       since=SINCE)
    standard = ReferenceStandard.objects.create(identification="RS-C", description="master meter", range_max=50,
                                                certificate_number="C-1", due_date=dt.date(2099, 1, 1),
                                                expanded_uncertainty=0.1)
    tech = user_with_role("technician", "techc")
    reviewer = user_with_role("reviewer", "reviewc")
    event = signed_calibration(device, standard, tech, WORKED_ON)
    Countersignature.objects.create(event=event, user=reviewer, name="Reviewer Tester", role="Reviewer")
    task = MaintenanceTask.objects.filter(device=device).order_by("code").first()
    record = MaintenanceRecord.objects.create(device=device, task=task, performed_on=WORKED_ON, technician="C. Tester",
                                              condition="clean", action="Inspected", minutes_spent=20, created_by=tech)
    record.sign(by=tech.get_full_name())
    admin = user_with_role("administrator", "adminc")
    client = Client()
    client.force_login(admin)
    return {"site": site, "area": area, "fluid": water, "device": device, "position": device.position,
            "standard": standard, "tech": tech, "reviewer": reviewer, "event": event, "task": task, "record": record,
            "duty": device.duties.get(), "installation": device.installations.get(), "client": client}


# kind: (key in `world`, admin URL part, the refusal sentence)
CITED = {
    "standard": ("standard", "calibration/referencestandard",
                 "Reference standard RS-C is cited by 1 signed calibration; withdraw it from use instead."),
    "device": ("device", "plant/device",
               "Device S/N SN-C1 is cited by 1 signed calibration and 1 signed maintenance record; "
               "take it out of service instead."),
    "position": ("position", "plant/position",
                 "Position FT-C1 is cited by 1 signed calibration; it stays in the register as the place they were "
                 "made."),
    "area": ("area", "plant/area",
             "Area Cited site / Hall is cited by 1 signed calibration at its positions; it stays in the register "
             "with them."),
    "site": ("site", "plant/site",
             "Site Cited site is cited by 1 signed calibration at its positions; it stays in the register with them."),
    "fluid": ("fluid", "plant/fluid",
              "Fluid Process water is cited by 1 signed calibration at positions on it; it stays in the register "
              "with them."),
    "task": ("task", "maintenance/maintenancetask", None),  # its title comes from the task catalogue
    "duty period": ("duty", "plant/dutyperiod",
                    "Duty period S/N SN-C1: Process water at FT-C1 from 2025-01-06 covers the dates of 1 signed "
                    "calibration and 1 signed maintenance record; it stays in the device's duty history."),
    "installation": ("installation", "plant/installation",
                     "Installation S/N SN-C1 at FT-C1 2025-01-06 – now covers the dates of 1 signed calibration and "
                     "1 signed maintenance record; it stays in the device's installation history."),
    "user who performed and signed": (
        "tech", "auth/user",
        "User techc (Technician Tester) performed 1 signed calibration and entered and signed 1 calibration and "
        "1 maintenance record; deactivate the account instead."),
    "user who countersigned": ("reviewer", "auth/user",
                               "User reviewc (Reviewer Tester) countersigned 1 calibration; deactivate the account "
                               "instead."),
}


def sentence(world, kind):
    key, _, expected = CITED[kind]
    if expected is None:
        task = world["task"]
        expected = (f"Maintenance task “{task.title}” of FT-C1 is cited by 1 signed maintenance record; retire it "
                    "instead (untick Active).")
    return expected


STATE_MODELS = (Site, Area, Fluid, Position, Device, DutyPeriod, Installation, ReferenceStandard, StandardLink,
                CalibrationEvent, CalibrationPoint, Countersignature, MaintenanceTask, MaintenanceRecord,
                MaintenancePhoto, User)


def state():
    """Every row of every table a refused change could touch, every column."""
    return {m.__name__: list(m._base_manager.order_by("pk").values()) for m in STATE_MODELS}


@contextmanager
def refused(exception, match=None):
    """The call is refused with `exception` (message containing `match`), in a savepoint of its own: a refusal
    raised inside Django's own atomic block (the many-to-many signals) must not spoil the test's transaction."""
    with pytest.raises(exception) as info:
        with transaction.atomic():
            yield info
    if match is not None:
        assert match in str(info.value), str(info.value)


# Sentences ------------------------------------------------------------------------------------------------------
@pytest.mark.parametrize("kind", list(CITED))
def test_each_cited_object_gets_one_sentence_naming_what_cites_it(world, kind):
    obj = world[CITED[kind][0]]
    assert [str(s) for s in citations.refusals([obj])] == [sentence(world, kind)]
    assert [str(s) for s in citations.refusals(type(obj).objects.filter(pk=obj.pk))] == [sentence(world, kind)]


def test_drafts_cite_nothing(world):
    draft = CalibrationEvent.objects.create(device=world["device"], performed_on=WORKED_ON, technician="T",
                                            procedure="p", created_by=world["tech"])
    spare_standard = ReferenceStandard.objects.create(identification="RS-D", description="d", range_max=50,
                                                      certificate_number="C-D", due_date=dt.date(2099, 1, 1),
                                                      expanded_uncertainty=0.1)
    draft.reference_standards.add(spare_standard)
    assert citations.refusals([spare_standard]) == []


# Model and queryset delete --------------------------------------------------------------------------------------
@pytest.mark.parametrize("kind", [k for k in CITED if not k.startswith("user")])
def test_model_and_queryset_delete_refused_with_the_sentence(world, kind):
    obj = world[CITED[kind][0]]
    before = state()
    with refused(CitedRecordError, sentence(world, kind)):
        obj.delete()
    with refused(CitedRecordError, sentence(world, kind)):
        type(obj).objects.filter(pk=obj.pk).delete()
    with refused(CitedRecordError, sentence(world, kind)):  # with others that nothing cites: none goes
        type(obj).objects.all().delete()
    assert state() == before


@pytest.mark.parametrize("kind", ["user who performed and signed", "user who countersigned"])
def test_users_on_signed_records_cannot_be_deleted(world, kind):
    """We do not own the user model: every link from a signed record to a user is a PROTECT foreign key, so Django
    refuses the delete itself (the admin gives our sentence, below)."""
    user = world[CITED[kind][0]]
    before = state()
    with refused(ProtectedError):
        user.delete()
    with refused(ProtectedError):
        User.objects.filter(pk=user.pk).delete()
    assert state() == before


def test_the_refusal_is_a_protected_error_with_a_readable_message(world):
    with refused(CitedRecordError) as info:
        world["standard"].delete()
    assert isinstance(info.value, ProtectedError)
    assert str(info.value) == sentence(world, "standard")


# What nothing signed cites may still go ---------------------------------------------------------------------------
def idle(kind, world):
    """An object of `kind` that no signed record cites."""
    if kind == "standard":  # used by a draft only: the draft's link goes with it
        standard = ReferenceStandard.objects.create(identification="RS-IDLE", description="d", range_max=50,
                                                    certificate_number="C-I", due_date=dt.date(2099, 1, 1),
                                                    expanded_uncertainty=0.1)
        draft = CalibrationEvent.objects.create(device=world["device"], performed_on=WORKED_ON, technician="T",
                                                procedure="p")
        draft.reference_standards.add(standard)
        return standard
    if kind == "device":
        device = Device.objects.create(principle="electromagnetic", range_max=10, mpe_value=1, serial="SN-IDLE",
                                      status="spare")
        MaintenanceTask.objects.filter(device=device).delete()  # derived for the spare, never done
        return device
    if kind == "position":
        return Position.objects.create(tag="FT-IDLE", area=world["area"], fluid=world["fluid"], line_size="DN50",
                                       internal_diameter_mm=52.5)
    if kind == "area":
        return Area.objects.create(site=world["site"], name="Empty hall")
    if kind == "site":
        return Site.objects.create(name="Empty site")
    if kind == "fluid":
        return Fluid.objects.create(name="Unused fluid", phase="liquid")
    if kind == "task":
        return MaintenanceTask.objects.create(device=world["device"], code="CUSTOM", title="Idle check", reason="r",
                                              base_days=30)
    other = Position.objects.create(tag="FT-OLD", area=world["area"], fluid=world["fluid"], line_size="DN50",
                                    internal_diameter_mm=52.5)
    before_records = (dt.date(2020, 1, 1), dt.date(2020, 6, 1))  # the device's history before anything was signed
    if kind == "duty period":
        return DutyPeriod.objects.create(device=world["device"], position=other, area=world["area"],
                                         fluid=world["fluid"], since=before_records[0], until=before_records[1])
    if kind == "installation":
        return Installation.objects.create(device=world["device"], position=other, since=before_records[0],
                                           until=before_records[1])
    return User.objects.create_user("idle-user")


IDLE_KINDS = ["standard", "device", "position", "area", "site", "fluid", "task", "duty period", "installation",
              "user"]


@pytest.mark.parametrize("kind", IDLE_KINDS)
@pytest.mark.parametrize("path", ["model", "queryset"])
def test_what_nothing_signed_cites_may_be_deleted(world, kind, path):
    obj = idle(kind, world)
    model = type(obj)
    if path == "model":
        obj.delete()
    else:
        model.objects.filter(pk=obj.pk).delete()
    assert not model._base_manager.filter(pk=obj.pk).exists()
    assert citations.refusals([world[CITED["standard"][0]]])  # the cited ones are still cited


# Re-pointing ----------------------------------------------------------------------------------------------------
def other_meter(world):
    return commission(tag="FT-C2", principle="electromagnetic", area=world["area"], fluid=world["fluid"],
                      line_size="DN50", internal_diameter_mm=52.5, range_max=40, mpe_value=0.5,
                      wetted_material="316L", serial="SN-C2")


def repoints(world):
    """(object, field, new value) for each frozen link of a cited object."""
    other = other_meter(world)
    brine = Fluid.objects.create(name="Brine", phase="liquid", conductivity_us_cm=40000, chlorides=True)
    return [
        (world["task"], "device", other),
        (world["duty"], "device", other), (world["duty"], "position", other.position), (world["duty"], "fluid", brine),
        (world["duty"], "area", Area.objects.create(site=world["site"], name="Annex")),
        (world["duty"], "since", WORKED_ON + dt.timedelta(days=1)),
        (world["installation"], "device", other), (world["installation"], "position", other.position),
        (world["installation"], "since", WORKED_ON + dt.timedelta(days=1)),
    ]


def test_frozen_links_cannot_be_re_pointed_by_save_full_clean_or_update(world):
    for obj, name, value in repoints(world):
        before = state()
        fresh = type(obj).objects.get(pk=obj.pk)
        setattr(fresh, name, value)
        label = str(type(obj)._meta.get_field(name).verbose_name)
        with refused(Exception, f"; its {label} cannot be changed.") as info:
            fresh.save()
        assert isinstance(info.value, (CitedRecordError, SignedRecordError)) or hasattr(info.value, "message_dict")
        with pytest.raises(Exception) as cleaned:
            fresh.full_clean()
        assert any(f"its {label} cannot be changed." in m for m in cleaned.value.message_dict[name]), name
        with refused(CitedRecordError, f"; its {label} cannot be changed."):
            type(obj).objects.filter(pk=obj.pk).update(**{name: value})
        assert state() == before, name


def test_closing_a_cited_installation_and_duty_is_how_a_device_moves(world):
    """until is not frozen: removing the device closes its installation and its duty period."""
    installations.remove(world["device"], WORKED_ON + dt.timedelta(days=10), "to the workshop")
    assert Installation.objects.get(pk=world["installation"].pk).until == WORKED_ON + dt.timedelta(days=10)
    assert DutyPeriod.objects.get(pk=world["duty"].pk).until == WORKED_ON + dt.timedelta(days=10)
    assert CalibrationEvent.objects.get(pk=world["event"].pk).position_id == world["position"].pk


def test_an_uncited_task_may_move_to_another_meter(world):
    task = idle("task", world)
    task.device = other_meter(world)
    task.save()
    assert MaintenanceTask.objects.get(pk=task.pk).device_id == task.device_id


# The standards of a signed calibration (many-to-many) -----------------------------------------------------------------
def test_standard_links_of_a_signed_calibration_are_locked_from_both_sides_and_in_the_table(world):
    event, standard = world["event"], world["standard"]
    second = idle("standard", world)
    link = StandardLink.objects.get(calibrationevent=event)
    draft = CalibrationEvent.objects.filter(state="draft").get()
    before = state()
    calls = [
        lambda: event.reference_standards.remove(standard),
        lambda: event.reference_standards.clear(),
        lambda: event.reference_standards.set([second]),
        lambda: event.reference_standards.add(second),
        lambda: standard.events.remove(event),
        lambda: standard.events.clear(),
        lambda: standard.events.set([]),
        lambda: second.events.add(event),
        lambda: StandardLink.objects.filter(calibrationevent=event).delete(),
        lambda: StandardLink.objects.all().delete(),
        lambda: CalibrationEvent.reference_standards.through.objects.filter(pk=link.pk).delete(),
        lambda: StandardLink.objects.filter(pk=link.pk).update(referencestandard=second),
        lambda: StandardLink.objects.filter(calibrationevent=draft).update(calibrationevent=event),
        lambda: link.delete(),
        lambda: StandardLink.objects.create(calibrationevent=event, referencestandard=second),
    ]
    for number, call in enumerate(calls):
        with refused(SignedRecordError, "cannot be changed"):
            call()
        assert state() == before, number
    moved = StandardLink.objects.get(pk=link.pk)
    moved.referencestandard = second
    with refused(SignedRecordError, "cannot be changed"):
        moved.save()
    assert state() == before


def test_a_drafts_standards_may_still_change(world):
    draft = CalibrationEvent.objects.create(device=world["device"], performed_on=WORKED_ON, technician="T",
                                            procedure="p")
    second = idle("standard", world)
    draft.reference_standards.set([world["standard"], second])
    draft.reference_standards.remove(second)
    assert list(draft.reference_standards.all()) == [world["standard"]]
    second.events.clear()
    assert StandardLink.objects.filter(referencestandard=second).count() == 0


def test_a_form_cannot_re_point_a_signed_calibrations_standards(world):
    event = world["event"]
    second = idle("standard", world)
    before = state()
    form = modelform_factory(CalibrationEvent, fields=["reference_standards", "notes"])(
        data={"reference_standards": [second.pk], "notes": "x"}, instance=CalibrationEvent.objects.get(pk=event.pk))
    assert form.is_valid(), form.errors
    with refused(SignedRecordError):
        form.save()
    form = modelform_factory(CalibrationEvent, fields=["reference_standards"])(
        data={"reference_standards": [second.pk]}, instance=CalibrationEvent.objects.get(pk=event.pk))
    assert form.is_valid(), form.errors
    form.save(commit=False)
    with refused(SignedRecordError, f"Calibration {event.pk} is signed; its reference standards cannot be changed."):
        form.save_m2m()
    assert state() == before


# Countersignatures, points and photos cannot be re-pointed either ---------------------------------------------------
def test_countersignatures_cannot_be_re_pointed_or_deleted_in_bulk(world):
    before = state()
    with refused(SignedRecordError, "cannot be changed"):
        Countersignature.objects.update(user=world["tech"])
    with refused(SignedRecordError, "cannot be deleted"):
        Countersignature.objects.all().delete()
    assert state() == before


def test_rows_cannot_be_moved_into_a_signed_record(world):
    draft = CalibrationEvent.objects.create(device=world["device"], performed_on=WORKED_ON, technician="T",
                                            procedure="p")
    CalibrationPoint.objects.create(event=draft, kind="as_found", nominal_pct=50, reference_value=20,
                                    indicated_value=20.1)
    draft_record = MaintenanceRecord.objects.create(device=world["device"], task=world["task"], performed_on=WORKED_ON,
                                                    technician="T", condition="clean", action="a", minutes_spent=5)
    photo = MaintenancePhoto.objects.create(record=draft_record, image="maintenance/x.png", content_type="image/png")
    before = state()
    with refused(SignedRecordError):
        CalibrationPoint.objects.filter(event=draft).update(event=world["event"])
    with refused(SignedRecordError):
        CalibrationPoint.objects.filter(event=draft).update(event_id=world["event"].pk)
    with refused(SignedRecordError):
        MaintenancePhoto.objects.filter(pk=photo.pk).update(record=world["record"])
    assert state() == before
    CalibrationPoint.objects.filter(event=draft).update(indicated_value=20.2)  # a draft's rows may still change


# The admin --------------------------------------------------------------------------------------------------------
def admin_url(world, kind, obj=None):
    key, part, _ = CITED[kind]
    obj = obj if obj is not None else world[key]
    return f"/admin/{part}/", f"/admin/{part}/{obj.pk}/delete/"


@pytest.mark.parametrize("kind", list(CITED))
def test_admin_delete_page_shows_the_sentence_and_deletes_nothing(world, kind):
    client = world["client"]
    _, delete_url = admin_url(world, kind)
    before = state()
    page = client.get(delete_url)
    assert page.status_code == 200
    body = page.content.decode()
    assert "Cannot delete" in body and 'class="errornote"' in body
    assert sentence(world, kind).replace("'", "&#x27;") in body
    assert "Yes, I’m sure" not in body
    confirmed = client.post(delete_url, {"post": "yes"})
    assert confirmed.status_code == 200
    assert sentence(world, kind).replace("'", "&#x27;") in confirmed.content.decode()
    assert state() == before


@pytest.mark.parametrize("kind", [k for k in CITED if k != "task"])  # tasks have no bulk actions
def test_admin_bulk_delete_shows_the_sentence_and_deletes_nothing(world, kind):
    client = world["client"]
    changelist, _ = admin_url(world, kind)
    obj = world[CITED[kind][0]]
    uncited = idle(kind.split()[0] if kind.startswith("user") else kind, world)
    before = state()
    selected = {"action": "delete_selected", "_selected_action": [obj.pk, uncited.pk]}
    page = client.post(changelist, selected)
    assert page.status_code == 200
    body = page.content.decode()
    assert "Cannot delete" in body and sentence(world, kind).replace("'", "&#x27;") in body
    confirmed = client.post(changelist, {**selected, "post": "yes"})
    assert confirmed.status_code == 200 and "Cannot delete" in confirmed.content.decode()
    assert state() == before  # all or nothing: the uncited one selected with it stays too


@pytest.mark.parametrize("kind", IDLE_KINDS)
def test_admin_deletes_what_nothing_signed_cites(world, kind):
    obj = idle(kind, world)
    part = {"user": "auth/user"}.get(kind) or CITED[kind][1]
    response = world["client"].post(f"/admin/{part}/{obj.pk}/delete/", {"post": "yes"})
    assert response.status_code == 302, response.content.decode()[:2000]
    assert not type(obj)._base_manager.filter(pk=obj.pk).exists()


def test_admin_bulk_deletes_what_nothing_signed_cites(world):
    spares = [idle("standard", world), ReferenceStandard.objects.create(
        identification="RS-IDLE-2", description="d", range_max=50, certificate_number="C-I2",
        due_date=dt.date(2099, 1, 1), expanded_uncertainty=0.1)]
    response = world["client"].post("/admin/calibration/referencestandard/", {
        "action": "delete_selected", "_selected_action": [s.pk for s in spares], "post": "yes"})
    assert response.status_code == 302
    assert not ReferenceStandard.objects.filter(pk__in=[s.pk for s in spares]).exists()


def test_admin_offers_withdraw_instead_and_withdraws(world):
    client, standard = world["client"], world["standard"]
    page = client.get(f"/admin/calibration/referencestandard/{standard.pk}/delete/").content.decode()
    assert 'value="withdraw_from_use"' in page and 'value="Withdraw from use"' in page
    assert f'name="_selected_action" value="{standard.pk}"' in page
    before_links = list(StandardLink.objects.values())
    response = client.post("/admin/calibration/referencestandard/",
                           {"action": "withdraw_from_use", "_selected_action": [standard.pk]}, follow=True)
    assert response.status_code == 200
    assert "Withdrew RS-C from use: new calibrations can no longer use them" in response.content.decode()
    standard.refresh_from_db()
    assert standard.withdrawn and list(StandardLink.objects.values()) == before_links
    assert standard.history.first().withdrawn  # the withdrawal is in the audit trail
    changelist = client.get("/admin/calibration/referencestandard/").content.decode()
    assert "Withdraw the selected standards from use" in changelist


def test_admin_offers_deactivate_for_a_user_on_signed_records(world):
    client, tech = world["client"], world["tech"]
    page = client.get(f"/admin/auth/user/{tech.pk}/delete/").content.decode()
    assert 'value="deactivate_accounts"' in page and 'value="Deactivate"' in page
    response = client.post("/admin/auth/user/", {"action": "deactivate_accounts", "_selected_action": [tech.pk]},
                           follow=True)
    assert "Deactivated techc: they can no longer log in" in response.content.decode()
    tech.refresh_from_db()
    assert not tech.is_active and User.objects.filter(pk=tech.pk).exists()
    assert client.get(f"/admin/auth/user/{tech.pk}/change/").status_code == 200  # the accounts admin as before


def admin_form_data(obj, **changes):
    data = {k: ("" if v is None else v) for k, v in model_to_dict(obj).items()}
    data.update(changes)
    return data


def test_admin_change_form_refuses_re_pointing_at_the_field(world):
    client = world["client"]
    other = other_meter(world)
    task = world["task"]
    response = client.post(f"/admin/maintenance/maintenancetask/{task.pk}/change/",
                           admin_form_data(task, device=other.pk))
    assert response.status_code == 200
    assert "its device cannot be changed." in response.content.decode()
    duty = world["duty"]
    brine = Fluid.objects.create(name="Brine", phase="liquid")
    response = client.post(f"/admin/plant/dutyperiod/{duty.pk}/change/", admin_form_data(duty, fluid=brine.pk))
    assert response.status_code == 200 and "its fluid cannot be changed." in response.content.decode()
    assert MaintenanceTask.objects.get(pk=task.pk).device_id == world["device"].pk
    assert DutyPeriod.objects.get(pk=duty.pk).fluid_id == world["fluid"].pk


def test_admin_inline_deletion_of_a_cited_duty_period_is_refused(world):
    device, duty = world["device"], world["duty"]
    data = {f.name: getattr(device, f.attname) for f in Device._meta.concrete_fields if f.editable and f.name != "id"}
    data = {k: ("" if v is None else v) for k, v in data.items()}
    data.update({"duties-TOTAL_FORMS": 1, "duties-INITIAL_FORMS": 1, "duties-0-id": duty.pk,
                 "duties-0-meter": device.pk, "duties-0-position": duty.position_id, "duties-0-area": duty.area_id,
                 "duties-0-fluid": duty.fluid_id, "duties-0-since": duty.since, "duties-0-DELETE": "on"})
    before = state()
    response = world["client"].post(f"/admin/plant/device/{device.pk}/change/", data)
    assert response.status_code == 200
    assert sentence(world, "duty period").replace("'", "&#x27;") in response.content.decode()
    assert state() == before


# Import and restore ---------------------------------------------------------------------------------------------
def test_import_moves_a_cited_position_to_another_fluid_without_re_pointing_its_history(world):
    """The register import deletes nothing; a row may change a position's fluid and area (a register edit): the
    duty period that covers the signed dates is closed, not re-pointed, and the signed records keep their links."""
    brine = Fluid.objects.create(name="Brine", phase="liquid", conductivity_us_cm=40000)
    rows = importer.export_rows("meters").to_dict("records")
    rows[0]["fluid"] = brine.name
    plan = importer.apply_import(importer.plan_import("meters", rows))
    assert plan.applied, plan.errors
    old = DutyPeriod.objects.get(pk=world["duty"].pk)
    assert (old.fluid_id, old.since, old.until is not None) == (world["fluid"].pk, SINCE, True)
    assert world["device"].duties.get(until__isnull=True).fluid_id == brine.pk
    event = CalibrationEvent.objects.get(pk=world["event"].pk)
    assert event.position_id == world["position"].pk and list(event.reference_standards.all()) == [world["standard"]]


def test_loading_a_fixture_sets_a_signed_calibrations_standards_once(demo_history):
    """loaddata saves a signed event as it was, then sets its standards: that first setting is the signed record
    (older backups and the demo fixtures carry the links on the event); after loading they are locked."""
    with open("fixtures/demo_history.json") as f:
        listed = sum(len(row["fields"].get("reference_standards", [])) for row in json.load(f)
                     if row["model"] == "calibration.calibrationevent")
    assert listed and StandardLink.objects.count() == listed
    signed = CalibrationEvent.objects.filter(state="signed").first()
    with refused(SignedRecordError):
        signed.reference_standards.clear()
    assert StandardLink.objects.count() == listed


@pytest.mark.django_db(transaction=True)  # flush truncates tables: not inside the test's own transaction
def test_backup_and_restore_keep_the_links_and_the_locks(world, tmp_path):
    links = list(StandardLink.objects.order_by("pk").values())
    path = tmp_path / "backup.zip"
    call_command("backup", str(path))
    with zipfile.ZipFile(path) as archive:
        rows = json.loads(archive.read(backups.DATA))
    assert any(row["model"] == "calibration.standardlink" for row in rows)
    call_command("flush", interactive=False, verbosity=0)
    call_command("restore", str(path))
    assert list(StandardLink.objects.order_by("pk").values()) == links
    with pytest.raises(CitedRecordError, match="Reference standard RS-C is cited by 1 signed calibration"):
        ReferenceStandard.objects.get(identification="RS-C").delete()
    with pytest.raises(SignedRecordError):
        CalibrationEvent.objects.get(pk=world["event"].pk).reference_standards.clear()
    assert list(StandardLink.objects.order_by("pk").values()) == links
