"""Maintenance records and tasks in the database: signed records locked on every path, photo checks, the tablet
form, reviewer task changes with reasons, tasks following the duty, and the loop closing on the stored due dates."""
import datetime as dt
import io

import pytest
from django.contrib.admin.sites import site as admin_site
from django.core.files.uploadedfile import SimpleUploadedFile
from django.test import Client, RequestFactory
from django.utils import timezone
from PIL import Image

from calibration.models import SignedRecordError
from maintenance.models import MaintenancePhoto, MaintenanceRecord, MaintenanceTask
from plant.models import Fluid, Device
from plant.installations import commission
from tests.helpers import post_data, task_of, user_with_role

pytestmark = [pytest.mark.django_db, pytest.mark.small_world("maintenance")]


def png_bytes(size=(8, 8), kind="PNG"):
    buffer = io.BytesIO()
    Image.new("RGB", size, (10, 120, 100)).save(buffer, kind)
    return buffer.getvalue()


def signed_record(device, code, condition, day, tech):
    record = MaintenanceRecord.objects.create(device=device, task=task_of(device, code), performed_on=day,
                                              technician="T", condition=condition, action="done", minutes_spent=30,
                                              created_by=tech)
    return record.sign(by="T")


# Tasks follow the duty ----------------------------------------------------------------------------------
def test_tasks_derived_when_the_meter_is_registered(plant):
    tasks = {t.code: t for t in plant["device"].maintenance_tasks.all()}
    assert set(tasks) == {"VISUAL_INSPECTION", "DP_ZERO_CHECK", "PITOT_PULL_CLEAN"}
    # common practice: 90 d × high (0.5) = 45 d, due now (never done)
    assert tasks["PITOT_PULL_CLEAN"].start_days == 45
    assert tasks["PITOT_PULL_CLEAN"].next_due_date == timezone.localdate()
    assert "Called for by the duty" in tasks["PITOT_PULL_CLEAN"].history.first().history_change_reason


def test_duty_change_retires_with_reason_and_a_fluid_change_updates_frequency(plant):
    device = plant["device"]
    clean = Fluid.objects.create(name="Clean water", phase="liquid", conductivity_us_cm=400)
    position = device.position  # the duty is the position's; the device installed there follows it
    position.fluid = clean
    position.save()
    task = task_of(device, "PITOT_PULL_CLEAN")
    assert not task.active and task.change_reason.startswith("No longer called for")
    position.fluid = plant["fluid"]
    position.save()
    assert task_of(device, "PITOT_PULL_CLEAN").active
    fluid = plant["fluid"]
    fluid.biofouling, fluid.scaling = False, False
    fluid.save()
    assert not task_of(device, "PITOT_PULL_CLEAN").active


# Signed records are locked on every path --------------------------------------------------------------
def test_signed_record_refuses_save_delete_update_and_queryset_delete(plant):
    record = signed_record(plant["device"], "PITOT_PULL_CLEAN", "blocked", timezone.localdate(), plant["tech"])
    record.notes = "changed"
    with pytest.raises(SignedRecordError):
        record.save()
    with pytest.raises(SignedRecordError):
        record.delete()
    with pytest.raises(SignedRecordError):
        MaintenanceRecord.objects.filter(pk=record.pk).update(notes="x")
    with pytest.raises(SignedRecordError):
        MaintenanceRecord.objects.all().delete()
    with pytest.raises(SignedRecordError):
        record.sign(by="Someone else")
    stored = MaintenanceRecord.objects.get(pk=record.pk)
    assert stored.notes == "" and stored.signed_by == "T" and stored.is_signed
    # in the audit trail: created, then signed
    assert [h.state for h in stored.history.order_by("history_id")] == ["draft", "signed"]


def test_photos_of_a_signed_record_are_locked(plant):
    record = MaintenanceRecord.objects.create(device=plant["device"], task=task_of(plant["device"], "PITOT_PULL_CLEAN"),
                                              performed_on=timezone.localdate(), technician="T", condition="clean",
                                              action="a", minutes_spent=5)
    photo = MaintenancePhoto(record=record, content_type="image/png")
    photo.image.save("p", SimpleUploadedFile("p.png", png_bytes()), save=False)
    photo.save()
    record.sign(by="T")
    with pytest.raises(SignedRecordError):
        photo.save()
    with pytest.raises(SignedRecordError):
        photo.delete()
    with pytest.raises(SignedRecordError):
        MaintenancePhoto.objects.filter(pk=photo.pk).delete()
    with pytest.raises(SignedRecordError):
        MaintenancePhoto.objects.all().update(content_type="image/jpeg")
    assert MaintenancePhoto.objects.filter(pk=photo.pk, content_type="image/png").exists()


