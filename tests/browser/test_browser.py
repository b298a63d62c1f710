"""The field tablet flow in a real browser: log in, open a meter, enter a calibration, sign it, get the certificate.

Playwright drives Debian's Chromium (/usr/bin/chromium, package `chromium`; .ci/run installs it). No browser is
downloaded. The page is 820×1180 CSS pixels, a 10–11 inch tablet held upright. A screenshot of every step goes to
test-artifacts/browser/ under the project root (ignored by git); the path is printed.
"""
import datetime as dt
import io
import re

import pytest
from django.utils import timezone
from playwright.sync_api import expect

from calibration.models import CalibrationEvent, CalibrationPoint, ReferenceStandard
from plant.models import Area, Fluid, Device, Site
from plant.installations import commission
from tests.helpers import ARTIFACTS, TABLET, TIMEOUT_MS, assert_no_sideways_scroll, assert_touch_size, fill_points, user_with_role

# Smallest touch target we accept, in CSS px (common practice: Apple's HIG asks 44 pt, Material 48 dp).

pytestmark = pytest.mark.django_db(transaction=True)


@pytest.fixture
def small_plant():
    today = timezone.localdate()
    site = Site.objects.create(name="Browser test site")
    area = Area.objects.create(site=site, name="Filling hall")
    water = Fluid.objects.create(name="Process water", phase="liquid", conductivity_us_cm=450)
    device = commission(tag="FT-BRW-1", principle="electromagnetic", area=area, fluid=water,
                                 line_size="DN50", internal_diameter_mm=52.5, range_min=0, range_max=40,
                                 mpe_value=0.5, mpe_basis="pct_reading", wetted_material="316L")
    standard = ReferenceStandard.objects.create(
        identification="RS-BRW", description="Portable master meter", range_min=0, range_max=40,
        certificate_number="C-BRW-1", due_date=today + dt.timedelta(days=365), expanded_uncertainty=0.1,
        uncertainty_basis="pct_reading", phase="liquid", issuer="Invented Flow Laboratory")
    for ident, changes in (("RS-BRW-OLD", {"withdrawn": True}), ("RS-BRW-GAS", {"phase": "gas"}),
                           ("RS-BRW-EXP", {"due_date": today - dt.timedelta(days=1)})):
        ReferenceStandard.objects.create(**{
            "identification": ident, "description": "Not for this meter", "range_min": 0, "range_max": 50,
            "certificate_number": "C-X", "due_date": today + dt.timedelta(days=365), "expanded_uncertainty": 0.1,
            **changes})
    technician = user_with_role("technician", "fieldtech")
    technician.set_password("tablet-pass-1")
    technician.save()
    return {"device": device, "standard": standard, "technician": technician, "password": "tablet-pass-1"}


def counts():
    return CalibrationEvent.objects.count(), CalibrationPoint.objects.count()


