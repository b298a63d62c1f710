"""The record chain (ledger/): sealing at signing, `manage.py verify_records` naming what was altered behind the
application's back, the migration that seals older records, the demo's fixtures, and two sign-offs at once."""
import datetime as dt
import io
import shlex
import threading
from pathlib import Path

import pytest
from django.core.management import CommandError, call_command
from django.db import connection
from django.db.migrations.executor import MigrationExecutor
from django.test import Client
from django.utils import timezone

from calibration.models import CalibrationEvent, CalibrationPoint, Countersignature
from ledger import canonical, chain, content, registry
from ledger.models import ContentLayout, LedgerEntry, LedgerHead, LedgerRowError, VerificationRun
from maintenance.models import MaintenanceRecord
from plant.installations import commission
from tests.helpers import build_world, draft_calibration, draft_maintenance, png, run_manage, user_with_role

pytestmark = pytest.mark.django_db


@pytest.fixture
def world(db, settings, tmp_path):
    settings.MEDIA_ROOT = tmp_path / "media"
    return build_world()


def raw_sql(sql, params):
    with connection.cursor() as cursor:
        cursor.execute(sql, params)


# Sealing at signing ------------------------------------------------------------------------------------------
def test_each_signing_appends_one_entry_chained_to_the_last(world):
    entries = list(LedgerEntry.objects.order_by("sequence"))
    assert [(e.kind, e.record_id) for e in entries] == [
        ("calibration", world["signed"].pk), ("countersignature", world["counter"].pk),
        ("maintenance", world["maintenance"].pk)]
    previous = canonical.GENESIS
    for entry in entries:
        assert entry.previous_hash == previous
        previous = entry.chain_hash
    head = LedgerHead.objects.get()
    assert (head.length, head.last_hash) == (3, previous)
    assert chain.verify() == []


def test_content_covers_every_concrete_field_parts_links_and_photo_bytes(world):
    kind = registry.get("calibration")
    layout = content.layout_of(kind)
    assert layout["fields"] == sorted(f.name for f in CalibrationEvent._meta.concrete_fields)
    assert layout["parts"]["points"]["fields"] == sorted(f.name for f in CalibrationPoint._meta.concrete_fields)
    assert layout["many_to_many"] == ["reference_standards"]
    record = content.contents(content.layout_of(registry.get("maintenance")), [world["maintenance"].pk])
    photos = record[world["maintenance"].pk]["parts"]["photos"]
    import hashlib
    stored = [p.image.read() for p in world["maintenance"].photos.order_by("pk")]
    assert [p["image"]["sha256"] for p in photos] == [hashlib.sha256(b).hexdigest() for b in stored]


def test_canonical_json_is_sorted_compact_utf8_and_floats_round_trip():
    value = {"b": 0.1 + 0.2, "a": "µ°C", "c": [1e-7, 2.0], "d": None}
    text = canonical.dumps(value).decode("utf-8")
    assert text == '{"a":"µ°C","b":0.30000000000000004,"c":[1e-07,2.0],"d":null}'
    import json
    assert json.loads(text)["b"] == 0.1 + 0.2  # the exact double comes back
    # inside JSON values a whole float is an integer (jsonb may return 1e20 as one)
    assert canonical.json_value({"x": [1e20, 2.5]}) == {"x": [10 ** 20, 2.5]}
    assert canonical.number(float("nan")) == "nan"


def test_ledger_entries_are_append_only(world):
    entry = LedgerEntry.objects.first()
    entry.note = "edited"
    with pytest.raises(LedgerRowError):
        entry.save()
    with pytest.raises(LedgerRowError):
        entry.delete()
    with pytest.raises(LedgerRowError):
        LedgerEntry.objects.filter(pk=entry.pk).update(note="edited")
    with pytest.raises(LedgerRowError):
        LedgerEntry.objects.all().delete()
    assert LedgerEntry.objects.get(pk=entry.pk).note == ""


