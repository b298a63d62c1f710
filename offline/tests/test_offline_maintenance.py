"""Maintenance records through the offline send endpoint: the client id saves a record once (again, and two sends
at once), a bad value is refused at its field with nothing saved, the kit holds the maintenance pages, and the
entry page carries the offline hooks and the note on photos. Runs on SQLite and PostgreSQL like the suite."""
import json
import uuid

import pytest
from django.test import Client

from maintenance.models import MaintenancePhoto, MaintenanceRecord
from offline.maintenance_kind import MaintenanceKind
from offline import kinds
from tests.helpers import send_twice_at_once, user_with_role
from tests.helpers import post_data, task_of

pytestmark = [pytest.mark.django_db, pytest.mark.small_world("maintenance")]


def pairs(post):
    return [[name, str(value)] for name, value in post.items()]


def send(client, client_id, post, target="FT-P1"):
    body = json.dumps({"kind": "maintenance", "id": str(client_id), "target": target, "data": pairs(post)})
    return client.post("/field/send/", body, content_type="application/json")


@pytest.fixture
def tech(plant):  # noqa: F811
    client = Client()
    client.force_login(plant["tech"])
    return client


def entry(plant, **extra):  # noqa: F811
    values = {"condition": "heavy_deposit", "action": "Pulled and washed the probe.", "minutes_spent": "35",
              "parts": "gasket", "notes": "kept offline", **extra}
    return post_data(task_of(plant["device"], "PITOT_PULL_CLEAN"), **values)


def test_the_kind_is_registered_with_the_real_permission(plant):  # noqa: F811
    kind = kinds.get("maintenance")
    assert isinstance(kind, MaintenanceKind) and kind.title == "Maintenance"
    assert plant["tech"].has_perm(kind.permission)
    assert kind.permission == "maintenance.add_maintenancerecord"


def test_the_same_id_twice_saves_one_record_with_its_values(plant, tech):  # noqa: F811
    cid = uuid.uuid4()
    first = send(tech, cid, entry(plant))
    assert first.status_code == 201, first.content
    record = MaintenanceRecord.objects.get()
    assert first.json() == {"status": "saved", "url": f"/maintenance/{record.pk}/",
                            "label": f"FT-P1 {record.performed_on}"}
    assert record.client_id == cid and record.device == plant["device"] and record.created_by == plant["tech"]
    assert (record.task.code, record.condition, record.action, record.parts, record.minutes_spent, record.notes,
            record.state) == ("PITOT_PULL_CLEAN", "heavy_deposit", "Pulled and washed the probe.", "gasket", 35,
                              "kept offline", "draft")
    for _ in range(2):
        again = send(tech, cid, entry(plant))
        assert again.status_code == 200
        assert again.json()["status"] == "received before" and again.json()["url"] == first.json()["url"]
    assert MaintenanceRecord.objects.count() == 1 and MaintenancePhoto.objects.count() == 0


@pytest.mark.parametrize("field, value, message", [
    ("minutes_spent", "0", "Enter the time spent in minutes (at least 1)."),
    ("minutes_spent", "ten", "Enter the time spent as whole minutes."),
    ("condition", "", "Choose what you found."),
    ("performed_on", "2999-01-01", "The date of the work is in the future."),
])
def test_a_bad_value_is_refused_at_its_field_and_nothing_saved(plant, tech, field, value, message):  # noqa: F811
    cid = uuid.uuid4()
    response = send(tech, cid, entry(plant, **{field: value}))
    assert response.status_code == 422
    assert response.json() == {"status": "refused", "errors": {field: [message]}}
    assert MaintenanceRecord.objects.count() == 0
    # corrected on the tablet and sent again with the same id: saved once
    assert send(tech, cid, entry(plant)).status_code == 201
    assert MaintenanceRecord.objects.get().client_id == cid