def test_admin_offers_no_change_or_delete_of_signed_records(plant, admin_user):
    record = signed_record(plant["device"], "PITOT_PULL_CLEAN", "clean", timezone.localdate(), plant["tech"])
    request = RequestFactory().get("/")
    request.user = admin_user
    model_admin = admin_site._registry[MaintenanceRecord]
    assert not model_admin.has_change_permission(request, record)
    assert not model_admin.has_delete_permission(request, record)
    assert model_admin.actions is None


def test_signing_sets_the_task_due_date_from_what_was_found(plant):
    device = plant["device"]
    day = timezone.localdate() - dt.timedelta(days=10)
    signed_record(device, "PITOT_PULL_CLEAN", "blocked", day, plant["tech"])
    task = task_of(device, "PITOT_PULL_CLEAN")
    # 45 d × 0.5 = 22.5 -> 23 d after the visit
    assert task.frequency_days == 23 and task.last_done == day and task.last_condition == "blocked"
    assert task.next_due_date == day + dt.timedelta(days=23)


def test_fouled_three_of_four_gives_a_finding_that_shortens_calibration(plant):
    device = plant["device"]
    device.findings()  # no evidence yet
    assert device.evidence_findings() == []
    today = timezone.localdate()
    for weeks, condition in ((40, "heavy_deposit"), (30, "clean"), (20, "blocked"), (10, "heavy_deposit")):
        signed_record(device, "PITOT_PULL_CLEAN", condition, today - dt.timedelta(weeks=weeks), plant["tech"])
    device = Device.objects.get(pk=device.pk)
    codes = [f.code for f in device.findings()]
    assert "MAINT_FOULED" in codes
    # the duty's worst (pitot ports, high 0.5) and the fouling finding (high 0.5): risk factor 0.5 either way;
    # the stored severity includes it
    assert device.risk_severity == "high"
    assert device.risk_factor() == 0.5


def test_fouling_finding_lowers_the_factor_of_a_clean_duty(plant, client):
    water = Fluid.objects.create(name="Plain water", phase="liquid", conductivity_us_cm=400)
    device = commission(tag="FT-EM1", principle="electromagnetic", area=plant["area"], fluid=water,
                                 line_size="DN50", internal_diameter_mm=52.5, range_max=40, mpe_value=0.5)
    assert device.risk_factor() == 1.0 and device.effective_interval_days() == 365
    today = timezone.localdate()
    for weeks in (40, 30, 20):
        signed_record(device, "VISUAL_INSPECTION", "heavy_deposit", today - dt.timedelta(weeks=weeks), plant["tech"])
    assert Device.objects.get(pk=device.pk).risk_factor() == 1.0  # three inspections only: not yet 3 of 4
    signed_record(device, "VISUAL_INSPECTION", "clean", today, plant["tech"])
    device = Device.objects.get(pk=device.pk)
    # 3 of the last 4: high, 0.5 -> effective calibration interval 365 × 0.5 = 182.5 -> 183 (the one rounding
    # rule for intervals: halves upward, calibration.intervals.whole_days)
    assert device.risk_factor() == 0.5 and device.effective_interval_days() == 183
    assert device.risk_severity == "high"
    # the review's risk list names it, its reason read for the page's meters in one query
    exported = client.get("/review/", {"export": "risk"}).content.decode()
    assert "FT-EM1" in exported and "MAINT_FOULED" in exported and "3 of the last 4 inspections" in exported


# The tablet form ------------------------------------------------------------------------------------
@pytest.fixture
def tech_client(plant):
    c = Client()
    c.force_login(plant["tech"])
    return c


def test_form_saves_a_draft_with_photo_and_the_logged_in_technician(plant, tech_client):
    task = task_of(plant["device"], "PITOT_PULL_CLEAN")
    page = tech_client.get("/positions/FT-P1/maintain/")
    body = page.content.decode()
    assert page.status_code == 200 and "permit to work" in body and "depressurise and drain" in body
    photo = SimpleUploadedFile("ports.jpg", png_bytes(kind="JPEG"), content_type="image/jpeg")
    response = tech_client.post("/positions/FT-P1/maintain/", {**post_data(task), "photos": [photo]})
    assert response.status_code == 302
    record = MaintenanceRecord.objects.get()
    assert record.technician == "Technician Tester" and record.created_by == plant["tech"]
    assert record.condition == "blocked" and record.minutes_spent == 50 and not record.is_signed
    stored = record.photos.get()
    assert stored.content_type == "image/jpeg" and stored.image.name.startswith("maintenance/")
    assert stored.image.name.endswith(".jpg") and "ports" not in stored.image.name
    # served to logged-in users only
    assert tech_client.get(stored.get_absolute_url()).status_code == 200
    assert Client().get(stored.get_absolute_url()).status_code == 302  # to the login page
    # sign from the record page
    assert tech_client.post(f"/maintenance/{record.pk}/sign/").status_code == 302
    assert MaintenanceRecord.objects.get().is_signed