# Verification ------------------------------------------------------------------------------------------------
def test_intact_database_exits_zero_and_is_recorded(world, monkeypatch, capsys):
    assert run_manage(monkeypatch, "verify_records") == 0
    assert "Record chain intact: 3 entries" in capsys.readouterr().out
    run = VerificationRun.objects.get()
    assert run.ok and run.problems == [] and run.records_named == 0


def test_alterations_behind_the_applications_back_are_each_named(world, monkeypatch, capsys):
    point = world["signed"].points.order_by("pk").first()
    raw_sql("UPDATE calibration_calibrationpoint SET indicated_value = %s WHERE id = %s",
            [point.indicated_value + 0.01, point.pk])
    raw_sql("UPDATE maintenance_maintenancerecord SET notes = %s WHERE id = %s",
            ["Nothing found.", world["maintenance"].pk])
    raw_sql("UPDATE calibration_countersignature SET name = %s WHERE id = %s", ["Someone Else", world["counter"].pk])
    assert run_manage(monkeypatch, "verify_records") == 1
    err = capsys.readouterr().err
    assert f"calibration {world['signed'].pk} no longer matches what was signed" in err
    assert f"maintenance record {world['maintenance'].pk} no longer matches what was signed" in err
    assert f"countersignature {world['counter'].pk} no longer matches what was signed" in err
    assert "3 problem(s) found, 3 record(s) named" in err
    run = VerificationRun.objects.get()
    assert not run.ok and run.records_named == 3 and len(run.problems) == 3


def test_photo_bytes_changed_on_disk_are_named(world):
    photo = world["maintenance"].photos.first()
    Path(photo.image.path).write_bytes(png((0, 0, 0)))
    assert [p.text for p in chain.verify()] == [
        f"maintenance record {world['maintenance'].pk} no longer matches what was signed (entry 3)."]


def test_missing_gone_and_cut_records_and_broken_links_are_named(world):
    draft = world["draft"]
    # a draft made "signed" by SQL is not in the chain
    raw_sql("UPDATE calibration_calibrationevent SET state = 'signed', signed_by = 'X' WHERE id = %s", [draft.pk])
    # a sealed countersignature deleted: its entry's record is gone
    raw_sql("DELETE FROM calibration_countersignature WHERE id = %s", [world["counter"].pk])
    # the first entry's stored hash altered: its link breaks, and the entry no longer matches what it states
    raw_sql("UPDATE ledger_ledgerentry SET chain_hash = %s WHERE sequence = 1", ["f" * 64])
    texts = [p.text for p in chain.verify()]
    assert f"calibration {draft.pk} is signed but not in the chain." in texts
    assert (f"countersignature {world['counter'].pk} is gone: entry 2 seals a record that no longer exists."
            in texts)
    assert f"Entry 1 (calibration {world['signed'].pk}) was altered: its chain hash no longer matches what it states." \
        in texts
    assert f"Broken link at entry 2 (countersignature {world['counter'].pk}): it does not follow the entry before it." \
        in texts
    # entries cut from the end of the chain (and the head left as it was) are noticed
    raw_sql("DELETE FROM ledger_ledgerentry WHERE sequence = 3", [])
    assert any("The chain ends at entry 2, but its head records 3 entries" in p.text for p in chain.verify())


def test_a_record_sealed_before_a_field_existed_keeps_its_hash(world):
    """The entry's layout says which fields were hashed: a field added to the model later (a new layout from
    the next signing on) does not make older records fail, and is covered for records signed after it."""
    entry = LedgerEntry.objects.get(kind="calibration")
    older = dict(entry.layout.layout)
    older["fields"] = [f for f in older["fields"] if f != "deviations"]  # as if `deviations` came later
    layout = ContentLayout.objects.create(kind="calibration", digest=canonical.digest(older), layout=older)
    event = world["signed"]
    sealed_hash = content.content_hashes(older, [event.pk])[event.pk]
    raw_sql("DELETE FROM ledger_ledgerentry", [])
    raw_sql("UPDATE ledger_ledgerhead SET length = 0, last_hash = %s", [canonical.GENESIS])
    writer = chain._Writer(LedgerHead, LedgerEntry, LedgerHead.objects.get(), timezone.now())
    writer.add("calibration", event.pk, layout, sealed_hash)
    writer.flush()
    raw_sql("UPDATE calibration_calibrationevent SET deviations = 'added later' WHERE id = %s", [event.pk])
    assert [p.text for p in chain.verify() if p.kind == "calibration"] == []
    raw_sql("UPDATE calibration_calibrationevent SET notes = 'changed' WHERE id = %s", [event.pk])
    assert [p.text for p in chain.verify() if p.kind == "calibration"] == [
        f"calibration {event.pk} no longer matches what was signed (entry 1)."]