def test_tablet_calibration_flow(small_plant, live_server, browser, shots):
    device, standard = small_plant["device"], small_plant["standard"]
    context = browser.new_context(viewport=TABLET, device_scale_factor=1, has_touch=True, locale="en-GB",
                                  accept_downloads=True)
    context.set_default_timeout(TIMEOUT_MS)
    page = context.new_page()
    step = {"n": 0}

    def shot(name):
        step["n"] += 1
        # After a full-page capture this Chromium delivered the next click about one scroll offset away from the
        # button Playwright aimed at (it landed on the form). Scrolling the page (a nudge, then back to where it
        # was) brings clicks back on target.
        scrolled = page.evaluate("[window.scrollX, window.scrollY]")
        page.screenshot(path=str(shots / f"{step['n']:02d}-{name}.png"), full_page=True)
        page.evaluate("([x, y]) => { window.scrollTo(x, y + 1); window.scrollTo(x, y); }", scrolled)

    try:
        # Log in through the real form; the register redirects there first.
        page.goto(f"{live_server.url}/positions/")
        assert "/accounts/login/" in page.url
        assert page.locator("link[rel=stylesheet]").count() == 1
        # the stylesheet is served and applied (tablet sizes come from it)
        assert page.evaluate("getComputedStyle(document.querySelector('button')).minHeight") == "48px"
        shot("login")
        page.get_by_label("Username").fill("fieldtech")
        page.get_by_label("Password").fill("wrong password")
        page.get_by_role("button", name="Log in").click()
        expect(page.get_by_role("alert")).to_contain_text("correct username and password")
        shot("login-refused")
        page.get_by_label("Username").fill("fieldtech")
        page.get_by_label("Password").fill(small_plant["password"])
        assert_touch_size(page.get_by_role("button", name="Log in"), "Log in button")
        page.get_by_role("button", name="Log in").click()
        page.wait_for_url(re.compile(r"/positions/$"))
        assert page.get_by_text("Technician Tester").is_visible()
        assert page.get_by_text("1 meter", exact=True).is_visible()
        # a technician is not offered pages they may not open
        nav = page.get_by_role("navigation")
        assert nav.get_by_role("link").all_inner_texts() == ["Meters", "Spares", "Offline work", "Work list"]
        shot("register")

        # Register -> meter page -> new calibration form.
        meter_link = page.get_by_role("link", name=device.tag, exact=True)
        meter_link.click()
        page.wait_for_url(re.compile(rf"/positions/{device.tag}/$"))
        assert page.title().startswith(device.tag) and "<" not in page.title()
        shot("device")
        new_cal = page.get_by_role("link", name="New calibration")
        assert_touch_size(new_cal, "New calibration link")
        new_cal.click()
        page.wait_for_url(re.compile(rf"/positions/{device.tag}/calibrate/$"))
        assert_no_sideways_scroll(page, "calibration form")
        shot("entry-empty")

        # Tablet layout: decimal keypad on every number field, thumb-sized fields and buttons.
        numbers = page.locator("input[type=number]")
        assert numbers.count() >= 20  # 5 rows × (reference, indicated, resolution) × 2 grids, plus conditions
        for i in range(numbers.count()):
            field = numbers.nth(i)
            assert field.get_attribute("inputmode") == "decimal", field.get_attribute("name")
            assert_touch_size(field, f"input {field.get_attribute('name')}")
        save = page.get_by_role("button", name="Save calibration")
        assert_touch_size(save, "Save calibration button")
        assert_touch_size(page.get_by_label("Date of calibration"), "date field")
        assert_touch_size(page.get_by_label(str(standard)), "reference standard tick box")
        assert_touch_size(page.get_by_label("Adjustment made"), "adjustment tick box")

        # As-found with a reference flow above the meter's range (0–40): refused on the field, nothing saved.
        today = timezone.localdate()
        assert page.get_by_label("Date of calibration").input_value() == today.isoformat()  # today by default
        # the performer is the logged-in technician: no name to type, only a contractor's if one did the work
        assert page.locator('[name="ev-technician"]').count() == 0
        assert page.get_by_label(re.compile("Outside contractor")).input_value() == ""
        # only the standards that suit this meter are offered (withdrawn, gas-phase and expired ones are not)
        offered = page.locator('[name="ev-reference_standards"]')
        assert offered.count() == 1
        page.get_by_label(str(standard)).check()
        page.get_by_label("Method / procedure").fill("Comparison against portable master meter, five points")
        page.get_by_label("Condition of the item as received").fill("Installed, in service, display readable")
        page.get_by_label("Ambient temperature (°C)").fill("18")
        page.get_by_label("Fluid temperature (°C)").fill("12.5")
        page.get_by_label("Line pressure (bar g)").fill("3")
        fill_points(page, "af", [(4, 4.01), (10, 10.02), (55, 55.1), (30, 30.30), (40, 40.04)])
        before = counts()
        with page.expect_response(lambda r: r.request.method == "POST") as posted:
            save.click()
        assert posted.value.status == 400
        page.wait_for_load_state()
        expect(page.locator("#not-saved")).to_be_visible()  # at the top: the marked row may be below the fold
        message = page.locator('tr:has([name="af-2-reference_value"]) .errorlist')
        expect(message).to_be_visible()
        assert page.locator('[name="af-2-reference_value"]').get_attribute("aria-invalid") == "true"
        assert "55 m³/h is outside the meter's calibrated range 0–40 m³/h." in message.inner_text()
        message.scroll_into_view_if_needed()
        shot("entry-refused")
        assert counts() == before == (0, 0)
        # what was typed is kept
        assert page.locator('[name="af-0-indicated_value"]').input_value() == "4.01"
        assert page.get_by_label(str(standard)).is_checked()

        # Correct it, record an adjustment and the as-left points.
        page.locator('[name="af-2-reference_value"]').fill("20")
        page.locator('[name="af-2-indicated_value"]').fill("20.05")
        page.get_by_label("Adjustment made").check()
        fill_points(page, "al", [(4, 4.0), (10, 10.01), (20, 20.02), (30, 29.99), (40, 40.02)])
        # three repeat readings at 20 m³/h as left: the indication used is their mean, 20.02
        page.locator('[name="al-2-indicated_value"]').fill("")
        page.locator('[name="al-2-repeats"]').fill("20.00 20.02 20.04")
        page.get_by_label("Decision rule").select_option("guarded")  # 3 repeats give a TUR below 4:1 (k = 4.3)
        shot("entry-corrected")
        page.get_by_role("button", name="Save calibration").click()
        page.wait_for_url(re.compile(r"/calibrations/\d+/$"))
        event = CalibrationEvent.objects.get()
        assert page.url.endswith(f"/calibrations/{event.pk}/")
        assert event.points.filter(kind="as_found").count() == 5 and event.points.filter(kind="as_left").count() == 5
        assert event.adjusted and event.created_by == small_plant["technician"]
        # 30.30 against 30 is 1 % of reading, twice the MPE: out of tolerance as found, in tolerance as left
        assert page.locator("#as-found-verdict").inner_text() == "out of tolerance"
        assert page.locator("#as-left-verdict").inner_text() == "in tolerance"
        assert page.locator("table.results tr.decision-fail").count() == 1
        # k and TUR per point; the as-left point with three repeats has nu_eff 2, k 4.3, TUR below 4:1
        assert page.locator("table.results tr.low-tur").count() == 1
        assert "mean of 3" in page.locator("table.results tr.low-tur").inner_text()
        expect(page.locator("#low-tur")).to_be_visible()
        assert page.locator("#performed-by").inner_text() == "Technician Tester"
        assert_no_sideways_scroll(page, "results page")
        shot("results")

        # Sign it.
        sign = page.get_by_role("button", name=re.compile("Sign and lock"))
        assert_touch_size(sign, "Sign button")
        sign.click()
        expect(page.get_by_role("heading", level=1)).to_contain_text("Signed")
        assert page.url.endswith(f"/calibrations/{event.pk}/")
        event.refresh_from_db()
        assert event.is_signed and event.signed_by == "Technician Tester" and event.signed_role == "Technician"
        shot("signed")

        # The certificate: fetched in the logged-in context (headless Chromium downloads PDFs instead of showing them).
        certificate = page.get_by_role("link", name="Certificate (PDF)")
        assert_touch_size(certificate, "Certificate link")
        href = certificate.get_attribute("href")
        assert href == f"/calibrations/{event.pk}/certificate.pdf"
        response = page.request.get(f"{live_server.url}{href}")
        assert response.status == 200
        assert response.headers["content-type"] == "application/pdf"
        body = response.body()
        assert body.startswith(b"%PDF")
        from pypdf import PdfReader

        text = "".join(p.extract_text() for p in PdfReader(io.BytesIO(body)).pages)
        assert device.tag in text
        assert "Performed by" in text and "Technician Tester" in text and "C-BRW-1" in text
        (shots / "certificate.pdf").write_bytes(body)

        # Back on the meter page the calibration is listed.
        page.get_by_role("link", name=device.tag, exact=True).first.click()
        page.wait_for_url(re.compile(rf"/positions/{device.tag}/$"))
        assert page.locator(f'table.grid a[href="/calibrations/{event.pk}/"]').is_visible()
        shot("meter-after")
    except BaseException:
        try:
            shot("failure")
        except Exception as exc:  # the page may be gone; keep the original error
            print(f"no failure screenshot: {exc}")
        raise
    finally:
        context.close()


