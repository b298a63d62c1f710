"""Backup and restore (plant/backups.py): the photos travel with the records, a restore goes only into an empty
database and media folder, and a hand-edited, truncated or corrupt backup is refused whole, in one sentence per
problem naming the file, the record and the field, with nothing left behind."""
import datetime as dt
import io
import json
import os
import zipfile
from pathlib import Path

import pytest
from django.apps import apps
from django.contrib.auth.models import Group, User
from django.core.management import CommandError, call_command

from calibration.models import CalibrationEvent, ReferenceStandard
from ledger import chain, registry
from ledger.models import LedgerEntry, VerificationRun
from maintenance.models import MaintenancePhoto, MaintenanceRecord
from plant import backups
from tests.helpers import build_world, png, run_manage

pytestmark = pytest.mark.django_db(transaction=True)  # flush and restore need the database's own transactions


def files_under(folder):
    return sorted(str(p.relative_to(folder)) for p in Path(folder).rglob("*") if p.is_file())


@pytest.fixture
def backed_up(settings, tmp_path):
    """A plant with every kind of signed record backed up, then a new empty database and an empty media folder."""
    settings.MEDIA_ROOT = tmp_path / "media-before"
    world = build_world()
    photos = {p.pk: (p.image.name, p.image.read()) for p in MaintenancePhoto.objects.all()}
    path = tmp_path / "quenby-backup.zip"
    call_command("backup", str(path), stdout=io.StringIO())
    call_command("flush", interactive=False, verbosity=0)
    settings.MEDIA_ROOT = tmp_path / "media-after"
    return {"world": world, "photos": photos, "path": path, "media": tmp_path / "media-after"}


def edited(backup, change, name="edited.zip", photo=None):
    """A copy of the backup with its records passed through change(rows) (and one photo's bytes replaced)."""
    source = backup["path"]
    target = source.with_name(name)
    with zipfile.ZipFile(source) as old, zipfile.ZipFile(target, "w") as new:
        for info in old.infolist():
            data = old.read(info)
            if info.filename == backups.DATA:
                rows = json.loads(data)
                change(rows)
                data = json.dumps(rows).encode()
            elif photo and info.filename == backups.MEDIA + photo[0]:
                data = photo[1]
            new.writestr(info, data)
    return target


def row(rows, model, pk):
    return next(r for r in rows if r["model"] == model and r["pk"] == pk)["fields"]


def assert_nothing_restored(backup):
    assert backups.tables_with_rows() == []
    assert not backup["media"].exists() or not any(backup["media"].iterdir())  # no file, no folder left behind
    assert Group.objects.filter(name="technician").exists()  # migrate's role groups stay until a restore succeeds


def refusal(path):
    with pytest.raises(CommandError) as caught:
        call_command("restore", str(path), stdout=io.StringIO())
    return str(caught.value)


# Round trip -------------------------------------------------------------------------------------------------
def test_photos_round_trip_onto_an_empty_database_and_media_folder(backed_up):
    assert not backed_up["media"].exists()
    call_command("restore", str(backed_up["path"]), stdout=io.StringIO())
    restored = {p.pk: (p.image.name, p.image.read()) for p in MaintenancePhoto.objects.all()}
    assert restored == backed_up["photos"] and len(restored) == 2
    assert files_under(backed_up["media"]) == sorted(name for name, _ in backed_up["photos"].values())
    assert MaintenanceRecord.objects.get(pk=backed_up["world"]["maintenance"].pk).is_signed
    assert chain.verify() == [] and VerificationRun.objects.latest().ok
    # the restored chain is the backed-up one, not a new one
    assert LedgerEntry.objects.count() == 3 and not LedgerEntry.objects.filter(kind=registry.NOTE).exists()


def test_project_tables_are_found_from_the_app_registry():
    found = {m._meta.label_lower for m in backups.project_models()}
    ours = {m._meta.label_lower for label in ("plant", "calibration", "maintenance", "ledger")
            for m in apps.get_app_config(label).get_models(include_auto_created=True)}
    assert ours <= found
    # the audit trail and the tables linking records are the project's too (the standards of a calibration are
    # linked through a model of its own); installed packages' are not
    assert {"calibration.historicalcalibrationevent", "calibration.standardlink",
            "calibration.historicalcalibrationevent_reference_standards"} <= found
    assert not {"auth.user", "auth.group", "axes.accessattempt"} & found