def test_review_shows_a_failed_verification_in_words(world):
    reviewer = Client()
    reviewer.force_login(world["reviewer"])
    assert "Record verification failed" not in reviewer.get("/review/").content.decode()
    raw_sql("UPDATE maintenance_maintenancerecord SET minutes_spent = 5 WHERE id = %s", [world["maintenance"].pk])
    raw_sql("UPDATE calibration_countersignature SET role = 'Nobody' WHERE id = %s", [world["counter"].pk])
    with pytest.raises(CommandError):
        call_command("verify_records", stderr=io.StringIO())
    page = reviewer.get("/review/").content.decode()
    assert 'id="verification-failed"' in page and 'role="alert"' in page
    assert "Record verification failed" in page
    assert "2 signed records no longer" in page and "manage.py verify_records" in page
    assert f"maintenance record {world['maintenance'].pk} no longer matches what was signed" in page
    # once the records are explained and a later run passes, the notice goes
    VerificationRun.objects.create(ok=True)
    assert "Record verification failed" not in reviewer.get("/review/").content.decode()


# Records signed before the chain, and the demo ---------------------------------------------------------------
@pytest.mark.django_db(transaction=True)
def test_migration_seals_earlier_records_in_signing_order_and_says_so(settings, tmp_path):
    settings.MEDIA_ROOT = tmp_path / "media"
    world = build_world()
    # a record signed later but dated earlier: the migration seals by signing time, then id
    early = draft_calibration(world["device"], world["standard"], world["tech"]).sign(
        by="Tess Tester", at=timezone.now() - dt.timedelta(days=30))
    executor = MigrationExecutor(connection)
    executor.migrate([("ledger", "0001_record_chain")])
    assert not LedgerEntry.objects.exists() and not LedgerHead.objects.exists()
    executor = MigrationExecutor(connection)
    executor.loader.build_graph()
    executor.migrate(executor.loader.graph.leaf_nodes())
    entries = list(LedgerEntry.objects.order_by("sequence"))
    assert [(e.kind, e.record_id) for e in entries[:-1]] == [
        ("calibration", early.pk), ("calibration", world["signed"].pk), ("countersignature", world["counter"].pk),
        ("maintenance", world["maintenance"].pk)]
    note = entries[-1]
    assert note.kind == registry.NOTE and note.record_id is None
    assert note.note == (f"The 4 signed records before this note (entries 1–4) were sealed by the migration "
                         f"ledger 0002 on {note.sealed_at:%Y-%m-%d}, not at their signing.")
    assert chain.verify() == []
    # records signed afterwards are sealed at their signing, after the note
    later = world["draft"]
    later.sign(by="Tess Tester")
    assert LedgerEntry.objects.order_by("-sequence").values_list("kind", "record_id").first() == \
        ("calibration", later.pk)
    assert chain.verify() == []


BEFORE_DEVICE = [("plant", "0015_meter_conformity_risk_fields"), ("calibration", "0017_standard_principle"),
                 ("maintenance", "0003_review_indexes"), ("ledger", "0002_seal_records_signed_before_the_ledger")]


