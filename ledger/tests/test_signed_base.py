"""The one sign path (ledger/signed.py) and the engine that listens to it (scheduling/receivers.py): the listeners
run inside the signing transaction, a failure there leaves the record a draft and the chain untouched, a maintenance
sign-off retries SQLite's "locked" as a calibration's does, and the due dates follow without being called."""
import pytest
from django.db import OperationalError
from django.utils import timezone

from ledger.models import LedgerEntry
from ledger.signals import record_signed
from ledger.signed import SignedRecord, SignedRecordError
from maintenance.models import MaintenanceRecord, MaintenanceTask
from plant.installations import commission
from plant.models import Area, Fluid, Device, Site
from plant.signals import devices_changed

pytestmark = pytest.mark.django_db


@pytest.fixture
def record(tmp_path, settings):
    settings.MEDIA_ROOT = tmp_path / "media"
    area = Area.objects.create(site=Site.objects.create(name="Base site"), name="Utilities")
    cooling = Fluid.objects.create(name="Cooling water", phase="liquid", conductivity_us_cm=1800, biofouling=True)
    device = commission(tag="FT-B1", principle="averaging_pitot", area=area, fluid=cooling, line_size="DN200",
                       internal_diameter_mm=202.7, range_max=400, mpe_value=2.0, mpe_basis="pct_span",
                       wetted_material="316")
    task = MaintenanceTask.objects.get(device=device, code="PITOT_PULL_CLEAN")
    return MaintenanceRecord.objects.create(device=device, task=task, performed_on=timezone.localdate(),
                                            technician="T", condition="blocked", action="rodded", minutes_spent=30)


def test_a_failing_listener_leaves_the_record_a_draft_and_the_chain_as_it_was(record):
    entries = LedgerEntry.objects.count()

    def refuse(**kwargs):
        raise RuntimeError("listener down")

    record_signed.connect(refuse, dispatch_uid="test-refuse")
    try:
        with pytest.raises(RuntimeError, match="listener down"):
            record.sign(by="T")
    finally:
        record_signed.disconnect(dispatch_uid="test-refuse")
    assert MaintenanceRecord.objects.get(pk=record.pk).state == "draft"
    assert LedgerEntry.objects.count() == entries
    assert record.sign(by="T").state == "signed"  # and it signs once the listener is back to normal
    assert LedgerEntry.objects.count() == entries + 1


def test_the_task_due_date_follows_a_signed_record_without_being_called(record):
    task = record.task
    assert task.last_done is None
    record.sign(by="T")
    task.refresh_from_db()
    assert task.last_done == record.performed_on
    assert task.next_due_date == record.performed_on + timezone.timedelta(days=task.frequency_days)


@pytest.mark.django_db(transaction=True)  # a sign-off inside a caller's transaction is not retried
def test_a_maintenance_sign_off_retries_a_locked_database(record, monkeypatch):
    calls = []
    original = SignedRecord._sign_once

    def locked_once(self, by, role, at):
        calls.append(by)
        if len(calls) == 1:
            raise OperationalError("database is locked")
        return original(self, by, role, at)

    monkeypatch.setattr(SignedRecord, "_sign_once", locked_once)
    record.sign(by="T")
    assert len(calls) == 2 and MaintenanceRecord.objects.get(pk=record.pk).state == "signed"


def test_a_second_signer_is_told_who_signed(record):
    record.sign(by="First")
    again = MaintenanceRecord.objects.get(pk=record.pk)
    again.state = "draft"  # as a page loaded before the first signature would hold it
    with pytest.raises(SignedRecordError, match=f"Maintenance record {record.pk} is already signed by First"):
        again.sign(by="Second")


def test_devices_changed_recomputes_the_devices_named(record):
    device = record.device
    Device.objects.filter(pk=device.pk).update(due_rationale={}, next_due_date=None)
    devices_changed.send(sender=Device, devices=Device.objects.filter(pk=device.pk))
    device.refresh_from_db()
    assert device.due_rationale["note"] == "No signed calibration yet: due now."