@pytest.mark.parametrize("upload, message", [
    (SimpleUploadedFile("notes.txt", b"just some text", content_type="image/png"), "is not a readable image"),
    (SimpleUploadedFile("fake.jpg", b"\xff\xd8\xff\xe0" + b"0" * 200, content_type="image/jpeg"),
     "is not a readable image"),
    (SimpleUploadedFile("anim.gif", b"", content_type="image/gif"), "is empty"),
])
def test_photo_refusals_by_content(plant, tech_client, upload, message):
    task = task_of(plant["device"], "PITOT_PULL_CLEAN")
    response = tech_client.post("/positions/FT-P1/maintain/", {**post_data(task), "photos": [upload]})
    assert response.status_code == 400 and message in response.content.decode()
    assert MaintenanceRecord.objects.count() == 0 and MaintenancePhoto.objects.count() == 0


def test_photo_of_a_wrong_image_type_and_too_large_are_refused(plant, tech_client, settings):
    task = task_of(plant["device"], "PITOT_PULL_CLEAN")
    gif = SimpleUploadedFile("anim.gif", png_bytes(kind="GIF"), content_type="image/gif")
    response = tech_client.post("/positions/FT-P1/maintain/", {**post_data(task), "photos": [gif]})
    assert response.status_code == 400 and "anim.gif is a GIF image; attach a JPEG, PNG or WebP photo." in \
        response.content.decode()
    settings.MAINTENANCE_PHOTO_MAX_BYTES = 1024 * 1024
    big = SimpleUploadedFile("big.png", b"\x89PNG" + b"0" * (1024 * 1024 + 10), content_type="image/png")
    response = tech_client.post("/positions/FT-P1/maintain/", {**post_data(task), "photos": [big]})
    assert response.status_code == 400 and "big.png is 1.0 MB; a photo may be at most 1 MB." in \
        response.content.decode()
    assert MaintenanceRecord.objects.count() == 0 and MaintenancePhoto.objects.count() == 0


@pytest.mark.parametrize("field, value, message", [
    ("minutes_spent", "0", "Enter the time spent in minutes (at least 1)."),
    ("minutes_spent", "ten", "Enter the time spent as whole minutes."),
    ("condition", "sparkly", "Select a valid choice."),
    ("condition", "", "Choose what you found."),
    ("action", "", "Say what you did."),
    ("performed_on", "2999-01-01", "The date of the work is in the future."),
    ("task", "", "Choose the task you did."),
])
def test_bad_field_refused_at_the_field_nothing_saved(plant, tech_client, field, value, message):
    task = task_of(plant["device"], "PITOT_PULL_CLEAN")
    response = tech_client.post("/positions/FT-P1/maintain/", post_data(task, **{field: value}))
    assert response.status_code == 400
    form = response.context["form"]
    assert message in " ".join(form.errors.get(field, [])), form.errors
    assert MaintenanceRecord.objects.count() == 0


def test_task_of_another_meter_or_retired_is_refused(plant, tech_client):
    other = commission(tag="FT-P2", principle="pitot", area=plant["area"], fluid=plant["fluid"],
                                 line_size="DN100", internal_diameter_mm=102, range_max=100, mpe_value=2)
    foreign = task_of(other, "PITOT_PULL_CLEAN")
    response = tech_client.post("/positions/FT-P1/maintain/", post_data(foreign))
    assert response.status_code == 400 and response.context["form"].errors["task"] == [
        "Choose one of this meter's tasks."]
    retired = task_of(plant["device"], "DP_ZERO_CHECK")
    retired.active = False
    retired.save()
    response = tech_client.post("/positions/FT-P1/maintain/", post_data(retired))
    assert response.status_code == 400 and response.context["form"].errors["task"] == [
        "Choose one of this meter's tasks."]
    assert MaintenanceRecord.objects.count() == 0


def test_only_the_author_signs_and_a_reviewer_cannot_enter(plant):
    record = MaintenanceRecord.objects.create(device=plant["device"], task=task_of(plant["device"], "VISUAL_INSPECTION"),
                                              performed_on=timezone.localdate(), technician="T", condition="clean",
                                              action="a", minutes_spent=5, created_by=plant["tech"])
    other = Client()
    other.force_login(user_with_role("technician", "tech2"))
    assert other.post(f"/maintenance/{record.pk}/sign/").status_code == 403
    reviewer = Client()
    reviewer.force_login(user_with_role("reviewer", "rev1"))
    assert reviewer.get("/positions/FT-P1/maintain/").status_code == 403
    assert not MaintenanceRecord.objects.get().is_signed


