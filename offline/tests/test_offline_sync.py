"""Offline field entry, server side: the send endpoint (client id as idempotency key, refusals by field, CSRF,
roles, two sends of one id at once), the kit of pages kept on a tablet, the service worker and manifest, and the
tablet's checks taken from the server's form. Runs on SQLite and PostgreSQL like the rest of the suite."""
import datetime as dt
import json
import uuid

import pytest
from django.test import Client
from django.utils import timezone

from calibration.forms import CalibrationEntry, PointRowForm, entry_post_data
from calibration.models import CalibrationEvent, CalibrationPoint, ReferenceStandard
from offline import kinds
from offline.rules import entry_rules
from plant.models import Area, Fluid, Device, Site
from plant.installations import commission
from tests.helpers import send_twice_at_once, user_with_role
from tests.helpers import TODAY as ENTRY_DATE, entry_data

pytestmark = pytest.mark.django_db
TODAY = timezone.localdate()


@pytest.fixture
def field(db):
    site = Site.objects.create(name="Pump station")
    area = Area.objects.create(site=site, name="Basement")
    water = Fluid.objects.create(name="Raw water", phase="liquid", conductivity_us_cm=300)

    def device(tag, due_in_days, status="in_service"):
        m = commission(tag=tag, principle="electromagnetic", area=area, fluid=water, line_size="DN80",
                                 internal_diameter_mm=80, range_max=40, mpe_value=0.5, wetted_material="316L",
                                 status=status)
        due = None if due_in_days is None else TODAY + dt.timedelta(days=due_in_days)
        Device.objects.filter(pk=m.pk).update(next_due_date=due)
        m.refresh_from_db()
        return m

    devices = {"soon": device("FT-OFF-1", 10), "overdue": device("FT-OFF-2", -20), "later": device("FT-OFF-3", 200),
              "never": device("FT-OFF-4", None), "removed": device("FT-OFF-5", 5, status="removed")}
    standard = ReferenceStandard.objects.create(identification="RS-OFF", description="master meter", range_max=40,
                                                certificate_number="C-OFF", due_date=TODAY + dt.timedelta(days=300),
                                                expanded_uncertainty=0.1)
    lapsed = ReferenceStandard.objects.create(identification="RS-LAPSED", description="old master", range_max=40,
                                              certificate_number="C-OLD", due_date=TODAY - dt.timedelta(days=3),
                                              expanded_uncertainty=0.1)
    users = {"tech": user_with_role("technician", "offtech"), "tech2": user_with_role("technician", "offtech2"),
             "reviewer": user_with_role("reviewer", "offreviewer")}
    clients = {}
    for name, user in users.items():
        clients[name] = Client()
        clients[name].force_login(user)
    return {"meters": devices, "standard": standard, "lapsed": lapsed, "users": users, "clients": clients}


def pairs(post):
    """A tablet's stored entry: [name, value] pairs, as FormData gives them."""
    out = []
    for name, value in post.items():
        for v in value if isinstance(value, list) else [value]:
            out.append([name, str(v)])
    return out


def send(client, client_id, target, post, kind="calibration", **extra):
    body = json.dumps({"kind": kind, "id": str(client_id), "target": target, "data": pairs(post)})
    return client.post("/field/send/", body, content_type="application/json", **extra)


def counts():
    return CalibrationEvent.objects.count(), CalibrationPoint.objects.count()


def test_a_sent_entry_is_saved_once_with_its_values(field):
    tech, device = field["clients"]["tech"], field["meters"]["soon"]
    cid = uuid.uuid4()
    post = entry_data(field["standard"], **{"ev-contractor": "B. Offline", "ev-notes": "entered in the basement"})
    first = send(tech, cid, device.tag, post)
    assert first.status_code == 201, first.content
    event = CalibrationEvent.objects.get()
    assert first.json() == {"status": "saved", "url": f"/calibrations/{event.pk}/",
                            "label": f"{device.tag} {ENTRY_DATE}"}
    assert event.client_id == cid and event.device == device and event.created_by == field["users"]["tech"]
    assert event.state == "draft" and event.technician == "B. Offline" and event.notes == "entered in the basement"
    assert sorted((p.reference_value, p.indicated_value) for p in event.points.all()) == [
        (4, 4.01), (10, 10.02), (20, 20.05), (30, 29.97), (40, 40.04)]
    # sent again (the answer was lost, the tablet retries): the same record, nothing new
    for _ in range(2):
        again = send(tech, cid, device.tag, post)
        assert again.status_code == 200
        assert again.json()["status"] == "received before" and again.json()["url"] == first.json()["url"]
    assert counts() == (1, 5)