@pytest.mark.django_db(transaction=True)
def test_records_sealed_before_meter_became_device_still_verify(settings, tmp_path):
    """The layouts kept with entries sealed before the rename name the field `meter`: read from `device` now, the
    hashes are the same bytes, and the chain verifies; records signed after it are sealed under `device`."""
    settings.MEDIA_ROOT = tmp_path / "media"
    world = build_world()
    executor = MigrationExecutor(connection)
    executor.migrate(BEFORE_DEVICE)
    old = executor.loader.project_state(BEFORE_DEVICE).apps
    # a calibration and a maintenance record signed and sealed on the schema before the rename
    Event, Record = old.get_model("calibration", "CalibrationEvent"), old.get_model("maintenance", "MaintenanceRecord")
    now = timezone.now()
    event = Event.objects.create(meter_id=world["device"].pk, performed_on=now.date(), technician="T",  # rename: keep
                                 procedure="p", condition_received="c", state="signed", signed_at=now, signed_by="T")
    old.get_model("calibration", "CalibrationPoint").objects.create(
        event=event, kind="as_found", nominal_pct=50, reference_value=20, indicated_value=20.02, error=0.1)
    record = Record.objects.create(meter_id=world["device"].pk, task_id=world["maintenance"].task_id,  # rename: keep
                                   performed_on=now.date(), technician="T", condition="clean", action="Looked.",
                                   minutes_spent=10, state="signed", signed_at=now, signed_by="T")
    chain.append("calibration", event.pk, old)
    chain.append("maintenance", record.pk, old)
    sealed_as = {kind: set(layout["fields"]) for kind, layout in ContentLayout.objects.values_list("kind", "layout")
                 if "meter" in layout["fields"]}  # rename: keep
    assert set(sealed_as) == {"calibration", "maintenance"}
    executor = MigrationExecutor(connection)
    executor.loader.build_graph()
    executor.migrate(executor.loader.graph.leaf_nodes())
    assert chain.verify() == []
    out = io.StringIO()
    call_command("verify_records", stdout=out)
    assert "Record chain intact" in out.getvalue()
    # records signed now are sealed under the field's name now
    later = world["draft"].sign(by="Tess Tester")
    entry = LedgerEntry.objects.get(kind="calibration", record_id=later.pk)
    assert "device" in entry.layout.layout["fields"] and "meter" not in entry.layout.layout["fields"]  # rename: keep
    assert chain.verify() == []
    # moving a record sealed before the rename to another device is still caught, through the renamed column
    other = commission(tag="FT-L2", principle="electromagnetic", area=world["device"].area,
                       fluid=world["device"].fluid, line_size="DN50", internal_diameter_mm=52.5, range_max=40,
                       mpe_value=0.5, wetted_material="316L")
    with connection.cursor() as cursor:
        cursor.execute("UPDATE calibration_calibrationevent SET device_id = %s WHERE id = %s", [other.pk, event.pk])
    problems = chain.verify()
    assert [(p.kind, p.record_id) for p in problems] == [("calibration", event.pk)]


def demo_steps():
    """The manage.py steps of scripts/demo after `migrate` (the test database is migrated already)."""
    steps = []
    for line in Path("scripts/demo").read_text().splitlines():
        words = shlex.split(line)
        if words[:2] == [".venv/bin/python", "manage.py"] and words[2] != "migrate":
            steps.append(words[2:])
    return steps


def test_demo_steps_leave_the_chain_intact(db):
    steps = demo_steps()
    assert [s[0] for s in steps] == ["loaddata", "recompute_due_dates", "create_demo_users"]
    for name, *args in steps:
        call_command(name, *args, stdout=io.StringIO())
    out = io.StringIO()
    call_command("verify_records", stdout=out)  # raises CommandError unless intact
    assert "Record chain intact" in out.getvalue()
    signed = (CalibrationEvent.objects.filter(state="signed").count()
              + MaintenanceRecord.objects.filter(state="signed").count())
    assert LedgerEntry.objects.exclude(kind=registry.NOTE).count() == signed > 1000
    note = LedgerEntry.objects.get(kind=registry.NOTE)
    assert f"The {signed} signed records before this note" in note.note and "sealed on loading" in note.note


def test_fixtures_loaded_one_after_another_chain_on(demo_maintenance):
    """The test fixtures load each file on its own: each load seals what it brought, chained after the last."""
    assert list(LedgerEntry.objects.filter(kind=registry.NOTE).values_list("sequence", flat=True)) == [
        CalibrationEvent.objects.filter(state="signed").count() + 1, LedgerEntry.objects.count()]
    assert chain.verify() == []


