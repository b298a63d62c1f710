"""Offline field entry in a real browser (Debian's Chromium, 820×1180, a persistent profile in a temp dir).

Keep the due pages on the tablet, lose the network, enter two calibrations (one first refused on the tablet) and
one maintenance record, reload, close the browser and open it again, come back online: the entries are sent on their own, the first
send's answer is lost on the way (the server saved it; the tablet does not know), one entry is refused by the
server (a signed calibration of that meter on that day arrived meanwhile) and stays with its message beside the
field; it is changed and sent; sending the same entries again, even twice at once, makes nothing new. Logging
out warns about unsent entries, then deletes the kept pages and entries.
"""
import datetime as dt
import re

import pytest
from django.db import connections
from django.utils import timezone
from playwright.sync_api import expect, sync_playwright

from calibration.forms import CalibrationEntry, entry_post_data
from calibration.models import CalibrationEvent, CalibrationPoint, ReferenceStandard
from maintenance.models import MaintenanceRecord
from plant.models import Area, Fluid, Device, Site
from plant.installations import commission
from tests.helpers import (ARTIFACTS, CHROMIUM, LAUNCH_ARGS, TABLET, TIMEOUT_MS, assert_touch_size, fill_points,
                           user_with_role)

pytestmark = pytest.mark.django_db(transaction=True)
SHOTS = ARTIFACTS / "offline"

QUEUE_IDS = """async () => {
  const db = await new Promise((ok, no) => { const r = indexedDB.open("quenby-field", 1);
    r.onupgradeneeded = () => r.result.createObjectStore("entries", {keyPath: "id"});
    r.onsuccess = () => ok(r.result); r.onerror = () => no(r.error); });
  const all = await new Promise((ok) => { const r = db.transaction("entries").objectStore("entries").getAll();
    r.onsuccess = () => ok(r.result); });
  db.close();
  return all.map((e) => ({id: e.id, kind: e.kind, target: e.target, state: e.state}));
}"""

KIT_PATHS = """async () => (await caches.has("quenby-kit"))
  ? (await (await caches.open("quenby-kit")).keys()).map((r) => new URL(r.url).pathname) : null"""

SEND_AGAIN = """async (ids) => {
  const db = await new Promise((ok) => { const r = indexedDB.open("quenby-field"); r.onsuccess = () => ok(r.result); });
  const entries = await Promise.all(ids.map((id) => new Promise((ok) => {
    const r = db.transaction("entries").objectStore("entries").get(id); r.onsuccess = () => ok(r.result); })));
  db.close();
  const token = (await (await fetch("/field/token.json")).json()).csrf;
  const post = (e) => fetch("/field/send/", {method: "POST", headers: {"Content-Type": "application/json",
    "X-CSRFToken": token}, body: JSON.stringify({kind: e.kind, id: e.id, target: e.target, data: e.data})})
    .then((r) => r.status);
  // each entry sent twice at the same moment
  return Promise.all(entries.flatMap((e) => [post(e), post(e)]));
}"""


@pytest.fixture
def playwright(monkeypatch):
    monkeypatch.setenv("DJANGO_ALLOW_ASYNC_UNSAFE", "true")  # see tests/test_browser.py
    if not CHROMIUM.exists():
        pytest.fail(f"{CHROMIUM} not found: apt-get install chromium", pytrace=False)
    expect.set_options(timeout=TIMEOUT_MS)
    try:
        with sync_playwright() as p:
            yield p
    finally:
        connections.close_all()