@pytest.mark.parametrize("make", ["superuser", "standard", "verification run"])
def test_refuses_a_database_holding_any_row_or_any_user(backed_up, make):
    if make == "superuser":
        User.objects.create_superuser("root", password="a-long-enough-password")
    elif make == "standard":
        ReferenceStandard.objects.create(identification="RS-X", description="ref", range_max=50,
                                         certificate_number="C-X", due_date=dt.date(2099, 1, 1),
                                         expanded_uncertainty=0.1)
    else:
        VerificationRun.objects.create(ok=True)
    message = refusal(backed_up["path"])
    assert message.startswith("The database is not empty") and "\n" not in message
    assert {"superuser": "auth.user", "standard": "calibration.referencestandard",
            "verification run": "ledger.verificationrun"}[make] in message


def test_refuses_files_already_in_the_media_folder_and_leaves_them(backed_up):
    name, data = next(iter(backed_up["photos"].values()))
    existing = backed_up["media"] / name
    existing.parent.mkdir(parents=True)
    existing.write_bytes(b"someone else's file")
    message = refusal(backed_up["path"])
    assert f"{backed_up['path']}: record maintenance.maintenancephoto" in message
    assert f"field image: the file {name} is already in the media folder" in message
    assert existing.read_bytes() == b"someone else's file" and files_under(backed_up["media"]) == [name]
    assert backups.tables_with_rows() == []


# Hand-edited backups ----------------------------------------------------------------------------------------
def signed_notes(rows, w):
    row(rows, "calibration.calibrationevent", w["signed"].pk)["notes"] = "Zero and span adjusted."


def signed_signer(rows, w):
    row(rows, "calibration.calibrationevent", w["signed"].pk)["signed_by"] = "A. Nother"


def signed_point(rows, w):
    point = next(r for r in rows if r["model"] == "calibration.calibrationpoint"
                 and r["fields"]["event"] == w["signed"].pk)
    point["fields"]["indicated_value"] += 0.5


def maintenance_minutes(rows, w):
    row(rows, "maintenance.maintenancerecord", w["maintenance"].pk)["minutes_spent"] = 5


def draft_signed_without_signer(rows, w):
    row(rows, "calibration.calibrationevent", w["draft"].pk)["state"] = "signed"


def invented_principle(rows, w):
    row(rows, "plant.device", w["device"].pk)["principle"] = "perpetual_motion"


def negative_mpe(rows, w):
    row(rows, "plant.device", w["device"].pk)["mpe_value"] = -0.5


def text_in_a_number(rows, w):
    point = next(r for r in rows if r["model"] == "calibration.calibrationpoint")
    point["fields"]["reference_value"] = "plenty"


def missing_link(rows, w):
    point = next(r for r in rows if r["model"] == "calibration.calibrationpoint")
    point["fields"]["event"] = 987654


def escaping_file_name(rows, w):
    photo = next(r for r in rows if r["model"] == "maintenance.maintenancephoto")
    photo["fields"]["image"] = "../../outside.png"


EDITS = [
    (signed_notes, lambda w: f"calibration {w['signed'].pk} no longer matches what was signed"),
    (signed_signer, lambda w: f"calibration {w['signed'].pk} no longer matches what was signed"),
    (signed_point, lambda w: f"calibration {w['signed'].pk} no longer matches what was signed"),
    (maintenance_minutes, lambda w: f"maintenance record {w['maintenance'].pk} no longer matches what was signed"),
    (draft_signed_without_signer, lambda w: f"record calibration.calibrationevent {w['draft'].pk}, field signed_by: "
                                            "A signed record must say who signed it and when."),
    (invented_principle, lambda w: f"record plant.device {w['device'].pk}, field principle: Value 'perpetual_motion' "
                                   "is not a valid choice."),
    (negative_mpe, lambda w: f"record plant.device {w['device'].pk}, field mpe_value: MPE must be greater than zero."),
    (text_in_a_number, lambda w: "field reference_value: “plenty” value must be a float."),
    (missing_link, lambda w: "field event: it names calibration.calibrationevent 987654, which the backup does not "
                             "hold."),
    (escaping_file_name, lambda w: "field image: the file name '../../outside.png' is not a plain path inside the "
                                   "media folder."),
]


