"""Entering a maintenance record on an 820×1180 tablet in a real browser (Playwright on Debian's Chromium, as
tests/test_browser.py): refused with nothing saved, corrected with a photo, signed, and the task's next due date
on the meter page follows from what was found. Screenshots go to test-artifacts/browser/maintenance/."""
import datetime as dt
import io
import re

import pytest
from django.utils import timezone
from PIL import Image
from playwright.sync_api import expect

from maintenance.models import MaintenancePhoto, MaintenanceRecord, MaintenanceTask
from plant.models import Area, Fluid, Device, Site
from plant.installations import commission
from tests.helpers import user_with_role
from tests.helpers import ARTIFACTS, TABLET, TIMEOUT_MS, assert_no_sideways_scroll, assert_touch_size

pytestmark = pytest.mark.django_db(transaction=True)
SHOTS = ARTIFACTS / "maintenance"


@pytest.fixture
def pitot_plant(tmp_path, settings):
    settings.MEDIA_ROOT = tmp_path / "media"
    site = Site.objects.create(name="Tablet site")
    area = Area.objects.create(site=site, name="Cooling towers")
    cooling = Fluid.objects.create(name="Cooling tower water", phase="liquid", conductivity_us_cm=1800,
                                   biofouling=True, scaling=True)
    device = commission(tag="FT-TAB-1", principle="averaging_pitot", area=area, fluid=cooling,
                                 line_size="DN200", internal_diameter_mm=202.7, range_max=400, mpe_value=2.0,
                                 mpe_basis="pct_span", wetted_material="316")
    tech = user_with_role("technician", "padtech")
    tech.set_password("pad-pass-1")
    tech.save()
    return {"device": device, "tech": tech}


def photo_file(path):
    Image.new("RGB", (640, 480), (40, 90, 70)).save(path, "JPEG")
    return path


def test_tablet_maintenance_record(pitot_plant, live_server, browser, tmp_path):  # noqa: F811
    SHOTS.mkdir(parents=True, exist_ok=True)
    for old in SHOTS.glob("*.png"):
        old.unlink()
    device = pitot_plant["device"]
    context = browser.new_context(viewport=TABLET, device_scale_factor=1, has_touch=True, locale="en-GB")
    context.set_default_timeout(TIMEOUT_MS)
    page = context.new_page()
    step = {"n": 0}

    def shot(name):
        step["n"] += 1
        scrolled = page.evaluate("[window.scrollX, window.scrollY]")  # see tests/test_browser.py: re-aim clicks
        page.screenshot(path=str(SHOTS / f"{step['n']:02d}-{name}.png"), full_page=True)
        page.evaluate("([x, y]) => { window.scrollTo(x, y + 1); window.scrollTo(x, y); }", scrolled)

    try:
        page.goto(f"{live_server.url}/accounts/login/")
        page.locator('[name="username"]').fill("padtech")
        page.locator('[name="password"]').fill("pad-pass-1")
        page.get_by_role("button", name="Log in").click()
        page.wait_for_url(re.compile(r"/positions/$"))
        page.goto(f"{live_server.url}/positions/{device.tag}/")
        new = page.get_by_role("link", name="New maintenance record")
        assert_touch_size(new, "New maintenance record link")
        assert_no_sideways_scroll(page, "meter page")
        shot("device")
        new.click()
        page.wait_for_url(re.compile(rf"/positions/{device.tag}/maintain/$"))
        caution = page.get_by_role("note")
        expect(caution).to_contain_text("permit to work")
        expect(caution).to_contain_text("depressurise and drain")
        assert page.get_by_label("Date of the work").input_value() == timezone.localdate().isoformat()
        assert page.get_by_label("Technician").input_value() == "Technician Tester"
        assert_no_sideways_scroll(page, "maintenance form")
        for name in ("Blocked", "Clean", "Heavy deposit"):
            assert_touch_size(page.locator("label.choice", has_text=re.compile(f"^ *{name} *$")), f"{name} choice")
        assert_touch_size(page.get_by_role("button", name="Save maintenance record"), "Save button")
        assert page.get_by_label("Time spent (minutes)").get_attribute("inputmode") == "numeric"
        shot("form-empty")

        # Nothing chosen, a bad time: refused at the fields, nothing saved.
        page.get_by_label("Time spent (minutes)").fill("0")
        with page.expect_response(lambda r: r.request.method == "POST") as posted:
            page.get_by_role("button", name="Save maintenance record").click()
        assert posted.value.status == 400
        page.wait_for_load_state()
        expect(page.locator("#not-saved")).to_be_visible()
        expect(page.locator("#condition-choices .errorlist")).to_have_text("Choose what you found.")
        expect(page.locator("#task-choices .errorlist")).to_have_text("Choose the task you did.")
        expect(page.locator(".field:has([name=minutes_spent]) .errorlist")).to_have_text(
            "Enter the time spent in minutes (at least 1).")
        assert MaintenanceRecord.objects.count() == 0
        shot("form-refused")

        # Corrected: the pull-and-clean, found blocked, with a photo.
        page.locator("label.choice", has_text="Remove and clean the pitot").click()
        page.locator("label.choice", has_text=re.compile("^ *Blocked *$")).click()
        page.get_by_label("Action taken").fill("Pulled the probe, rodded all ports clear, refitted and leak-tested.")
        page.get_by_label("Time spent (minutes)").fill("75")
        page.get_by_label("Photos (optional)").set_input_files(str(photo_file(tmp_path / "ports.jpg")))
        shot("form-filled")
        page.get_by_role("button", name="Save maintenance record").click()
        page.wait_for_url(re.compile(r"/maintenance/\d+/$"))
        record = MaintenanceRecord.objects.get()
        assert record.condition == "blocked" and record.minutes_spent == 75 and record.created_by == pitot_plant["tech"]
        assert MaintenancePhoto.objects.filter(record=record).count() == 1
        expect(page.locator("#record-condition")).to_have_text("Blocked")
        image = page.locator(".photos img")
        expect(image).to_be_visible()
        # The photo is lazy-loaded: bring it into view and wait until the browser has decoded it
        # (visible is not loaded; asserting at once raced the image request).
        image.scroll_into_view_if_needed()
        page.wait_for_function("img => img.complete && img.naturalWidth > 0", arg=image.element_handle())
        assert page.evaluate("img => img.naturalWidth", image.element_handle()) == 640  # served to the logged-in user
        sign = page.get_by_role("button", name=re.compile("Sign and lock"))
        assert_touch_size(sign, "Sign button")
        shot("record")
        sign.click()
        expect(page.get_by_role("heading", level=1)).to_contain_text("Signed")
        assert MaintenanceRecord.objects.get().is_signed
        shot("signed")

        # The meter page: the task is due 23 d after today (45 d × 0.5, found blocked), and says why.
        page.get_by_role("link", name=device.tag, exact=True).first.click()
        page.wait_for_url(re.compile(rf"/positions/{device.tag}/$"))
        task = MaintenanceTask.objects.get(device=device, code="PITOT_PULL_CLEAN")
        due = timezone.localdate() + dt.timedelta(days=23)
        row = page.locator(f"#task-{task.pk}")
        expect(row.locator(".due-date")).to_have_text(due.isoformat())
        expect(row).to_contain_text("found blocked: 45 d × 0.5 → 23 d.")
        row.scroll_into_view_if_needed()
        assert_no_sideways_scroll(page, "meter page after")
        shot("meter-after")
    finally:
        context.close()
