"""When the database fails: connections checked before use, our own page when a save fails, our 500 and 404.

A failing database is imitated with `connection.execute_wrapper`: the first write of the save goes through (inside
its transaction) and the next one raises, as a server that goes away in the middle of a sign-off would. The
records are then read back to show that nothing of the save was kept.
"""
import contextlib
import re
import time

import pytest
from django.conf import settings
from django.core.files.uploadedfile import SimpleUploadedFile
from django.core.handlers.wsgi import WSGIHandler
from django.db import DatabaseError, InterfaceError, OperationalError, connection
from django.test import Client, RequestFactory
from django.views import defaults

from calibration.models import CalibrationEvent, CalibrationPoint, Countersignature
from maintenance.models import MaintenanceRecord, MaintenanceTask
from plant import importer
from plant.models import Fluid
from tests.helpers import user_with_role
from tests.helpers import entry_data

pytestmark = pytest.mark.django_db
FAILURES = [OperationalError("server closed the connection unexpectedly"),
            InterfaceError("connection already closed"), DatabaseError("could not write block: No space left")]
WRITES = ("INSERT", "UPDATE", "DELETE", "COPY")  # COPY: the bulk import on PostgreSQL


@contextlib.contextmanager
def database_fails_after_first_write(error, writes_allowed=1):
    """Every write after the first (after `writes_allowed`) raises `error`; reads and transaction control go
    through."""
    writes = []

    def execute(run, sql, params, many, context):
        if sql.lstrip().upper().startswith(WRITES):
            writes.append(sql)
            if len(writes) > writes_allowed:
                raise error
        return run(sql, params, many, context)

    with connection.execute_wrapper(execute):
        yield writes


def assert_nothing_saved_page(response, back):
    assert response.status_code == 503
    page = response.content.decode()
    assert "<h1>Nothing was saved</h1>" in page and "try again" in page and "tell the administrator" in page
    assert f'href="{back}"' in page
    assert 'class="brand"' in page  # under the site's own base template
    assert "Server Error" not in page


@pytest.fixture
def tech(db):
    return user_with_role("technician", "failing-tech")


@pytest.fixture
def tech_client(tech):
    client = Client(raise_request_exception=False)
    client.force_login(tech)
    return client


@pytest.fixture
def draft(tech_client, device, standard):  # noqa: F811
    assert tech_client.post(f"/positions/{device.tag}/calibrate/", entry_data(standard)).status_code == 302
    return CalibrationEvent.objects.get()


def snapshot(event):
    event.refresh_from_db()
    return (event.state, event.signed_by, event.signed_at, event.as_found_in_tolerance,
            list(CalibrationPoint.objects.filter(event=event).order_by("pk").values_list("error", "decision")))


# Connections are checked before use ---------------------------------------------------------------------------
def test_connections_are_kept_and_checked_before_each_request_uses_them():
    assert settings.DATABASES["default"]["CONN_HEALTH_CHECKS"] is True
    assert settings.DATABASES["default"]["CONN_MAX_AGE"] == 60


def _wsgi_get(path, cookie):
    """A request through the whole WSGI handler, so that Django's request_started check of old connections runs
    (the test client leaves it out)."""
    environ = RequestFactory()._base_environ(PATH_INFO=path, REQUEST_METHOD="GET", HTTP_COOKIE=cookie)
    statuses = []
    response = WSGIHandler()(environ, lambda status, headers, exc_info=None: statuses.append(status))
    body = b"".join(response)
    response.close()  # request_finished: what a server does after sending the body
    return int(statuses[0].split()[0]), body


@pytest.mark.skipif(connection.vendor != "postgresql", reason="a server backend to terminate: PostgreSQL only")
@pytest.mark.django_db(transaction=True)
@pytest.mark.parametrize("checked", [True, False], ids=["health-checks", "without-them"])
def test_the_first_request_after_the_database_restarted_succeeds(checked):
    import psycopg

    user = user_with_role("technician", "restart-tech")
    client = Client()
    client.force_login(user)
    cookie = f"{settings.SESSION_COOKIE_NAME}={client.cookies[settings.SESSION_COOKIE_NAME].value}"
    assert _wsgi_get("/positions/", cookie)[0] == 200
    assert connection.connection is not None  # kept for the next request (CONN_MAX_AGE)
    connection.health_check_enabled = checked
    with connection.cursor() as cursor:
        cursor.execute("SELECT pg_backend_pid()")
        pid = cursor.fetchone()[0]
    # the server ends that backend, as a restart does; the application is not told
    params = connection.get_connection_params()
    with psycopg.connect(**params, autocommit=True) as other:
        other.execute("SELECT pg_terminate_backend(%s)", [pid])
        deadline = time.monotonic() + 10
        while other.execute("SELECT count(*) FROM pg_stat_activity WHERE pid = %s", [pid]).fetchone()[0]:
            assert time.monotonic() < deadline
            time.sleep(0.05)
    status, body = _wsgi_get("/positions/", cookie)
    if checked:
        assert status == 200
    else:  # what the check prevents: the dead connection fails the request
        assert status == 500 and b"Something went wrong" in body
    assert _wsgi_get("/positions/", cookie)[0] == 200  # and the one after succeeds either way