def test_weekly_review_fits_a_tablet(demo_history, live_server, browser):
    """The reviewer's page with the demo fleet: every list readable at 820 px without the page sliding sideways."""
    from django.core.management import call_command

    call_command("recompute_due_dates", verbosity=0)
    reviewer = user_with_role("reviewer", "deskreviewer")
    reviewer.set_password("review-pass-1")
    reviewer.save()
    context = browser.new_context(viewport=TABLET, device_scale_factor=1, has_touch=True, locale="en-GB")
    context.set_default_timeout(TIMEOUT_MS)
    page = context.new_page()
    try:
        page.goto(f"{live_server.url}/accounts/login/")
        page.locator('[name="username"]').fill("deskreviewer")
        page.locator('[name="password"]').fill("review-pass-1")
        page.get_by_role("button", name="Log in").click()
        page.goto(f"{live_server.url}/review/")
        expect(page.locator("h1")).to_have_text("Weekly review")
        overdue = page.locator("#count-overdue")
        expect(overdue).to_be_visible()
        assert int(overdue.inner_text()) == Device.objects.filter(
            status="in_service", next_due_date__lt=timezone.localdate()).count()
        assert page.locator("section table.grid").count() >= 5
        assert_no_sideways_scroll(page, "weekly review")
        # issue 27 item 5: no list cuts off its last columns at 820 px, and every CSV link is a 44 px touch target
        for section in page.locator("section").all():
            name = section.get_attribute("id")
            container = section.locator(".table-container")
            if container.count():
                scroll, client = container.evaluate("e => [e.scrollWidth, e.clientWidth]")
                assert scroll <= client, f"{name}: {scroll} px of table in {client} px"
            box = section.locator("a.csv").bounding_box()
            assert box["width"] >= 44 and box["height"] >= 44, (name, box)
        # the first list is the most consequential, its severity in words
        expect(page.locator("section").first.locator("h2 .urgency")).to_have_text("Act now:")
        folder = ARTIFACTS / "review"
        folder.mkdir(parents=True, exist_ok=True)
        page.screenshot(path=str(folder / "weekly-review.png"), full_page=True)
    finally:
        context.close()
