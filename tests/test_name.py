"""The product's own name is on everything it shows, sets or sends, and its former name is nowhere."""
import subprocess
import tomllib
from pathlib import Path

import pytest
from django.conf import settings

ROOT = Path(__file__).resolve().parent.parent
# the former name, assembled so that this file does not itself hold it
FORMER = "flow" + "cal"


def test_former_name_is_nowhere_in_the_tracked_files():
    found = subprocess.run(["git", "grep", "-il", FORMER], cwd=ROOT, capture_output=True, text=True)
    if found.returncode == 128:
        pytest.skip("not a git checkout")
    assert found.stdout.split() == []


def test_package_cookies_and_mail_carry_the_name():
    project = tomllib.loads((ROOT / "pyproject.toml").read_text())["project"]
    assert project["name"] == "quenby"
    assert settings.PRODUCT_NAME == "Quenby"
    assert settings.SESSION_COOKIE_NAME == "quenby_session"
    assert settings.CSRF_COOKIE_NAME == "quenby_csrftoken"
    assert settings.EMAIL_SUBJECT_PREFIX.startswith("[Quenby]")


@pytest.mark.django_db
def test_every_page_shows_the_name_in_its_brand_and_title(client, demo_plant):
    for url in ("/positions/", "/review/", "/stats/", "/positions/import/"):
        html = client.get(url).content.decode()
        assert '<a class="brand" href="/positions/">Quenby</a>' in html, url
        assert "· Quenby</title>" in html, url
        assert FORMER not in html.lower(), url


@pytest.mark.django_db
def test_login_sets_the_named_session_cookie(client, admin_user):
    from django.test import Client

    anonymous = Client()
    admin_user.set_password("pw")
    admin_user.save()
    anonymous.post("/accounts/login/", {"username": admin_user.username, "password": "pw"})
    assert "quenby_session" in anonymous.cookies
    assert "sessionid" not in anonymous.cookies


@pytest.mark.django_db
def test_certificate_footer_names_the_record_keeper(demo_history):
    from calibration.models import CalibrationEvent
    from reports.certificate import certificate_html

    html = certificate_html(CalibrationEvent.objects.filter(state="signed").first())
    assert "record kept in Quenby" in html
    assert FORMER not in html.lower()
