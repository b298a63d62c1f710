"""Reading in a reference standard's DCC in a real browser on the tablet (820 px): from the review page to the
standard, upload, what was read, confirm; every control at least 44 px high and no sideways scrolling."""
import datetime as dt

import pytest
from playwright.sync_api import expect

from calibration import dcc_schema
from calibration.models import ReferenceStandard, StandardDcc
from tests.helpers import TABLET, TIMEOUT_MS, assert_no_sideways_scroll, assert_touch_size, needs_schema, user_with_role

pytestmark = [pytest.mark.django_db(transaction=True), needs_schema]


def controls_are_touch_sized(page, where):
    for locator in page.locator("main a.button, main button, main input, main select").all():
        if locator.is_visible():
            assert_touch_size(locator, f"{where}: {locator.evaluate('e => e.outerHTML.slice(0, 60)')}")


def test_reviewer_reads_in_a_standards_dcc_on_the_tablet(live_server, browser, shots):  # noqa: F811
    user = user_with_role("reviewer", "dcc-reviewer")
    standard = ReferenceStandard.objects.create(
        identification="RS-B1", description="Browser bench master", range_min=0, range_max=50,
        certificate_number="B-OLD-1", due_date=dt.date(2027, 3, 1), expanded_uncertainty=0.15)
    context = browser.new_context(viewport=TABLET, device_scale_factor=1, has_touch=True, locale="en-GB")
    context.set_default_timeout(TIMEOUT_MS)
    page = context.new_page()
    try:
        page.goto(f"{live_server.url}/accounts/login/")
        page.get_by_label("Username").fill(user.username)
        page.get_by_label("Password").fill("pw")
        page.get_by_role("button", name="Log in").click()
        page.goto(f"{live_server.url}/review/")
        page.get_by_role("link", name="Reference standards and their DCCs").click()
        expect(page.locator("#standards")).to_contain_text("RS-B1")
        assert_no_sideways_scroll(page, "standards list")
        page.get_by_role("link", name="RS-B1").click()
        controls_are_touch_sized(page, "standard page")
        page.get_by_role("link", name="Read its DCC").click()
        page.locator("input[type=file]").set_input_files(str(dcc_schema.schema_dir() / "example-temperature-signed.xml"))
        controls_are_touch_sized(page, "upload page")
        page.get_by_role("button", name="Read the file").click()
        expect(page.locator("#no-flow")).to_contain_text("holds no flow results")
        expect(page.locator("#signature")).to_contain_text("XML signature holds")
        expect(page.locator("#read-issuer")).to_have_text("Kalibrierfirma GmbH")
        assert page.locator("input[name=calibrated_on]").input_value() == "1957-08-13"
        page.screenshot(path=str(shots / "dcc-read.png"), full_page=True)
        assert_no_sideways_scroll(page, "DCC page")
        controls_are_touch_sized(page, "DCC page")
        page.get_by_role("button", name="Confirm and update RS-B1").click()
        expect(page.locator("#certificate-number")).to_have_text("GP_DCC_temperature_typical_1.2")
        expect(page.locator("#history")).to_contain_text("B-OLD-1")
        assert_no_sideways_scroll(page, "standard page after confirming")
        page.screenshot(path=str(shots / "dcc-confirmed.png"), full_page=True)
    finally:
        context.close()
    standard.refresh_from_db()
    assert standard.issuer == "Kalibrierfirma GmbH" and StandardDcc.objects.get().confirmed
