"""A repeat recompute with nothing changed writes no row (issue 32): the stored fields are compared first.

On PostgreSQL every rewritten row leaves a dead row and index entries behind; a nightly recompute that changes
nothing should cost a read, not a rewrite of the fleet.
"""
import pytest
from django.db import connection
from django.test.utils import CaptureQueriesContext

from scheduling.fleet import UPDATED_FIELDS, recompute_due_dates
from plant.models import Device


def meter_updates(queries):
    table = Device._meta.db_table
    # an executemany is logged as "N times: UPDATE ..."
    return [q["sql"] for q in queries if "UPDATE " in q["sql"].upper() and table in q["sql"]]


@pytest.mark.django_db
def test_a_repeat_recompute_writes_no_row_and_a_change_writes_one(demo_maintenance):
    recompute_due_dates()
    before = {m.pk: tuple(getattr(m, f) for f in UPDATED_FIELDS) for m in Device.objects.all()}
    with CaptureQueriesContext(connection) as repeat:
        recompute_due_dates()
    assert meter_updates(repeat.captured_queries) == []
    assert {m.pk: tuple(getattr(m, f) for f in UPDATED_FIELDS) for m in Device.objects.all()} == before

    # one stored field made stale: that row, and only it, is written back to what the recompute gives
    device = Device.objects.filter(last_calibrated__isnull=False).order_by("pk").first()
    Device.objects.filter(pk=device.pk).update(next_due_date=None, drift_status="flat")
    with CaptureQueriesContext(connection) as repair:
        recompute_due_dates()
    updates = meter_updates(repair.captured_queries)
    assert len(updates) == 1
    device.refresh_from_db()
    assert tuple(getattr(device, f) for f in UPDATED_FIELDS) == before[device.pk]
