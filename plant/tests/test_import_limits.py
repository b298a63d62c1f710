"""Bounded uploads and the file kept between the dry run and the apply: each limit refused in one sentence naming
it and its setting (before the file is parsed), and a kept file readable by its uploader only."""
import io
import zipfile

import pandas as pd
import pytest
from django.core.files.uploadedfile import SimpleUploadedFile
from django.core.management import CommandError, call_command
from django.test import Client

from plant import importer, kept_uploads
from plant.models import Position
from tests.helpers import row

pytestmark = [pytest.mark.django_db, pytest.mark.small_world("import")]
URL = "/positions/import/"


@pytest.fixture(autouse=True)
def media(settings, tmp_path):
    settings.MEDIA_ROOT = tmp_path / "media"
    return settings.MEDIA_ROOT


def csv_bytes(rows):
    lines = [",".join(importer.METER_COLUMNS)] + [",".join(r[c] for c in importer.METER_COLUMNS) for r in rows]
    return ("\n".join(lines) + "\n").encode("utf-8")


def client_of(django_user_model, name):
    user = django_user_model.objects.create_superuser(name, f"{name}@example.com", "pw")
    client = Client()
    client.force_login(user)
    return client, user


def post(client, content, name="register.csv", dry_run=True):
    data = {"kind": "meters", "file": SimpleUploadedFile(name, content)}
    if dry_run:
        data["dry_run"] = "on"
    return client.post(URL, data)


def no_parsing(monkeypatch):
    """Fail the test if the file reaches the spreadsheet parsers."""
    def parsed(*args, **kwargs):
        raise AssertionError("the file was parsed before its limit was checked")

    monkeypatch.setattr(pd, "read_excel", parsed)
    monkeypatch.setattr(pd, "read_csv", parsed)


# Limits ---------------------------------------------------------------------------------------------------------
def test_a_file_above_the_size_limit_is_refused_before_it_is_read(plant, settings, django_user_model, monkeypatch):
    settings.IMPORT_MAX_UPLOAD_MB = 0.001  # about 1 KB
    content = csv_bytes([row(f"NEW-{n}", n) for n in range(10)])
    no_parsing(monkeypatch)
    client, _ = client_of(django_user_model, "a")
    response = post(client, content)
    assert response.status_code == 400
    sentence = (f"The file is {len(content) / 1024 / 1024:.1f} MB, more than the import limit of 0.001 MB "
                "(setting QUENBY_IMPORT_MAX_UPLOAD_MB).")
    assert sentence in response.content.decode()
    with pytest.raises(importer.ImportFileError) as refused:
        importer.read_table(content, "register.csv")
    assert str(refused.value) == sentence


def test_a_file_above_the_row_limit_is_refused(plant, settings, django_user_model):
    settings.IMPORT_MAX_ROWS = 3
    client, _ = client_of(django_user_model, "a")
    response = post(client, csv_bytes([row(f"NEW-{n}", n) for n in range(4)]))
    assert response.status_code == 400
    assert ("The file has 4 data rows, more than the import limit of 3 rows (setting QUENBY_IMPORT_MAX_ROWS)."
            in response.content.decode())
    assert post(client, csv_bytes([row(f"NEW-{n}", n) for n in range(3)])).status_code == 200


def workbook(rows):
    return importer.spreadsheet.frames_xlsx_bytes({"meters": pd.DataFrame(rows)})


def test_a_workbook_that_unpacks_above_the_limit_is_refused_before_it_is_parsed(plant, settings, monkeypatch):
    content = workbook([row(f"NEW-{n}", n) for n in range(50)])
    unpacked = sum(m.file_size for m in zipfile.ZipFile(io.BytesIO(content)).infolist())
    settings.IMPORT_MAX_XLSX_UNPACKED_MB = 0.01  # about 10 KB
    assert unpacked > 0.01 * 1024 * 1024
    no_parsing(monkeypatch)
    with pytest.raises(importer.ImportFileError) as refused:
        importer.read_table(content, "register.xlsx")
    assert str(refused.value) == (f"The workbook unpacks to {unpacked / 1024 / 1024:.0f} MB, more than the import "
                                  "limit of 0.01 MB (setting QUENBY_IMPORT_MAX_XLSX_UNPACKED_MB).")