def test_a_refused_entry_saves_nothing_and_names_the_field(field):
    tech, device = field["clients"]["tech"], field["meters"]["soon"]
    cid = uuid.uuid4()
    bad = entry_data(field["standard"], found=[(4, 4.01), (10, 10.02), (55, 55.1), (30, 29.97), (40, 40.04)])
    response = send(tech, cid, device.tag, bad)
    assert response.status_code == 422
    assert response.json()["errors"] == {
        "af-2-reference_value": ["55 m³/h is outside the meter's calibrated range 0–40 m³/h."]}
    assert counts() == (0, 0)
    # corrected on the tablet, sent again with the same id: saved
    good = entry_data(field["standard"])
    assert send(tech, cid, device.tag, good).status_code == 201
    assert CalibrationEvent.objects.get().client_id == cid and counts() == (1, 5)


def test_refusals_that_only_an_entry_kept_offline_meets(field):
    tech, devices = field["clients"]["tech"], field["meters"]
    # the device at FT-OFF-5 was taken out of service after the entry was kept on the tablet
    assert devices["removed"].position is None
    removed = send(tech, uuid.uuid4(), "FT-OFF-5", entry_data(field["standard"]))
    assert removed.status_code == 422
    assert removed.json()["errors"] == {"__all__": [
        "No device is installed at FT-OFF-5 now; the entry cannot be saved to it."]}
    gone = send(tech, uuid.uuid4(), "FT-NOT-THERE", entry_data(field["standard"]))
    assert gone.json()["errors"] == {"__all__": ["Position FT-NOT-THERE is not in the register any more."]}
    lapsed = send(tech, uuid.uuid4(), devices["soon"].tag, entry_data(field["lapsed"], **{"ev-performed_on": TODAY}))
    assert lapsed.status_code == 422
    assert lapsed.json()["errors"]["ev-reference_standards"] == [
        f"Reference standard RS-LAPSED was past its due date ({field['lapsed'].due_date}) on {TODAY}."]
    assert counts() == (0, 0)

    # a signed calibration of that meter on that day is already on record (entered online meanwhile)
    online = CalibrationEntry(devices["soon"], entry_post_data(
        {"performed_on": TODAY.isoformat(), "technician": "C. Online", "reference_standards": [field["standard"].pk],
         "procedure": "five points", "reason": "scheduled", "decision_rule": "simple",
         "condition_received": "installed"},
        [(4, 4.0), (10, 10.0), (20, 20.0), (30, 30.0), (40, 40.0)]), user=field["users"]["tech2"])
    assert online.is_valid()
    signed = online.save().sign(by="C. Online")
    covered = send(tech, uuid.uuid4(), devices["soon"].tag, entry_data(field["standard"], **{"ev-performed_on": TODAY}))
    assert covered.status_code == 422
    assert covered.json()["errors"] == {"ev-performed_on": [
        f"A signed calibration of FT-OFF-1 on {TODAY} is already on record (calibration {signed.pk}); "
        f"check the date, or discard this entry if it is the same work."]}
    yesterday = entry_data(field["standard"], **{"ev-performed_on": (TODAY - dt.timedelta(days=1)).isoformat()})
    assert send(tech, uuid.uuid4(), devices["soon"].tag, yesterday).status_code == 201
    assert CalibrationEvent.objects.count() == 2


def test_an_id_used_by_another_account_is_refused_without_detail(field):
    cid = uuid.uuid4()
    post = entry_data(field["standard"])
    assert send(field["clients"]["tech"], cid, field["meters"]["soon"].tag, post).status_code == 201
    other = send(field["clients"]["tech2"], cid, field["meters"]["soon"].tag, post)
    assert other.status_code == 422
    assert other.json() == {"status": "refused", "errors": {"__all__": [
        "This entry's id is already used by another record; discard it and enter it again."]}}
    assert CalibrationEvent.objects.count() == 1


def test_csrf_holds_for_sends(field):
    strict = Client(enforce_csrf_checks=True)
    strict.force_login(field["users"]["tech"])
    post = entry_data(field["standard"])
    assert send(strict, uuid.uuid4(), field["meters"]["soon"].tag, post).status_code == 403
    assert send(strict, uuid.uuid4(), field["meters"]["soon"].tag, post, HTTP_X_CSRFTOKEN="not-the-token").status_code == 403
    assert counts() == (0, 0)
    token = strict.get("/field/token.json").json()["csrf"]
    assert send(strict, uuid.uuid4(), field["meters"]["soon"].tag, post, HTTP_X_CSRFTOKEN=token).status_code == 201