@pytest.fixture
def pump_station():
    today = timezone.localdate()
    site = Site.objects.create(name="Lower pump station")
    area = Area.objects.create(site=site, name="Dry well")
    water = Fluid.objects.create(name="Raw water", phase="liquid", conductivity_us_cm=380)

    def device(tag, due_in_days, range_max):
        m = commission(tag=tag, principle="electromagnetic", area=area, fluid=water, line_size="DN100",
                                 internal_diameter_mm=102, range_min=0, range_max=range_max, mpe_value=0.5,
                                 mpe_basis="pct_reading", wetted_material="316L")
        Device.objects.filter(pk=m.pk).update(next_due_date=today + dt.timedelta(days=due_in_days))
        return m

    devices = [device("FT-DW-1", 7, 40), device("FT-DW-2", -3, 80), device("FT-DW-3", 250, 40)]
    # each standard covers the meters it serves, so their lowest point is within its usable range (from 10 % of
    # its range maximum, common practice)
    standard = ReferenceStandard.objects.create(
        identification="RS-DW", description="Portable master meter", range_min=0, range_max=40,
        certificate_number="C-DW-1", due_date=today + dt.timedelta(days=365), expanded_uncertainty=0.1,
        uncertainty_basis="pct_reading")
    standard_80 = ReferenceStandard.objects.create(
        identification="RS-W80", description="Portable master meter, larger", range_min=0, range_max=80,
        certificate_number="C-DW-2", due_date=today + dt.timedelta(days=365), expanded_uncertainty=0.1,
        uncertainty_basis="pct_reading")
    technician = user_with_role("technician", "welltech")
    technician.set_password("dry-well-pass-1")
    technician.save()
    return {"meters": devices, "standard": standard, "standard_80": standard_80, "technician": technician, "today": today}


def open_tablet(playwright, profile, offline=False):
    context = playwright.chromium.launch_persistent_context(
        str(profile), executable_path=str(CHROMIUM), headless=True, args=LAUNCH_ARGS, viewport=TABLET,
        device_scale_factor=1, has_touch=True, locale="en-GB", timezone_id="UTC", offline=offline)
    context.set_default_timeout(TIMEOUT_MS)
    return context


def page_of(context):
    return context.pages[0] if context.pages else context.new_page()


def ready(page):
    expect(page.locator("body[data-field-ready='1']")).to_have_count(1)


def shot(page, name):
    SHOTS.mkdir(parents=True, exist_ok=True)
    page.screenshot(path=str(SHOTS / f"{name}.png"), full_page=True)


def fill_header(page, plant, procedure, ambient, standard=None):
    page.get_by_label(str(standard or plant["standard"])).check()
    page.get_by_label("Method / procedure").fill(procedure)
    page.get_by_label("Ambient temperature (°C)").fill(ambient)
    page.get_by_label("Condition of the item as received").fill("installed, in service, no visible damage")