# A save that fails: our page, nothing saved -------------------------------------------------------------------
@pytest.mark.parametrize("error", FAILURES, ids=lambda e: type(e).__name__)
def test_a_sign_off_the_database_fails_under_saves_nothing_and_says_so(tech_client, draft, error):
    before = snapshot(draft)
    with database_fails_after_first_write(error) as writes:
        response = tech_client.post(f"/calibrations/{draft.pk}/sign/")
    assert len(writes) == 2  # the draft was claimed, then the database failed
    assert_nothing_saved_page(response, f"/calibrations/{draft.pk}/")
    assert "sign-off" in response.content.decode()
    assert snapshot(draft) == before and before[0] == "draft"
    assert tech_client.post(f"/calibrations/{draft.pk}/sign/").status_code == 302  # and it signs once it is back
    assert snapshot(draft)[0] == "signed"


def test_a_countersignature_the_database_fails_under_saves_nothing(tech_client, draft):
    assert tech_client.post(f"/calibrations/{draft.pk}/sign/").status_code == 302
    reviewer = Client(raise_request_exception=False)
    reviewer.force_login(user_with_role("reviewer", "failing-reviewer"))
    # the countersignature is one write: let none through
    with database_fails_after_first_write(InterfaceError("connection already closed"), writes_allowed=0):
        response = reviewer.post(f"/calibrations/{draft.pk}/countersign/")
    assert_nothing_saved_page(response, f"/calibrations/{draft.pk}/")
    assert not Countersignature.objects.exists()


def test_a_maintenance_sign_off_the_database_fails_under_saves_nothing(tech_client, tech, device):  # noqa: F811
    task = MaintenanceTask.objects.filter(device=device).first()
    record = MaintenanceRecord.objects.create(device=device, task=task, performed_on=device.position.area.site.today(),
                                              technician="T", condition="clean", action="looked", minutes_spent=5,
                                              created_by=tech)
    due_before = MaintenanceTask.objects.get(pk=task.pk).next_due_date
    with database_fails_after_first_write(OperationalError("terminating connection due to administrator command")):
        response = tech_client.post(f"/maintenance/{record.pk}/sign/")
    assert_nothing_saved_page(response, f"/maintenance/{record.pk}/")
    record.refresh_from_db()
    assert record.state == "draft" and record.signed_by == ""
    assert MaintenanceTask.objects.get(pk=task.pk).next_due_date == due_before


def test_an_import_the_database_fails_under_saves_nothing(db):
    client = Client(raise_request_exception=False)
    client.force_login(user_with_role("reviewer", "failing-importer"))
    header = ",".join(importer.KINDS["fluids"]["columns"])
    rows = "\n".join(",".join({"name": name, "phase": "liquid"}.get(c, "") for c in importer.KINDS["fluids"]["columns"])
                     for name in ("Water A", "Water B", "Water C"))
    upload = SimpleUploadedFile("fluids.csv", f"{header}\n{rows}\n".encode(), content_type="text/csv")
    with database_fails_after_first_write(OperationalError("server closed the connection unexpectedly")) as writes:
        response = client.post("/positions/import/", {"kind": "fluids", "file": upload})
    assert len(writes) >= 2
    assert_nothing_saved_page(response, "/positions/import/")
    assert "import" in response.content.decode()
    assert not Fluid.objects.exists()


# Our own 500 and 404 ------------------------------------------------------------------------------------------
def test_the_500_page_is_ours_and_reads_neither_the_database_nor_the_user(django_assert_num_queries):
    request = RequestFactory().get("/positions/")  # no user, no session: as Django renders it after a failure
    with django_assert_num_queries(0):
        response = defaults.server_error(request)
    page = response.content.decode()
    assert response.status_code == 500
    assert "Something went wrong on our side" in page and 'class="brand"' in page and "Log out" not in page


def test_an_unexpected_failure_shows_our_500_page(tech_client, monkeypatch):
    def broken(*args, **kwargs):
        raise RuntimeError("a fault of ours")

    monkeypatch.setattr("plant.views.render", broken)
    response = tech_client.get("/devices/")
    assert response.status_code == 500
    assert "Something went wrong on our side" in response.content.decode()


def test_the_404_page_is_ours(tech_client):
    response = tech_client.get("/positions/NO-SUCH-TAG/")
    page = response.content.decode()
    assert response.status_code == 404
    assert "Nothing at this address" in page and "/positions/NO-SUCH-TAG/" in page and 'class="brand"' in page
    assert re.search(r"<nav>.*Spares", page, re.S)  # the signed-in user's navigation