def test_an_unknown_meter_or_an_id_of_another_account_is_refused(plant, tech):  # noqa: F811
    gone = send(tech, uuid.uuid4(), entry(plant), target="FT-GONE")
    assert gone.status_code == 422 and gone.json()["errors"] == {
        "__all__": ["Position FT-GONE is not in the register any more."]}
    cid = uuid.uuid4()
    assert send(tech, cid, entry(plant)).status_code == 201
    other = Client()
    other.force_login(user_with_role("technician", "tech-other"))
    reused = send(other, cid, entry(plant))
    assert reused.status_code == 422 and "already used by another record" in reused.json()["errors"]["__all__"][0]
    assert MaintenanceRecord.objects.count() == 1


def test_a_reviewer_may_not_send_maintenance(plant):  # noqa: F811
    reviewer = Client()
    reviewer.force_login(user_with_role("reviewer", "rev-off"))
    assert send(reviewer, uuid.uuid4(), entry(plant)).status_code == 403
    assert MaintenanceRecord.objects.count() == 0


def send_logged_in(plant, cid):  # noqa: F811
    client = Client()
    client.force_login(plant["tech"])
    return send(client, cid, entry(plant))


@pytest.mark.django_db(transaction=True)
def test_two_sends_of_one_id_at_once_make_one_record(plant):  # noqa: F811
    for _ in range(4):
        cid = uuid.uuid4()
        statuses = send_twice_at_once(plant["tech"], lambda client: send(client, cid, entry(plant)))
        if sorted(statuses) == [503, 503]:
            # on SQLite both may find the database locked and be told to send again (kept on the tablet);
            # the tablet's next send then saves it, once
            statuses = [201, 503] if send_logged_in(plant, cid).status_code == 201 else statuses
        assert MaintenanceRecord.objects.filter(client_id=cid).count() == 1
        # one saved it; the other found it (200) or, on SQLite, was told to send again (503, kept on the tablet)
        assert sorted(statuses) in ([200, 201], [201, 503]), statuses
        again = Client()
        again.force_login(plant["tech"])
        assert send(again, cid, entry(plant)).status_code == 200
    assert MaintenanceRecord.objects.count() == 4


@pytest.mark.parametrize("error", ["integrity", "validation"])
def test_a_send_that_loses_the_race_returns_the_winners_record(plant, tech, monkeypatch, error):  # noqa: F811
    """Another send of the same id saved between the lookup and the insert: the second insert is refused by the
    unique client id (at the database, or by the model's own check when the winner had already committed)."""
    cid = uuid.uuid4()
    assert send(tech, cid, entry(plant)).status_code == 201
    winner = MaintenanceRecord.objects.get()
    real_find = MaintenanceKind.find
    misses = []

    def find_late(self, client_id):
        if not misses:
            misses.append(client_id)
            return None
        return real_find(self, client_id)

    monkeypatch.setattr(MaintenanceKind, "find", find_late)
    if error == "integrity":
        real_full_clean = MaintenanceRecord.full_clean
        monkeypatch.setattr(MaintenanceRecord, "full_clean",
                            lambda self, *a, **k: real_full_clean(self, validate_unique=False))
    again = send(tech, cid, entry(plant))
    assert misses == [cid]
    assert again.status_code == 200 and again.json()["url"] == winner.get_absolute_url()
    assert MaintenanceRecord.objects.count() == 1


def test_the_kit_and_the_entry_page_carry_maintenance(plant, tech):  # noqa: F811
    from django.utils import timezone
    import datetime as dt

    from plant.models import Device

    Device.objects.filter(pk=plant["device"].pk).update(next_due_date=timezone.localdate() + dt.timedelta(days=7))
    assert "/positions/FT-P1/maintain/" in tech.get("/field/kit.json").json()["pages"]
    page = tech.get("/positions/FT-P1/maintain/")
    html = page.content.decode()
    assert '<input type="hidden" name="offline-kind" value="maintenance">' in html
    assert "sent without photos" in html
    config = page.context["config"]
    assert config["kind"] == "maintenance" and config["target"] == "FT-P1"
    rules = config["rules"]
    assert rules["date_field"] == "performed_on"
    assert rules["required"] == {"performed_on": "Enter the date of the work.", "task": "Choose the task you did.",
                                 "condition": "Choose what you found.", "action": "Say what you did.",
                                 "minutes_spent": "Enter the time spent in minutes."}
    assert rules["labels"]["minutes_spent"] == "Time spent (minutes)"