def test_entries_made_without_network_are_sent_once(pump_station, live_server, playwright, tmp_path):
    plant = pump_station
    first, second, not_due = plant["meters"]
    base = live_server.url
    profile = tmp_path / "tablet-profile"

    context = open_tablet(playwright, profile)
    try:
        page = page_of(context)
        page.goto(f"{base}/accounts/login/")
        page.get_by_label("Username").fill("welltech")
        page.get_by_label("Password").fill("dry-well-pass-1")
        page.get_by_role("button", name="Log in").click()
        page.wait_for_url(re.compile(r"/positions/$"))

        # Online: keep the pages of the meters due soon. The service worker controls the pages once installed.
        page.get_by_role("navigation").get_by_role("link", name="Offline work").click()
        page.wait_for_url(re.compile(r"/field/$"))
        page.evaluate("navigator.serviceWorker.ready.then(() => true)")
        page.reload()
        ready(page)
        assert page.evaluate("navigator.serviceWorker.controller !== null")
        keep = page.get_by_role("button", name="Keep these pages on this tablet")
        assert_touch_size(keep, "keep button")
        keep.click()
        # each due meter's calibration and maintenance entry pages
        expect(page.locator("#kit-status")).to_contain_text("Kept on this tablet: 4 entry pages")
        kept = page.evaluate(KIT_PATHS)
        assert {f"/positions/{first.tag}/calibrate/", f"/positions/{second.tag}/calibrate/", "/field/",
                f"/positions/{first.tag}/maintain/", f"/positions/{second.tag}/maintain/",
                "/field/queue/", "/static/offline/field.js", "/static/site.css"} <= set(kept)
        assert f"/positions/{not_due.tag}/calibrate/" not in kept and len(kept) == 8
        shot(page, "01-kit-kept")

        # No network from here. A page that was not kept says so; the kept entry page opens.
        context.set_offline(True)
        page.goto(f"{base}/positions/")
        expect(page.get_by_role("heading", level=1)).to_have_text("No network")
        page.goto(f"{base}/positions/{first.tag}/calibrate/")
        ready(page)
        expect(page.locator("#offline-note")).to_be_visible()
        expect(page.locator(".caution")).to_be_visible()  # the safety caution is on the kept page too
        keep_entry = page.get_by_role("button", name="Keep on this tablet")
        assert_touch_size(keep_entry, "Keep on this tablet button")
        fill_header(page, plant, "Offline entry one: five points against the master meter", "16.5")
        fill_points(page, "af", [(4, 4.01), (10, 10.02), (55, 55.1), (30, 30.03), (40, 40.04)])
        keep_entry.click()
        # refused on the tablet with the server's wording, at the field; nothing kept
        message = page.locator('tr:has([name="af-2-reference_value"]) .errorlist')
        expect(message).to_have_text("55 m³/h is outside the meter's calibrated range 0–40 m³/h.")
        assert page.locator('[name="af-2-reference_value"]').get_attribute("aria-invalid") == "true"
        expect(page.locator("#offline-summary")).to_contain_text("Not kept yet")
        assert page.evaluate(QUEUE_IDS) == []
        shot(page, "02-refused-on-tablet")
        page.locator('[name="af-2-reference_value"]').fill("20")
        page.locator('[name="af-2-indicated_value"]').fill("20.05")
        keep_entry.click()
        page.wait_for_url(re.compile(r"/field/queue/#kept="))
        expect(page.locator("#queue-title")).to_have_text("Waiting to send (1)")

        # The second one, reached from the kept Offline work page.
        page.goto(f"{base}/field/")
        page.locator("#kit-meters tr", has_text=second.tag).get_by_role("link", name="Enter calibration").click()
        page.wait_for_url(re.compile(rf"/positions/{second.tag}/calibrate/$"))
        ready(page)
        fill_header(page, plant, "Offline entry two", "17", standard=plant["standard_80"])
        page.get_by_label("Outside contractor (only if a contractor did the work)").fill("W. Welltech")
        fill_points(page, "af", [(8, 8.0), (20, 20.1), (40, 40.0), (60, 59.9), (80, 80.2)])
        page.get_by_role("button", name="Keep on this tablet").click()
        page.wait_for_url(re.compile(r"/field/queue/#kept="))
        expect(page.locator("#queue-title")).to_have_text("Waiting to send (2)")
        page.reload()
        ready(page)
        expect(page.locator("#queue-title")).to_have_text("Waiting to send (2)")
        expect(page.locator("#waiting-badge")).to_have_text("Waiting to send (2)")
        # a maintenance record beside them, on the first meter's kept maintenance page (photos stay behind)
        page.goto(f"{base}/positions/{first.tag}/maintain/")
        ready(page)
        expect(page.locator("#offline-note")).to_be_visible()
        expect(page.locator("#offline-photos")).to_contain_text("sent without photos")
        task_radio = page.locator('#task-choices input[name="task"]').first
        task_id = int(task_radio.get_attribute("value"))
        task_radio.check()
        keep_record = page.get_by_role("button", name="Keep on this tablet")
        keep_record.click()
        # refused on the tablet with the server form's messages, at the fields; nothing kept
        expect(page.locator('.field:has([name="action"]) .errorlist')).to_have_text("Say what you did.")
        expect(page.locator('#condition-choices .errorlist')).to_have_text("Choose what you found.")
        assert len(page.evaluate(QUEUE_IDS)) == 2
        page.get_by_label("Heavy deposit").check()
        page.get_by_label("Action taken").fill("Opened the dry-well meter, wiped the electrodes")
        page.get_by_label("Parts replaced").fill("liner gasket")
        page.get_by_label("Time spent (minutes)").fill("45")
        page.get_by_label("Notes").fill("kept offline in the dry well")
        keep_record.click()
        page.wait_for_url(re.compile(r"/field/queue/#kept="))
        expect(page.locator("#queue-title")).to_have_text("Waiting to send (3)")
        expect(page.locator("#queue-list li.queue-item").nth(2)).to_contain_text(f"Maintenance · {first.tag}")
        # a fourth one, entered by mistake, is discarded from the list (two taps) and never sent
        page.goto(f"{base}/positions/{first.tag}/calibrate/")
        ready(page)
        fill_header(page, plant, "Entered by mistake", "15")
        fill_points(page, "af", [(4, 4.0), (10, 10.0), (20, 20.0), (30, 30.0), (40, 40.0)])
        page.get_by_role("button", name="Keep on this tablet").click()
        page.wait_for_url(re.compile(r"/field/queue/#kept="))
        expect(page.locator("#queue-title")).to_have_text("Waiting to send (4)")
        mistake = page.locator("#queue-list li.queue-item").nth(3)
        expect(mistake).to_contain_text(f"Calibration · {first.tag}")
        mistake.get_by_role("button", name="Discard").click()
        mistake.get_by_role("button", name="Delete it from this tablet").click()
        expect(page.locator("#queue-title")).to_have_text("Waiting to send (3)")
        entries = page.evaluate(QUEUE_IDS)
        ids = {e["target"]: e["id"] for e in entries if e["kind"] == "calibration"}
        assert set(ids) == {first.tag, second.tag}
        [maintenance_id] = [e["id"] for e in entries if e["kind"] == "maintenance" and e["target"] == first.tag]
        assert len(entries) == 3
        assert CalibrationEvent.objects.count() == 0 and MaintenanceRecord.objects.count() == 0
    except BaseException:
        shot(page, "failure-offline")
        raise
    finally:
        context.close()

    # Meanwhile, on the server: a colleague signs a calibration of the second meter for today.
    online = CalibrationEntry(second, entry_post_data(
        {"performed_on": plant["today"].isoformat(), "technician": "A. Colleague",
         "reference_standards": [plant["standard_80"].pk], "procedure": "online", "reason": "scheduled",
         "condition_received": "installed, in service",
         "decision_rule": "simple"}, [(8, 8.0), (20, 20.0), (40, 40.0), (60, 60.0), (80, 80.0)]),
        user=user_with_role("technician", "colleague"))
    assert online.is_valid()
    covering = online.save().sign(by="A. Colleague")

    # The browser closed and opened again, still without network: the entries are there.
    context = open_tablet(playwright, profile, offline=True)
    try:
        page = page_of(context)
        page.goto(f"{base}/field/queue/")
        ready(page)
        expect(page.locator("#queue-title")).to_have_text("Waiting to send (3)")
        expect(page.locator("#queue-list li.queue-item")).to_have_count(3)
        # logging out now warns first; staying keeps everything
        page.get_by_role("button", name="Log out").click()
        warning = page.locator("#logout-warning")
        expect(warning).to_contain_text("3 entries have not been sent.")
        shot(page, "03-logout-warning")
        warning.get_by_role("button", name="Stay logged in").click()
        expect(warning).to_have_count(0)
        assert len(page.evaluate(QUEUE_IDS)) == 3

        # Back online. The first send reaches the server but its answer is lost on the way back.
        cut = {"done": False}

        def lose_first_answer(route):
            if not cut["done"]:
                cut["done"] = True
                route.fetch()  # the server receives and saves it
                route.abort("connectionreset")
            else:
                route.continue_()

        context.route("**/field/send/", lose_first_answer)
        context.set_offline(False)  # sent on reconnection, no button needed
        status = page.locator("#queue-status")
        expect(status).to_contain_text("1 sent, 1 refused (see below), 1 still waiting")
        assert cut["done"]
        assert list(CalibrationEvent.objects.values_list("client_id", flat=True)
                    .filter(device=first)) == [__import__("uuid").UUID(ids[first.tag])]
        context.unroute("**/field/send/")
        page.get_by_role("button", name="Send now").click()
        expect(status).to_have_text("1 sent.")
        assert CalibrationEvent.objects.filter(device=first).count() == 1

        # the refused one stays, with the server's message beside the date
        refused = page.locator(f'#queue-list li[data-id="{ids[second.tag]}"]')
        expect(refused).to_contain_text("Refused by the server")
        expected = (f"A signed calibration of {second.tag} on {plant['today']} is already on record "
                    f"(calibration {covering.pk}); check the date, or discard this entry if it is the same work.")
        expect(refused.locator('[data-field="ev-performed_on"]')).to_have_text(f"Date of calibration: {expected}")
        expect(page.locator("#queue-title")).to_have_text("Waiting to send (1)")
        shot(page, "04-refused-by-server")
        refused.get_by_role("link", name="Review or change").click()
        page.wait_for_url(re.compile(rf"/positions/{second.tag}/calibrate/#edit="))
        ready(page)
        beside = page.locator('.field:has([name="ev-performed_on"]) .errorlist')
        expect(beside).to_have_text(expected)
        assert page.get_by_label("Outside contractor (only if a contractor did the work)").input_value() == "W. Welltech"
        assert page.locator('[name="af-4-indicated_value"]').input_value() == "80.2"
        shot(page, "05-server-message-at-field")
        yesterday = plant["today"] - dt.timedelta(days=1)
        page.get_by_label("Date of calibration").fill(yesterday.isoformat())
        page.get_by_role("button", name="Keep the changes").click()
        page.wait_for_url(re.compile(r"/field/queue/"))
        expect(page.locator("#queue-title")).to_have_text("Waiting to send (0)")  # sent on opening the page
        expect(page.locator("#sent-list li")).to_have_count(3)
        expect(page.locator("#waiting-badge")).to_have_count(0)
        shot(page, "06-all-sent")

        # Exactly those records, once each, with the values entered.
        events = {e.device.tag: e for e in CalibrationEvent.objects.select_related("device").exclude(pk=covering.pk)}
        assert set(events) == {first.tag, second.tag}
        one, two = events[first.tag], events[second.tag]
        assert str(one.client_id) == ids[first.tag] and str(two.client_id) == ids[second.tag]
        assert one.procedure == "Offline entry one: five points against the master meter" and one.ambient_temp_c == 16.5
        assert one.performed_on == plant["today"] and one.technician == "Technician Tester"
        assert sorted((p.reference_value, p.indicated_value) for p in one.points.all()) == [
            (4, 4.01), (10, 10.02), (20, 20.05), (30, 30.03), (40, 40.04)]
        assert two.performed_on == yesterday and two.technician == "W. Welltech" and two.ambient_temp_c == 17
        assert sorted((p.reference_value, p.indicated_value) for p in two.points.all()) == [
            (8, 8.0), (20, 20.1), (40, 40.0), (60, 59.9), (80, 80.2)]
        assert {one.state, two.state} == {"draft"} and {one.created_by, two.created_by} == {plant["technician"]}
        record = MaintenanceRecord.objects.get()  # exactly one, with what was entered offline
        assert (str(record.client_id), record.device, record.task_id, record.condition, record.action, record.parts,
                record.minutes_spent, record.notes, record.performed_on, record.state, record.created_by) == (
            maintenance_id, first, task_id, "heavy_deposit", "Opened the dry-well meter, wiped the electrodes",
            "liner gasket", 45, "kept offline in the dry well", plant["today"], "draft", plant["technician"])
        assert not record.photos.exists()
        before = (CalibrationEvent.objects.count(), CalibrationPoint.objects.count(), MaintenanceRecord.objects.count())
        assert before == (3, 15, 1)

        # Sending all three again, each twice at the same moment: nothing new.
        statuses = page.evaluate(SEND_AGAIN, [ids[first.tag], ids[second.tag], maintenance_id])
        assert statuses == [200, 200, 200, 200, 200, 200]
        assert (CalibrationEvent.objects.count(), CalibrationPoint.objects.count(),
                MaintenanceRecord.objects.count()) == before

        # Sign-off is online, on the server's page.
        expect(page.locator("#sent-list a", has_text=f"Maintenance · {first.tag} · {plant['today']}")).to_have_attribute(
            "href", record.get_absolute_url())
        page.locator("#sent-list a", has_text=f"Calibration · {first.tag}").click()
        page.wait_for_url(re.compile(rf"/calibrations/{one.pk}/$"))
        expect(page.get_by_role("button", name=re.compile("Sign and lock"))).to_be_visible()

        # Logging out with nothing unsent: the kept pages and entries are deleted from the tablet.
        page.get_by_role("button", name="Log out").click()
        page.wait_for_url(re.compile(r"/accounts/login/"))
        assert page.evaluate(QUEUE_IDS) == [] and page.evaluate(KIT_PATHS) is None
    except BaseException:
        try:
            shot(page, "failure")
        except Exception as exc:
            print(f"no failure screenshot: {exc}")
        raise
    finally:
        context.close()