def test_a_workbook_part_packed_too_tightly_is_refused_before_it_is_parsed(plant, settings, django_user_model,
                                                                           monkeypatch):
    buffer = io.BytesIO()
    with zipfile.ZipFile(buffer, "w", zipfile.ZIP_DEFLATED) as archive:
        archive.writestr("[Content_Types].xml", "<Types/>")
        archive.writestr("xl/worksheets/sheet1.xml", "<row/>" * 500_000)  # 3 MB of one repeated tag
    content = buffer.getvalue()
    assert len(content) < 100_000
    no_parsing(monkeypatch)
    client, _ = client_of(django_user_model, "a")
    response = post(client, content, name="register.xlsx")
    assert response.status_code == 400
    page = response.content.decode()
    assert "A part of the workbook (xl/worksheets/sheet1.xml) unpacks to " in page
    assert "times its packed size, more than the import limit of 100 times (setting QUENBY_IMPORT_MAX_XLSX_RATIO)." \
        in page


def test_an_ordinary_workbook_passes_the_limits(plant):
    rows = importer.read_table(workbook([row(f"NEW-{n}", n) for n in range(30)]), "register.xlsx")
    assert len(rows) == 30 and importer.plan_import("meters", rows).ok


def test_the_command_refuses_in_the_same_sentence(plant, settings, tmp_path):
    settings.IMPORT_MAX_ROWS = 1
    path = tmp_path / "register.csv"
    path.write_bytes(csv_bytes([row("NEW-1", 1), row("NEW-2", 2)]))
    with pytest.raises(CommandError, match=r"more than the import limit of 1 rows \(setting QUENBY_IMPORT_MAX_ROWS\)"):
        call_command("import_register", str(path), "--dry-run", stdout=io.StringIO(), stderr=io.StringIO())


# The kept file ----------------------------------------------------------------------------------------------------
def dry_run_token(client, content):
    response = post(client, content)
    assert response.status_code == 200, response.content.decode()[-2000:]
    return response.context["apply_form"].initial["token"]


def test_the_checked_file_is_kept_in_the_storage_and_deleted_once_applied(plant, django_user_model, media):
    client, _ = client_of(django_user_model, "a")
    content = csv_bytes([row("NEW-1", 1), row("NEW-2", 2)])
    token = dry_run_token(client, content)
    kept = media / "kept-imports" / f"{token}.upload"
    assert kept.read_bytes() == content
    response = client.post(URL, {"kind": "meters", "token": token})
    assert response.status_code == 200 and response.context["plan"].applied
    assert Position.objects.filter(tag__in=["NEW-1", "NEW-2"]).count() == 2
    assert not kept.exists() and not (media / "kept-imports" / f"{token}.json").exists()


def test_another_user_cannot_apply_your_token(plant, django_user_model):
    owner, _ = client_of(django_user_model, "owner")
    other, _ = client_of(django_user_model, "other")
    token = dry_run_token(owner, csv_bytes([row("NEW-1", 1)]))
    response = other.post(URL, {"kind": "meters", "token": token})
    assert response.status_code == 400
    assert kept_uploads.NOT_KEPT in response.content.decode()
    assert not Position.objects.filter(tag="NEW-1").exists()
    # the owner still can
    response = owner.post(URL, {"kind": "meters", "token": token})
    assert response.status_code == 200 and Position.objects.filter(tag="NEW-1").exists()


def test_a_kept_file_expires(plant, django_user_model, settings):
    client, _ = client_of(django_user_model, "a")
    token = dry_run_token(client, csv_bytes([row("NEW-1", 1)]))
    settings.IMPORT_KEEP_MINUTES = 0
    response = client.post(URL, {"kind": "meters", "token": token})
    assert response.status_code == 400
    assert ("The checked file expired: files are kept 0 minutes after their dry run (setting "
            "QUENBY_IMPORT_KEEP_MINUTES); upload it again.") in response.content.decode()
    assert not Position.objects.filter(tag="NEW-1").exists()
    # expired files are deleted when the next one is kept
    settings.IMPORT_KEEP_MINUTES = 120
    token2 = dry_run_token(client, csv_bytes([row("NEW-2", 2)]))
    settings.IMPORT_KEEP_MINUTES = 0
    assert kept_uploads.purge_expired() == 1
    with pytest.raises(kept_uploads.KeptUploadError):
        kept_uploads.load(django_user_model.objects.get(username="a"), token2)


@pytest.mark.parametrize("token", ["", "../../etc/passwd", "x" * 32, "a" * 31 + "/"])
def test_a_made_up_token_is_not_a_file(plant, django_user_model, token):
    client, _ = client_of(django_user_model, "a")
    response = client.post(URL, {"kind": "meters", "token": token})
    assert response.status_code == 400
    assert not Position.objects.filter(tag__startswith="NEW-").exists()