def test_only_accounts_that_enter_calibrations_can_send(field):
    post = entry_data(field["standard"])
    reviewer = send(field["clients"]["reviewer"], uuid.uuid4(), field["meters"]["soon"].tag, post)
    assert reviewer.status_code == 403
    anonymous = send(Client(), uuid.uuid4(), field["meters"]["soon"].tag, post)
    assert anonymous.status_code == 302 and "/accounts/login/" in anonymous["Location"]
    from django.contrib.auth.models import User

    norole = Client()
    norole.force_login(User.objects.create_user("nobody", password="pw"))
    assert send(norole, uuid.uuid4(), field["meters"]["soon"].tag, post).status_code == 403
    assert norole.get("/field/").status_code == 403 and norole.get("/field/kit.json").status_code == 403
    assert counts() == (0, 0)


@pytest.mark.parametrize("body", [
    "not json", json.dumps({"kind": "calibration", "id": "not-a-uuid", "target": "FT-OFF-1", "data": []}),
    json.dumps({"kind": "calibration", "id": str(uuid.uuid4()), "target": "FT-OFF-1", "data": "x=1"}),
    json.dumps({"kind": "pipework", "id": str(uuid.uuid4()), "target": "FT-OFF-1", "data": []}),
    json.dumps({"id": str(uuid.uuid4())}),
], ids=["not-json", "bad-uuid", "data-not-pairs", "unknown-kind", "id-only"])  # fixed ids: -n 2 collects alike
def test_an_unreadable_send_is_refused_and_saves_nothing(field, body):
    response = field["clients"]["tech"].post("/field/send/", body, content_type="application/json")
    assert response.status_code == 400 and response.json()["status"] == "refused"
    assert counts() == (0, 0)


@pytest.mark.django_db(transaction=True)
def test_two_sends_of_one_entry_at_once_make_one_record(field):
    """The tablet's retry racing its first send: both reach the server together, one record results."""
    post = entry_data(field["standard"])
    for _ in range(4):
        cid = uuid.uuid4()
        statuses = send_twice_at_once(field["users"]["tech"], lambda client: send(client, cid, field["meters"]["soon"].tag, post))
        if sorted(statuses) == [503, 503]:
            # on SQLite both may find the database locked and be told to send again (kept on the tablet);
            # the tablet's next send then saves it, once
            statuses = [201, 503] if send(field["clients"]["tech"], cid, field["meters"]["soon"].tag, post).status_code == 201 else statuses
        assert CalibrationEvent.objects.filter(client_id=cid).count() == 1
        # one saved it; the other found it (200) or, on SQLite, was told to send again (503, kept on the tablet)
        assert sorted(statuses) in ([200, 201], [201, 503]), statuses
        assert send(field["clients"]["tech"], cid, field["meters"]["soon"].tag, post).status_code == 200
        assert CalibrationEvent.objects.filter(client_id=cid).count() == 1
    assert counts() == (4, 20)


def test_the_kit_holds_the_due_entry_pages_the_account_may_open(field):
    kit = field["clients"]["tech"].get("/field/kit.json").json()
    assert kit["owner"] == str(field["users"]["tech"].pk)
    # never calibrated, overdue, due within the coming weeks; not the one due in 200 days, not the removed one
    due = ["FT-OFF-4", "FT-OFF-2", "FT-OFF-1"]
    assert sorted(kit["pages"]) == sorted(["/field/", "/field/queue/"] + [f"/positions/{tag}/calibrate/" for tag in due]
                                          + [f"/positions/{tag}/maintain/" for tag in due])  # each kind's pages
    assert [p for p in kit["pages"] if p.endswith("/calibrate/")] == [f"/positions/{tag}/calibrate/" for tag in due]
    assert kit["assets"] == ["/static/site.css", "/static/offline/field.js"]
    for url in kit["pages"]:
        assert field["clients"]["tech"].get(url).status_code == 200, url
    other_site = Site.objects.create(name="Other site")
    assert field["clients"]["tech"].get(f"/field/kit.json?site={other_site.pk}").json()["pages"] == [
        "/field/", "/field/queue/"]
    # a reviewer does not enter calibrations: no entry page is kept for them
    assert field["clients"]["reviewer"].get("/field/kit.json").json()["pages"] == ["/field/", "/field/queue/"]
    page = field["clients"]["tech"].get("/field/").content.decode()
    assert "FT-OFF-1" in page and "FT-OFF-3" not in page and "FT-OFF-5" not in page


