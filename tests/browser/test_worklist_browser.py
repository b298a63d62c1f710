"""The work list in a real browser at 820 px as a technician (issue 27, item 9): seven days from the chosen date,
the serial and reference standards on the row, and a draft marked for sign-off with a link a finger can hit that
opens it. Uses the demo plant with due dates recomputed, plus one draft."""
import datetime as dt

import pytest
from django.utils import timezone
from playwright.sync_api import expect

from calibration.models import CalibrationEvent
from maintenance import worklist
from plant.models import Device
from tests.helpers import user_with_role
from tests.helpers import MIN_TOUCH, TABLET, TIMEOUT_MS

pytestmark = pytest.mark.django_db(transaction=True)


def test_work_list_on_a_tablet_with_a_draft(demo_history, live_server, browser):  # noqa: F811
    from django.core.management import call_command

    call_command("recompute_due_dates", verbosity=0)
    start = timezone.localdate()
    first, last = worklist.span(start)
    due = [i for i in worklist.rows(last, start=first) if i.kind == worklist.CALIBRATION]
    assert len(due) >= 2, "the demo plant has calibrations due within seven days"
    drafted, plain = due[0], due[1]
    device = Device.objects.get(position__tag=drafted.tag)
    draft = CalibrationEvent.objects.create(device=device, performed_on=start, technician="Tech Tester",
                                            procedure="browser test draft")
    tech = user_with_role("technician", "listtech")
    tech.set_password("list-pass-1")
    tech.save()
    context = browser.new_context(viewport=TABLET, device_scale_factor=1, has_touch=True, locale="en-GB")
    context.set_default_timeout(TIMEOUT_MS)
    page = context.new_page()
    try:
        page.goto(f"{live_server.url}/accounts/login/")
        page.locator('[name="username"]').fill("listtech")
        page.locator('[name="password"]').fill("list-pass-1")
        page.get_by_role("button", name="Log in").click()
        page.goto(f"{live_server.url}/maintenance/worklist/?start={start.isoformat()}")
        expect(page.locator("h1")).to_contain_text(f"{first.isoformat()} to {last:%a} {last.isoformat()}")
        assert page.evaluate("document.documentElement.scrollWidth") <= TABLET["width"]
        plain_row = page.locator("tr", has=page.get_by_role("link", name=plain.tag, exact=True)).first
        expect(plain_row).to_contain_text(f"S/N {plain.serial}")
        expect(plain_row).to_contain_text("Reference standards: " + (", ".join(plain.standards) or
                                                                     "none suitable on file"))
        link = page.get_by_role("link", name="Open the draft")
        expect(link).to_have_count(1)
        expect(page.locator("tr", has=link)).to_contain_text("draft waiting for sign-off")
        box = link.bounding_box()
        assert box["height"] >= MIN_TOUCH and box["width"] >= MIN_TOUCH, box
        assert box["x"] + box["width"] <= TABLET["width"], box
        link.click()
        page.wait_for_url(f"**/calibrations/{draft.pk}/")
        expect(page.locator("h1")).to_contain_text("Draft")
    finally:
        context.close()