# Two at once -----------------------------------------------------------------------------------------------
ROUNDS = 12


def sign_at_once(actions):
    """Run each action in its own thread, released together; the errors, if any."""
    barrier = threading.Barrier(len(actions), timeout=60)
    failures = []

    def go(action):
        try:
            barrier.wait()
            action()
        except Exception as exc:
            failures.append(repr(exc))
        finally:
            connection.close()

    threads = [threading.Thread(target=go, args=(a,)) for a in actions]
    for t in threads:
        t.start()
    for t in threads:
        t.join(timeout=120)
    return failures


def assert_one_chain(expected_records):
    entries = list(LedgerEntry.objects.order_by("sequence").values_list("sequence", "kind", "record_id",
                                                                        "previous_hash", "chain_hash"))
    assert [e[0] for e in entries] == list(range(1, len(entries) + 1))
    previous = canonical.GENESIS
    for entry in entries:  # each entry follows the one before it: no two chained to the same predecessor
        assert entry[3] == previous
        previous = entry[4]
    assert sorted((e[1], e[2]) for e in entries) == sorted(expected_records)
    assert chain.verify() == []


@pytest.mark.django_db(transaction=True)
def test_two_calibrations_signed_at_once_chain_as_one(settings, tmp_path):
    settings.MEDIA_ROOT = tmp_path / "media"
    world = build_world()
    expected = [(e.kind, e.record_id) for e in LedgerEntry.objects.all()]
    for _ in range(ROUNDS):
        drafts = [draft_calibration(world["device"], world["standard"], world["tech"]) for _ in range(2)]
        # loaded first, as the sign-off view loads a draft before signing it
        failures = sign_at_once([lambda d=CalibrationEvent.objects.get(pk=d.pk): d.sign(by="Tess Tester")
                                 for d in drafts])
        assert failures == []
        expected += [("calibration", d.pk) for d in drafts]
    assert_one_chain(expected)


@pytest.mark.django_db(transaction=True)
def test_calibration_maintenance_and_countersignature_at_once_chain_as_one(settings, tmp_path):
    if connection.vendor == "sqlite":
        pytest.skip("SQLite refuses a second writer at once and only the calibration sign-off retries, so the "
                    "other two sign-offs would be refused rather than raced")
    settings.MEDIA_ROOT = tmp_path / "media"
    world = build_world()
    expected = [(e.kind, e.record_id) for e in LedgerEntry.objects.all()]
    for _ in range(ROUNDS):
        event = draft_calibration(world["device"], world["standard"], world["tech"]).sign(by="Tess Tester")
        expected.append(("calibration", event.pk))
        calibration = draft_calibration(world["device"], world["standard"], world["tech"])
        record = draft_maintenance(world["device"], world["tech"], photos=[png((1, 2, 3))])
        failures = sign_at_once([
            lambda: calibration.sign(by="Tess Tester"),
            lambda: record.sign(by="T"),
            lambda: Countersignature.objects.create(event=event, user=world["reviewer"], name="R", role="Reviewer"),
        ])
        assert failures == []
        expected += [("calibration", calibration.pk), ("maintenance", record.pk),
                     ("countersignature", Countersignature.objects.get(event=event).pk)]
    assert_one_chain(expected)


def test_the_admin_cannot_sign_past_sign_off(world):
    """Signing is sign()'s alone: the admin shows the signature fields of a draft but cannot set them."""
    admin = Client()
    admin.force_login(user_with_role("administrator", "admin-l"))
    for url in (f"/admin/calibration/calibrationevent/{world['draft'].pk}/change/",
                f"/admin/maintenance/maintenancerecord/{draft_maintenance(world['device'], world['tech']).pk}/change/"):
        page = admin.get(url)
        assert page.status_code == 200
        body = page.content.decode()
        assert 'name="state"' not in body and 'name="signed_by"' not in body and 'name="signed_at' not in body