@pytest.mark.parametrize("change,expected", EDITS, ids=[e[0].__name__ for e in EDITS])
def test_hand_edited_backup_is_refused_whole(backed_up, change, expected):
    w = backed_up["world"]
    path = edited(backed_up, lambda rows: change(rows, w))
    message = refusal(path)
    assert expected(w) in message, message
    for sentence in message.splitlines():
        assert sentence.startswith(f"{path}: ") and sentence.endswith(".") and "Traceback" not in sentence
    assert_nothing_restored(backed_up)
    # the untouched backup still restores afterwards: nothing of the refused one was left in the way
    call_command("restore", str(backed_up["path"]), stdout=io.StringIO())
    assert CalibrationEvent.objects.get(pk=w["signed"].pk).notes == w["signed"].notes


def test_a_photo_changed_in_the_backup_is_refused(backed_up):
    w = backed_up["world"]
    name = next(iter(backed_up["photos"].values()))[0]
    message = refusal(edited(backed_up, lambda rows: None, photo=(name, png((0, 0, 0)))))
    assert f"maintenance record {w['maintenance'].pk} no longer matches what was signed" in message
    assert f"(record calibration.calibrationevent" not in message
    assert_nothing_restored(backed_up)


def test_truncated_or_corrupt_backups_are_one_sentence(backed_up, monkeypatch, capsys, tmp_path):
    whole = backed_up["path"].read_bytes()
    cut = tmp_path / "cut.zip"
    cut.write_bytes(whole[: len(whole) // 2])
    message = refusal(cut)
    assert message == (f"{cut} is damaged or cut short: the archive cannot be read (File is not a zip file).")
    with zipfile.ZipFile(backed_up["path"]) as archive:
        data = archive.read(backups.DATA)
    cut_json = tmp_path / "cut.json"
    cut_json.write_bytes(data[: len(data) // 3])
    message = refusal(cut_json)
    assert message.startswith(f"{cut_json} is damaged or cut short: its data stops being valid JSON at line ")
    assert "\n" not in message
    noise = tmp_path / "noise.json"
    noise.write_bytes(os.urandom(2000))
    assert "\n" not in refusal(noise) and refusal(noise).startswith(f"{noise} is ")
    # as the command line shows it: one line, exit status 1, no traceback
    assert run_manage(monkeypatch, "restore", str(cut)) == 1
    err = capsys.readouterr().err
    assert err.strip() == f"CommandError: {cut} is damaged or cut short: the archive cannot be read (File is not a zip file)."
    assert refusal(tmp_path / "nowhere.zip") == f"{tmp_path / 'nowhere.zip'}: there is no such file."
    assert_nothing_restored(backed_up)


def test_an_old_plain_json_backup_still_restores_and_its_records_are_sealed(settings, tmp_path):
    settings.MEDIA_ROOT = tmp_path / "media"
    world = build_world()
    old = tmp_path / "old-backup.json"
    # what `backup` wrote before archives and the chain: plain JSON, the photos copied beside it by hand
    call_command("dumpdata", natural_foreign=True, exclude=backups.EXCLUDED + ["ledger"], indent=1,
                 output=str(old), verbosity=0)
    call_command("flush", interactive=False, verbosity=0)
    settings.MEDIA_ROOT = tmp_path / "media-empty"
    message = refusal(old)
    assert "field image: the file maintenance/" in message and "is neither in this backup" in message
    assert_nothing_restored({"media": tmp_path / "media-empty"})
    settings.MEDIA_ROOT = tmp_path / "media"  # the copied folder
    call_command("restore", str(old), stdout=io.StringIO())
    assert chain.verify() == []
    note = LedgerEntry.objects.get(kind=registry.NOTE)
    assert "were sealed on restoring old-backup.json, a backup written before the record chain" in note.note
    assert MaintenanceRecord.objects.get(pk=world["maintenance"].pk).photos.count() == 2