# Reviewer changes, with reasons ----------------------------------------------------------------------
def test_reviewer_adds_changes_and_retires_with_reason_kept(plant):
    reviewer = Client()
    reviewer.force_login(user_with_role("reviewer", "rev1"))
    device = plant["device"]
    refused = reviewer.post("/positions/FT-P1/tasks/add/", {"title": "Check the purge supply", "reason": "r",
                                                         "base_days": "30", "change_reason": ""})
    assert refused.status_code == 400 and "Say why" in refused.content.decode()
    assert reviewer.post("/positions/FT-P1/tasks/add/", {"title": "Check the purge supply", "reason": "Purge air",
                                                      "base_days": "30", "change_reason": "Purge fitted 2026"}
                         ).status_code == 302
    added = MaintenanceTask.objects.get(device=device, code="CUSTOM")
    assert added.origin == "reviewer" and added.start_days == 30 and added.history.first().history_change_reason \
        == "Purge fitted 2026"
    task = task_of(device, "PITOT_PULL_CLEAN")
    response = reviewer.post(f"/maintenance/tasks/{task.pk}/edit/", {
        "title": task.title, "reason": task.reason, "base_days": "0", "active": "on", "change_reason": "x"})
    assert response.status_code == 400 and "The frequency must be at least one day." in response.content.decode()
    assert reviewer.post(f"/maintenance/tasks/{task.pk}/edit/", {
        "title": task.title, "reason": task.reason, "base_days": "60", "change_reason": "Purge keeps ports open"}
    ).status_code == 302
    task.refresh_from_db()
    assert not task.active and task.origin == "reviewer" and task.change_reason == "Purge keeps ports open"
    # the duty no longer touches a reviewer's task
    device.save()
    assert not task_of(device, "PITOT_PULL_CLEAN").active
    technician = Client()
    technician.force_login(plant["tech"])
    assert technician.get(f"/maintenance/tasks/{task.pk}/edit/").status_code == 403


def test_meter_page_shows_each_task_due_date_and_why(plant, client):
    device = plant["device"]
    day = timezone.localdate() - dt.timedelta(days=5)
    signed_record(device, "PITOT_PULL_CLEAN", "blocked", day, plant["tech"])
    from django.utils.html import strip_tags

    body = strip_tags(client.get("/positions/FT-P1/").content.decode())
    due = (day + dt.timedelta(days=23)).isoformat()
    assert f"found blocked: 45 d × 0.5 → 23 d." in body
    assert f"Last done {day.isoformat()} + 23 d = due {due}." in body
    assert "Remove and clean the pitot or averaging pitot" in body


def test_meter_page_shows_an_as_found_failure_beside_the_blockage_found_before_it(plant, client):
    """Issue 12 item 3: an as-found failure within 30 days after a heavy-deposit/blocked inspection is shown
    beside it. Hand-worked: blocked on day D, calibration found out of tolerance on D + 17 -> "17 d after"."""
    from calibration.models import CalibrationEvent, CalibrationPoint, ReferenceStandard

    device = plant["device"]
    blocked_on = timezone.localdate() - dt.timedelta(days=60)
    signed_record(device, "PITOT_PULL_CLEAN", "blocked", blocked_on, plant["tech"])
    standard = ReferenceStandard.objects.create(identification="RS-M1", description="Master meter", range_min=0,
                                                range_max=500, certificate_number="C-M1",
                                                due_date=timezone.localdate() + dt.timedelta(days=200),
                                                expanded_uncertainty=0.2, uncertainty_basis="pct_reading")
    failed_on = blocked_on + dt.timedelta(days=17)
    event = CalibrationEvent.objects.create(device=device, performed_on=failed_on, technician="T",
                                            procedure="Comparison against the master meter")
    event.reference_standards.add(standard)
    # MPE 2 % of span (400): 8 units; indicated 220 at a reference of 200 is 5 % of span out
    CalibrationPoint.objects.create(event=event, kind="as_found", nominal_pct=50, reference_value=200,
                                    indicated_value=220)
    event.sign(by="T", role="Technician")
    assert CalibrationEvent.objects.get(pk=event.pk).as_found_in_tolerance is False
    body = client.get("/positions/FT-P1/").content.decode()
    assert (f"Calibration {failed_on.isoformat()} found out of tolerance 17 d after heavy deposit or blockage was "
            f"found on {blocked_on.isoformat()}.") in body
