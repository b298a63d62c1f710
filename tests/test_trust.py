"""Accounts and roles, CSRF, concurrent sign-off, audit trail, backup/restore, production settings."""
import datetime as dt
import os
import subprocess
import sys
import threading

import pytest
from django.core import serializers
from django.core.management import call_command
from django.db import connection
from django.test import Client

from calibration.models import CalibrationEvent, CalibrationPoint, Countersignature, ReferenceStandard, SignedRecordError
from plant import installations
from plant.models import Area, DutyPeriod, Fluid, Installation, Device, Position, Site
from plant.installations import commission
from tests.helpers import user_with_role
from tests.helpers import entry_data

pytestmark = pytest.mark.django_db


@pytest.fixture
def world(db):
    site = Site.objects.create(name="Trust site")
    area = Area.objects.create(site=site, name="Hall")
    water = Fluid.objects.create(name="Water", phase="liquid", conductivity_us_cm=400)
    device = commission(tag="FT-T1", principle="electromagnetic", area=area, fluid=water, line_size="DN50",
                                 internal_diameter_mm=52.5, range_max=40, mpe_value=0.5, wetted_material="316L")
    standard = ReferenceStandard.objects.create(identification="RS-T", description="ref", range_max=40,
                                                certificate_number="C-T", due_date=dt.date(2099, 1, 1),
                                                expanded_uncertainty=0.1)
    users = {role: user_with_role(role) for role in ("technician", "reviewer", "administrator")}
    users["technician2"] = user_with_role("technician", "technician2")
    from django.contrib.auth.models import User

    users["norole"] = User.objects.create_user("norole", password="pw")
    clients = {"anonymous": Client()}
    for name, user in users.items():
        clients[name] = Client()
        clients[name].force_login(user)
    clients["technician"].post(f"/positions/{device.tag}/calibrate/", entry_data(standard))
    draft = CalibrationEvent.objects.get()
    clients["technician"].post(f"/positions/{device.tag}/calibrate/", entry_data(standard))
    signed = CalibrationEvent.objects.exclude(pk=draft.pk).get()
    assert clients["technician"].post(f"/calibrations/{signed.pk}/sign/").status_code == 302
    return {"device": device, "standard": standard, "users": users, "clients": clients, "draft": draft, "signed": signed}


ROLES = ["anonymous", "norole", "technician", "reviewer", "administrator"]
# (name, method, url template, expected status per role in ROLES order); 302 for anonymous = sent to log in
MATRIX = [
    ("meter list", "get", "/positions/", [302, 403, 200, 200, 200]),
    ("meter page", "get", "/positions/FT-T1/", [302, 403, 200, 200, 200]),
    ("calibration entry", "get", "/positions/FT-T1/calibrate/", [302, 403, 200, 403, 200]),
    ("calibration page", "get", "/calibrations/{signed}/", [302, 403, 200, 200, 200]),
    ("certificate", "get", "/calibrations/{signed}/certificate.pdf", [302, 403, 200, 200, 200]),
    ("certificate zip", "get", "/certificates.zip?start=2020-01-01&end=2099-01-01", [302, 403, 200, 200, 200]),
    ("weekly review", "get", "/review/", [302, 403, 403, 200, 200]),
    ("statistics", "get", "/stats/", [302, 403, 403, 200, 200]),
    ("statistics csv", "get", "/stats.csv", [302, 403, 403, 200, 200]),
    ("import page", "get", "/positions/import/", [302, 403, 403, 200, 200]),
    ("meter edit", "get", "/positions/FT-T1/edit/", [302, 403, 403, 200, 200]),
    ("fluid edit", "get", "/fluids/{fluid}/edit/", [302, 403, 403, 200, 200]),
    ("meter edit save", "post", "/positions/FT-T1/edit/", [302, 403, 403, 400, 400]),
    ("register export", "get", "/positions/export.csv?kind=meters", [302, 403, 200, 200, 200]),
    ("admin site", "get", "/admin/", [302, 302, 302, 302, 200]),
    ("login lockouts", "get", "/accounts/lockouts/", [302, 403, 403, 403, 200]),
    ("countersign", "post", "/calibrations/{signed}/countersign/", [302, 403, 403, 302, None]),
    # the technician entered the draft and may sign it; the administrator, not its author, may not
    ("sign a technician's draft", "post", "/calibrations/{draft}/sign/", [302, 403, 302, 403, 403]),
]