def test_a_save_that_finds_no_network_gives_the_entry_back(pump_station, live_server, browser):
    """The tablet believes it is online, but the post of the form gets no answer (the signal dropped on the way):
    what was typed comes back in the form, is kept on the tablet, and is sent once the network works."""
    plant = pump_station
    device = plant["meters"][0]
    context = browser.new_context(viewport=TABLET, device_scale_factor=1, has_touch=True, locale="en-GB",
                                  timezone_id="UTC")
    context.set_default_timeout(TIMEOUT_MS)
    page = context.new_page()
    try:
        page.goto(f"{live_server.url}/accounts/login/")
        page.get_by_label("Username").fill("welltech")
        page.get_by_label("Password").fill("dry-well-pass-1")
        page.get_by_role("button", name="Log in").click()
        page.wait_for_url(re.compile(r"/positions/$"))
        page.goto(f"{live_server.url}/positions/{device.tag}/calibrate/")
        page.evaluate("navigator.serviceWorker.ready.then(() => true)")
        page.reload()  # a page loaded once the worker is active is served through it
        ready(page)
        assert page.evaluate("navigator.serviceWorker.controller !== null")
        fill_header(page, plant, "Saved as the signal dropped", "19")
        fill_points(page, "af", [(4, 4.01), (10, 10.02), (20, 20.05), (30, 30.03), (40, 40.04)])
        # every post of the form fails at the network; the pages themselves still load
        context.route(re.compile(r".*/calibrate/$"),
                      lambda route: route.abort("internetdisconnected") if route.request.method == "POST"
                      else route.continue_())
        page.get_by_role("button", name="Save calibration").click()
        page.wait_for_url(re.compile(rf"/positions/{device.tag}/calibrate/#interrupted$"))
        ready(page)
        expect(page.locator("#offline-interrupted")).to_be_visible()
        assert page.get_by_label("Method / procedure").input_value() == "Saved as the signal dropped"
        assert page.locator('[name="af-4-indicated_value"]').input_value() == "40.04"
        assert page.get_by_label(str(plant["standard"])).is_checked()
        assert CalibrationEvent.objects.count() == 0
        SHOTS.mkdir(parents=True, exist_ok=True)
        page.screenshot(path=str(SHOTS / "07-interrupted-save.png"), full_page=True)
        page.get_by_role("button", name="Keep on this tablet").click()
        page.wait_for_url(re.compile(r"/field/queue/#kept="))
        context.unroute(re.compile(r".*/calibrate/$"))
        # the queue page sends on opening when the network works; if the route was still in place, on the button
        page.get_by_role("button", name="Send now").click()
        expect(page.locator("#queue-title")).to_have_text("Waiting to send (0)")
        event = CalibrationEvent.objects.get()
        assert event.device == device and event.procedure == "Saved as the signal dropped" and event.client_id
        assert sorted((p.reference_value, p.indicated_value) for p in event.points.all()) == [
            (4, 4.01), (10, 10.02), (20, 20.05), (30, 30.03), (40, 40.04)]
    finally:
        context.close()