def test_service_worker_and_manifest_are_served_from_the_root(field):
    anonymous = Client()
    worker = anonymous.get("/sw.js")
    assert worker.status_code == 200 and worker["Content-Type"].startswith("application/javascript")
    assert worker["Cache-Control"] == "no-cache"
    assert b'const KIT = "quenby-kit"' in worker.content
    manifest = anonymous.get("/manifest.webmanifest")
    assert manifest.status_code == 200 and manifest["Content-Type"] == "application/manifest+json"
    assert manifest.json()["start_url"] == "/field/" and manifest.json()["display"] == "standalone"
    assert anonymous.get(manifest.json()["icons"][0]["src"]).status_code in (200, 404)  # static served by runserver
    page = field["clients"]["tech"].get("/positions/").content.decode()
    assert '<link rel="manifest" href="/manifest.webmanifest">' in page and "/static/offline/field.js" in page


def test_the_tablet_checks_say_what_the_server_says(field):
    device = field["meters"]["soon"]
    rules = entry_rules(device)
    assert set(rules["required"]) >= {"ev-performed_on", "ev-reference_standards", "ev-procedure",
                                      "ev-condition_received"}
    assert "ev-contractor" not in rules["required"]  # the logged-in technician is the performer
    assert rules["required"]["ev-reference_standards"] == "Choose the reference standard used."
    assert (rules["range_min"], rules["range_max"]) == (0, 40)
    for value in (41, 55, 1000.5):
        row = PointRowForm({"nominal_pct": "50", "reference_value": str(value), "indicated_value": str(value)},
                           device=device)
        assert not row.is_valid()
        assert rules["messages"]["outside_range"].replace("{value}", f"{value:g}") == row.errors["reference_value"][0]
    assert rules["messages"]["reference_required"] == "Enter the reference flow."
    assert rules["messages"]["indicated_required"] == "Enter the meter's indication."
    assert rules["messages"]["negative"] == "The reference flow cannot be negative."
    assert rules["messages"]["zero_of_reading"] == "A % of reading error needs a reference flow above zero."
    # the entry page carries them for the tablet
    page = field["clients"]["tech"].get(f"/positions/{device.tag}/calibrate/").content.decode()
    assert 'id="offline-entry"' in page and '"target": "FT-OFF-1"' in page and '"kind": "calibration"' in page


def test_another_kind_is_added_by_registering_its_handler(field, monkeypatch):
    """How maintenance (or any kind) joins: a handler registered by name; the endpoint needs nothing else."""
    calls = []

    class Logbook:
        name = "logbook"
        permission = "calibration.add_calibrationevent"

        def pages(self, user, devices):
            return [f"/logbook/{m.tag}/" for m in devices]

        def receive(self, user, client_id, target, data):
            calls.append((user.username, client_id, target, data.getlist("text")))
            if data.get("text") == "":
                raise kinds.Refused({"text": ["Write something."]})
            return kinds.Received(url=f"/logbook/{target}/", label=target, created=len(calls) == 1)

    monkeypatch.setitem(kinds._KINDS, "logbook", Logbook())
    tech, cid = field["clients"]["tech"], uuid.uuid4()
    assert send(tech, cid, "FT-OFF-1", {"text": "greased"}, kind="logbook").status_code == 201
    assert send(tech, cid, "FT-OFF-1", {"text": "greased"}, kind="logbook").status_code == 200
    refused = send(tech, uuid.uuid4(), "FT-OFF-1", {"text": ""}, kind="logbook")
    assert refused.status_code == 422 and refused.json()["errors"] == {"text": ["Write something."]}
    assert calls[0] == ("offtech", cid, "FT-OFF-1", ["greased"])
    assert "/logbook/FT-OFF-1/" in tech.get("/field/kit.json").json()["pages"]


def test_a_send_that_loses_the_race_returns_the_winners_record(field, monkeypatch):
    """The branch taken when another send of the same id is saved between the lookup and the insert: the unique
    client id refuses the second insert, its transaction is undone, and the first record is answered."""
    from offline.calibration_kind import CalibrationKind

    tech, device = field["clients"]["tech"], field["meters"]["soon"]
    cid = uuid.uuid4()
    post = entry_data(field["standard"])
    assert send(tech, cid, device.tag, post).status_code == 201
    winner = CalibrationEvent.objects.get()
    real_find = CalibrationKind.find
    misses = []

    def find_late(self, client_id):
        if not misses:  # the first lookup runs before the other send's commit
            misses.append(client_id)
            return None
        return real_find(self, client_id)

    monkeypatch.setattr(CalibrationKind, "find", find_late)
    again = send(tech, cid, device.tag, post)
    assert misses == [cid]
    assert again.status_code == 200 and again.json()["url"] == winner.get_absolute_url()
    assert counts() == (1, 5)