@pytest.mark.parametrize("name,method,url,expected", MATRIX, ids=[m[0] for m in MATRIX])
def test_permission_matrix(world, name, method, url, expected):
    url = url.format(signed=world["signed"].pk, draft=world["draft"].pk, fluid=world["device"].fluid_id)
    for role, status in zip(ROLES, expected):
        if status is None:
            continue
        response = getattr(world["clients"][role], method)(url)
        assert response.status_code == status, f"{name} as {role}: {response.status_code}, expected {status}"
        if role == "anonymous":
            assert "/login/" in response["Location"]


def test_only_the_author_signs_and_countersign_is_separate(world):
    draft = world["draft"]
    assert world["clients"]["technician2"].post(f"/calibrations/{draft.pk}/sign/").status_code == 403
    assert not CalibrationEvent.objects.get(pk=draft.pk).is_signed
    assert world["clients"]["technician"].post(f"/calibrations/{draft.pk}/sign/").status_code == 302
    signed = CalibrationEvent.objects.get(pk=world["signed"].pk)
    assert world["clients"]["reviewer"].post(f"/calibrations/{signed.pk}/countersign/").status_code == 302
    counter = Countersignature.objects.get(event=signed)
    assert counter.user == world["users"]["reviewer"] and counter.role == "Reviewer"
    # the signed event itself is untouched by the countersignature
    assert CalibrationEvent.objects.get(pk=signed.pk).signed_by == signed.signed_by
    with pytest.raises(SignedRecordError):
        counter.delete()


def test_csrf_enforced_on_every_form(world):
    strict = Client(enforce_csrf_checks=True)
    strict.force_login(world["users"]["administrator"])
    posts = [
        f"/positions/{world['device'].tag}/calibrate/",
        f"/calibrations/{world['draft'].pk}/sign/",
        f"/calibrations/{world['signed'].pk}/countersign/",
        "/positions/import/",
        "/accounts/logout/",
        f"/admin/plant/device/{world['device'].pk}/change/",
        f"/positions/{world['device'].tag}/edit/",
        f"/fluids/{world['device'].fluid_id}/edit/",
    ]
    for url in posts:
        assert strict.post(url, {}).status_code == 403, url
    assert Client(enforce_csrf_checks=True).post("/accounts/login/", {"username": "x", "password": "y"}).status_code == 403
    page = world["clients"]["technician"].get(f"/positions/{world['device'].tag}/calibrate/").content.decode()
    assert 'name="csrfmiddlewaretoken"' in page


def test_admin_pages_of_the_device_model_answer_at_their_old_address(world):
    """Meter was renamed Device (issue 28): its admin pages moved with it, and the old addresses lead there."""
    admin, pk = world["clients"]["administrator"], world["device"].pk
    response = admin.get(f"/admin/plant/meter/{pk}/change/?_changelist_filters=status%3Dspare")  # rename: keep
    assert response.status_code == 301
    assert response["Location"] == f"/admin/plant/device/{pk}/change/?_changelist_filters=status%3Dspare"
    page = admin.get(response["Location"])
    assert page.status_code == 200 and "Change device" in page.content.decode()
    listing = admin.get("/admin/plant/meter/")  # rename: keep
    assert listing.status_code == 301 and listing["Location"] == "/admin/plant/device/"
    assert admin.get("/admin/plant/device/").status_code == 200


RACES = 50


@pytest.mark.django_db(transaction=True)
def test_two_sessions_signing_at_once_exactly_one_wins(world):
    """Two sessions sign the same draft at the same instant, RACES times over (a fresh draft each time): every time
    exactly one signs and the other is told who signed it; neither is refused with nothing signed, and no
    "database is locked" error reaches the user (issue 15 item 8)."""
    template = world["draft"]
    points = list(template.points.values("kind", "nominal_pct", "reference_value", "indicated_value"))
    for race in range(RACES):
        event = CalibrationEvent.objects.create(
            device=template.device, performed_on=template.performed_on, technician=template.technician,
            performed_by=template.performed_by, procedure=template.procedure, created_by=template.created_by,
            condition_received="In service")
        event.reference_standards.add(world["standard"])
        CalibrationPoint.objects.bulk_create(CalibrationPoint(event=event, **p) for p in points)
        barrier = threading.Barrier(2)
        outcomes = []

        def sign(name):
            try:
                draft = CalibrationEvent.objects.get(pk=event.pk)  # as the sign-off view loads it first
                barrier.wait()
                draft.sign(by=name)
                outcomes.append(("signed", name, ""))
            except SignedRecordError as exc:
                outcomes.append(("refused", name, str(exc)))
            except Exception as exc:  # anything else is a failure of the sign-off, reported below
                outcomes.append(("error", name, repr(exc)))
            finally:
                connection.close()

        threads = [threading.Thread(target=sign, args=(n,)) for n in ("first", "second")]
        for t in threads:
            t.start()
        for t in threads:
            t.join()
        assert sorted(kind for kind, _, _ in outcomes) == ["refused", "signed"], (race, outcomes)
        winner = next(name for kind, name, _ in outcomes if kind == "signed")
        refusal = next(message for kind, _, message in outcomes if kind == "refused")
        assert refusal == f"Calibration {event.pk} is already signed by {winner}.", (race, outcomes)
        stored = CalibrationEvent.objects.get(pk=event.pk)
        assert stored.is_signed and stored.signed_by == winner
        assert stored.history.filter(state="signed").count() == 1