MOVE_KIT_TO_OLD_ADDRESSES = """async () => {
  // what a tablet holds when it kept its pages before the position pages moved: the same pages, under /meters/
  const cache = await caches.open("quenby-kit");
  for (const request of await cache.keys()) {
    const url = new URL(request.url);
    if (url.pathname.startsWith("/positions/")) {
      const response = await cache.match(request);
      url.pathname = "/meters/" + url.pathname.slice("/positions/".length);
      await cache.put(url.href, response);
      await cache.delete(request);
    }
  }
  return (await cache.keys()).map((r) => new URL(r.url).pathname);
}"""


def test_pages_kept_under_the_old_address_open_offline(pump_station, live_server, playwright, tmp_path):
    """The position pages moved from /meters/ to /positions/. Without a network, a tablet opens an entry page
    under either address, whether it kept its pages before the move (under /meters/) or after (/positions/),
    and an entry kept from a page opened at the old address is sent once the network returns."""
    plant = pump_station
    first = plant["meters"][0]
    base = live_server.url
    context = open_tablet(playwright, tmp_path / "tablet-profile")
    try:
        page = page_of(context)
        page.goto(f"{base}/accounts/login/")
        page.get_by_label("Username").fill("welltech")
        page.get_by_label("Password").fill("dry-well-pass-1")
        page.get_by_role("button", name="Log in").click()
        page.wait_for_url(re.compile(r"/positions/$"))
        # online, an old address answers with the new one
        page.goto(f"{base}/meters/{first.tag}/?from=bookmark")
        assert page.url == f"{base}/positions/{first.tag}/?from=bookmark"
        page.goto(f"{base}/field/")
        page.evaluate("navigator.serviceWorker.ready.then(() => true)")
        page.reload()
        ready(page)
        page.get_by_role("button", name="Keep these pages on this tablet").click()
        expect(page.locator("#kit-status")).to_contain_text("Kept on this tablet: 4 entry pages")
        assert f"/positions/{first.tag}/calibrate/" in page.evaluate(KIT_PATHS)

        # kept after the move (under /positions/), opened offline at the old address
        context.set_offline(True)
        page.goto(f"{base}/meters/{first.tag}/calibrate/")
        ready(page)
        expect(page.locator("#offline-note")).to_be_visible()
        expect(page.get_by_role("heading", level=1)).to_contain_text(first.tag)

        # kept before the move (under /meters/), opened offline at either address
        kept = page.evaluate(MOVE_KIT_TO_OLD_ADDRESSES)
        assert f"/meters/{first.tag}/calibrate/" in kept and f"/positions/{first.tag}/calibrate/" not in kept
        for address in (f"/meters/{first.tag}/maintain/", f"/positions/{first.tag}/maintain/",
                        f"/positions/{first.tag}/calibrate/", f"/meters/{first.tag}/calibrate/"):
            page.goto(f"{base}{address}")
            ready(page)
            expect(page.locator("#offline-note")).to_be_visible()
            assert page.url == f"{base}{address}"
        page.goto(f"{base}/meters/{first.tag}/")  # a page never kept still says so
        expect(page.get_by_role("heading", level=1)).to_have_text("No network")

        # an entry on the page opened at the old address is kept, then sent when the network returns
        page.goto(f"{base}/meters/{first.tag}/calibrate/")
        ready(page)
        fill_header(page, plant, "Kept under the old address", "18")
        fill_points(page, "af", [(4, 4.01), (10, 10.02), (20, 20.05), (30, 30.03), (40, 40.04)])
        page.get_by_role("button", name="Keep on this tablet").click()
        page.wait_for_url(re.compile(r"/field/queue/#kept="))
        expect(page.locator("#queue-title")).to_have_text("Waiting to send (1)")
        context.set_offline(False)
        page.get_by_role("button", name="Send now").click()
        expect(page.locator("#queue-title")).to_have_text("Waiting to send (0)")
        event = CalibrationEvent.objects.get()
        assert event.device == first and event.procedure == "Kept under the old address"
    finally:
        context.close()
