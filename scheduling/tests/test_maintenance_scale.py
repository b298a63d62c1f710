"""make_fleet's maintenance history, and the bulk maintenance recompute held to the per-task reference (the pure
loop of maintenance/loop.py applied task by task) and to the per-meter fouling finding."""
import datetime as dt
from collections import Counter

import pytest
from django.core.management import call_command

from maintenance import loop
from scheduling.maintenance_due import meter_evidence, recompute_maintenance
from maintenance.models import MaintenanceRecord, MaintenanceTask
from plant.models import Device

pytestmark = pytest.mark.django_db

STORED = ["frequency_days", "last_done", "last_condition", "next_due_date"]


def reference(task):
    """The per-task reference: the pure loop over the task's signed visits, oldest first."""
    visits = list(MaintenanceRecord.objects.filter(task=task, state="signed").order_by("performed_on", "id")
                  .values_list("performed_on", "condition"))
    frequency = loop.next_frequency(task.start_days, [c for _, c in visits]).frequency_days
    last = visits[-1] if visits else (None, "")
    return {"frequency_days": frequency, "last_done": last[0], "last_condition": last[1],
            "next_due_date": loop.next_due(last[0], frequency, task.since)}


def stored():
    return {t["id"]: {k: t[k] for k in STORED} for t in MaintenanceTask.objects.filter(active=True).values("id", *STORED)}


def test_bulk_maintenance_recompute_equals_the_per_task_reference():
    call_command("make_fleet", meters=50, seed=21, verbosity=0)
    assert MaintenanceRecord.objects.filter(state="signed").count() > 50 * 3 * 3
    # forget what make_fleet stored, recompute in bulk, compare with the reference task by task
    MaintenanceTask.objects.update(frequency_days=1, last_done=None, last_condition="", next_due_date=dt.date(2000, 1, 1))
    evidence = recompute_maintenance()
    bulk = stored()
    tasks = list(MaintenanceTask.objects.filter(active=True))
    assert len(bulk) == len(tasks) >= 50 * 2
    for task in tasks:
        assert bulk[task.pk] == reference(task), task
    # the loop moved frequencies both ways in this fleet
    moved = Counter((row["frequency_days"] > task.start_days) - (row["frequency_days"] < task.start_days)
                    for task in tasks for row in [bulk[task.pk]])
    assert moved[1] and moved[-1], moved
    # the fouling finding: bulk equals the one-meter read, and some meters have it
    for device_id in Device.objects.values_list("pk", flat=True):
        assert [f.reason for f in evidence.get(device_id, [])] == [f.reason for f in meter_evidence(device_id)]
    assert evidence
    # a second recompute writes nothing (only changed rows are written)
    from django.db import connection
    from django.test.utils import CaptureQueriesContext

    with CaptureQueriesContext(connection) as queries:
        recompute_maintenance()
    assert not [q for q in queries.captured_queries if q["sql"].lstrip().upper().startswith("UPDATE")]


def test_one_meter_recompute_touches_only_its_tasks():
    call_command("make_fleet", meters=10, seed=22, verbosity=0)
    before = stored()
    device = Device.objects.order_by("pk").first()
    mine = set(MaintenanceTask.objects.filter(device=device).values_list("pk", flat=True))
    MaintenanceTask.objects.update(next_due_date=dt.date(2000, 1, 1))
    recompute_maintenance(Device.objects.filter(pk=device.pk).values("pk"))
    after = stored()
    for pk, row in after.items():
        if pk in mine:
            assert row == before[pk]
        else:
            assert row["next_due_date"] == dt.date(2000, 1, 1)
