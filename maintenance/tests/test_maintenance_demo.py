"""The invented demo maintenance history shows the loop (fixtures/demo_maintenance.json, built by
build_demo_maintenance): the pitot in slimy cooling water shortened and fouled, the syrup magmeter lengthened."""
import datetime as dt

import pytest
from django.core.management import call_command

from maintenance.models import MaintenanceRecord, MaintenanceTask
from plant.models import Device

pytestmark = pytest.mark.django_db


@pytest.fixture
def demo(demo_maintenance):
    call_command("recompute_due_dates", verbosity=0)


def test_pitot_in_cooling_water_shortened_fouled_and_failure_beside_it(demo, client):
    task = MaintenanceTask.objects.get(device__position__tag="FT-601", code="PITOT_PULL_CLEAN")
    # the duty says 90 d × 0.5 = 45 d; what was found brought it down (to the lower bound, 45/4 -> 11 d)
    assert task.start_days == 45 and task.frequency_days == 11
    assert MaintenanceRecord.objects.filter(task=task, condition="blocked").exists()
    assert MaintenanceRecord.objects.filter(task=task, condition__in=["blocked", "heavy_deposit"]).count() >= 3
    device = Device.objects.get(position__tag="FT-601")
    assert "MAINT_FOULED" in [f.code for f in device.findings()]
    body = client.get("/positions/FT-601/").content.decode()
    # pages show the finding in plain words (the code stays in exports)
    assert "Found fouled at inspection after inspection" in body and "3 of the last 4 inspections" in body
    assert "× 0.5 →" in body


def test_syrup_magmeter_found_clean_for_years_lengthened(demo, client):
    task = MaintenanceTask.objects.get(device__position__tag="FT-303", code="ELECTRODE_CLEAN")
    conditions = list(MaintenanceRecord.objects.filter(task=task).values_list("condition", flat=True))
    assert len(conditions) >= 5 and set(conditions) == {"clean"}
    # 135 d (180 × 0.75, sticky fluid) × 1.5 after each three cleans: 135 -> 203 -> 305 (202.5 and 304.5 half up)
    assert task.start_days == 135 and task.frequency_days == 305
    assert "3 times in a row: 203 d × 1.5 → 305 d." in client.get("/positions/FT-303/").content.decode()


def test_demo_records_are_signed_invented_and_walk_order_set(demo):
    assert not MaintenanceRecord.objects.exclude(state="signed").exists()
    assert MaintenanceRecord.objects.filter(performed_on__gt=dt.date(2026, 11, 30)).count() == 0
    from maintenance.models import WalkOrder

    assert WalkOrder.objects.count() == 7


def test_fixture_is_what_the_seeded_command_builds(demo_history, tmp_path):
    """fixtures/demo_maintenance.json is exactly the output of build_demo_maintenance (seeded, fixed dates)."""
    import json

    out = tmp_path / "rebuilt.json"
    call_command("build_demo_maintenance", output=str(out), verbosity=0)
    rebuilt = json.loads(out.read_text())
    committed = json.loads(open("fixtures/demo_maintenance.json").read())
    def canonical(rows):
        """Rows without their keys (a database's sequences may not restart): a record names its task by code."""
        tasks = {r["pk"]: (r["fields"]["device"], r["fields"]["code"]) for r in rows
                 if r["model"] == "maintenance.maintenancetask"}
        out = []
        for r in rows:
            fields = dict(r["fields"])
            if "task" in fields:
                fields["task"] = tasks[fields["task"]]
            out.append((r["model"], r["pk"] if r["model"] == "maintenance.walkorder" else None,
                        sorted(fields.items(), key=lambda kv: kv[0])))
        return sorted(out, key=repr)

    assert len(rebuilt) == len(committed)
    assert canonical(rebuilt) == canonical(committed)


def test_signed_demo_record_refuses_a_model_form_edit(demo_maintenance):
    from calibration.models import SignedRecordError
    from maintenance.forms import RecordForm

    record = MaintenanceRecord.objects.filter(device__position__tag="FT-601", condition="blocked").first()
    form = RecordForm(data={"performed_on": record.performed_on.isoformat(), "task": record.task_id,
                            "condition": "clean", "action": "changed", "minutes_spent": "5"},
                      instance=record, device=record.device)
    assert form.is_valid(), form.errors
    with pytest.raises(SignedRecordError):
        form.save()
    stored = MaintenanceRecord.objects.get(pk=record.pk)
    assert stored.condition == "blocked" and stored.action != "changed"