def test_audit_trail_records_who_and_what(world):
    client = world["clients"]["administrator"]
    device = world["device"]
    data = {f.name: getattr(device, f.attname) for f in Device._meta.concrete_fields if f.editable and f.name != "id"}
    data.update(area=device.area_id, fluid=device.fluid_id, mpe_value=0.75)
    response = client.post(f"/admin/plant/device/{device.pk}/change/",
                           {**{k: ("" if v is None else v) for k, v in data.items()},
                            "duties-TOTAL_FORMS": 1, "duties-INITIAL_FORMS": 1,
                            "duties-0-id": device.duties.get().pk, "duties-0-meter": device.pk,
                            "duties-0-area": device.area_id, "duties-0-fluid": device.fluid_id,
                            "duties-0-since": device.duties.get().since})
    assert response.status_code == 302, response.content.decode()[:3000]
    latest = device.history.first()
    assert latest.history_user == world["users"]["administrator"]
    change = latest.diff_against(latest.prev_record).changes
    assert [(c.field, c.old, c.new) for c in change] == [("mpe_value", 0.5, 0.75)]
    page = client.get(f"/positions/{device.tag}/").content.decode()
    assert "mpe_value: 0.5 → 0.75" in page and "Administrator Tester" in page
    signed = world["signed"]
    assert signed.history.filter(state="signed").exists()


def snapshot():
    models = [Site, Area, Fluid, Position, Device, Installation, DutyPeriod, ReferenceStandard, CalibrationEvent,
              CalibrationPoint, Countersignature, Device.history.model, Position.history.model,
              Installation.history.model, CalibrationEvent.history.model]
    return {m.__name__: serializers.serialize("json", m._base_manager.order_by("pk")) for m in models}


@pytest.mark.django_db(transaction=True)  # flush truncates tables: not inside the test's own transaction
def test_backup_restored_into_empty_database_is_identical(world, tmp_path):
    world["clients"]["reviewer"].post(f"/calibrations/{world['signed'].pk}/countersign/")
    # a swap too: a closed installation, a device on the shelf, the new one installed
    device = world["signed"].device
    spare = Device.objects.create(principle=device.principle, range_min=0, range_max=device.range_max,
                                 flow_units=device.flow_units, serial="SN-RT-1", mpe_value=1.0, status="spare")
    installations.swap(device.position, spare, device.today(), "round trip", brand_new=True)
    before = snapshot()
    path = tmp_path / "backup.json"
    call_command("backup", str(path))
    call_command("flush", interactive=False, verbosity=0)
    assert Device.objects.count() == 0 and CalibrationEvent.objects.count() == 0
    call_command("restore", str(path))
    after = snapshot()
    for name in before:
        assert after[name] == before[name], name
    assert CalibrationEvent.objects.get(pk=world["signed"].pk).is_signed
    assert Installation.objects.exists() and Position.objects.exists()  # positions and devices round-trip too
    with pytest.raises(Exception, match="not empty"):
        call_command("restore", str(path))


def test_production_settings_pass_deploy_check():
    env = {**os.environ, "DJANGO_SETTINGS_MODULE": "quenby.settings_production",
           "DJANGO_SECRET_KEY": "k" * 20 + "-production-test-secret-with-enough-length-0123456789",
           "DJANGO_ALLOWED_HOSTS": "cal.example.internal"}
    result = subprocess.run([sys.executable, "manage.py", "check", "--deploy", "--fail-level", "WARNING"],
                            capture_output=True, text=True, env=env)
    assert result.returncode == 0, result.stdout + result.stderr
    assert "no issues" in result.stdout
    env.pop("DJANGO_SECRET_KEY")
    result = subprocess.run([sys.executable, "manage.py", "check"], capture_output=True, text=True, env=env)
    assert result.returncode != 0 and "DJANGO_SECRET_KEY" in result.stderr
