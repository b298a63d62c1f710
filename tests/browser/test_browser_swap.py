"""Swapping a device on the tablet in a real browser: the spare goes in, the old device goes to stores.

Same set-up as tests/test_browser.py (Debian's Chromium through Playwright, an 820×1180 tablet held upright).
"""
import datetime as dt

import pytest
from django.contrib.auth.models import User
from django.core.management import call_command
from playwright.sync_api import expect

from plant.models import Installation, Device, Position
from tests.helpers import TABLET, TIMEOUT_MS, assert_no_sideways_scroll, assert_touch_size, user_with_role

pytestmark = pytest.mark.django_db(transaction=True)
PASSWORD = "swap-on-the-tablet-7"


@pytest.fixture
def demo(demo_maintenance):
    call_command("recompute_due_dates", verbosity=0)
    user = user_with_role("technician", "swaptech")
    user.set_password(PASSWORD)
    user.save()
    return user


def test_swap_on_the_tablet(demo, live_server, browser, shots):
    context = browser.new_context(viewport=TABLET, device_scale_factor=1, has_touch=True, locale="en-GB")
    context.set_default_timeout(TIMEOUT_MS)
    page = context.new_page()
    old = Position.objects.get(tag="FT-204").installed_device()
    spare = Device.objects.get(serial="SN730118")
    try:
        page.goto(f"{live_server.url}/accounts/login/")
        page.get_by_label("Username").fill("swaptech")
        page.get_by_label("Password").fill(PASSWORD)
        page.get_by_role("button", name="Log in").click()
        page.goto(f"{live_server.url}/positions/FT-204/")
        swap = page.get_by_role("link", name="Swap device")
        assert_touch_size(swap, "Swap device button")
        swap.click()
        expect(page.get_by_role("heading", level=1)).to_contain_text("Swap the device at FT-204")
        expect(page.get_by_role("note")).to_contain_text("isolate, depressurise and drain")
        # the spares list says which may go in and why not
        expect(page.locator("#spares")).to_contain_text("SN730342 has no signed calibration")
        assert_no_sideways_scroll(page, "swap page")
        page.screenshot(path=str(shots / "swap-form.png"), full_page=True)
        # nothing chosen: refused at the field, nothing saved
        page.get_by_role("button", name="Swap").click()
        expect(page.locator("#field-device .errorlist")).to_contain_text("Choose the device to install.")
        expect(page.locator("#field-reason .errorlist")).to_contain_text("Say why the installed device is removed.")
        assert Installation.objects.filter(position__tag="FT-204").count() == 1
        page.get_by_label("Device to install").select_option(str(spare.pk))
        page.get_by_label("Date of the swap").fill(dt.date.today().isoformat())
        page.get_by_label("Why the installed device comes out").fill("electrode coating, reads low")
        page.get_by_role("button", name="Swap").click()
        expect(page.locator("#installed-device")).to_contain_text("S/N SN730118")
        expect(page.locator("#position-moves")).to_contain_text("electrode coating, reads low")
        page.screenshot(path=str(shots / "swap-done.png"), full_page=True)
    finally:
        context.close()
    old.refresh_from_db()
    spare.refresh_from_db()
    assert spare.position.tag == "FT-204" and old.position is None and old.status == Device.Status.SPARE
    assert User.objects.get(username="swaptech") == Installation.objects.get(device=spare).installed_by
