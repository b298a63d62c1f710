"""Login throttling (django-axes): per account and per address, a clear message, the administrator's unlock,
password validators on, and the test client's login paths."""
import pytest
from axes.exceptions import AxesBackendRequestParameterRequired
from django.conf import settings
from django.contrib.auth import password_validation
from django.contrib.auth.models import User
from django.core.exceptions import ValidationError
from django.core.management import call_command
from django.http import HttpRequest
from django.test import Client

from plant.accounts import client_ip, lockouts
from tests.helpers import user_with_role

pytestmark = pytest.mark.django_db
LOGIN = "/accounts/login/"
PASSWORD = "Brine-valve-7741"
LIMIT = 5


@pytest.fixture(autouse=True)
def policy(settings):
    # a fast hasher: the throttle, not the hashing, is under test (every attempt hashes a password)
    settings.PASSWORD_HASHERS = ["django.contrib.auth.hashers.MD5PasswordHasher"]
    settings.AXES_FAILURE_LIMIT = LIMIT
    settings.AXES_LOCKOUT_PARAMETERS = ["username", "ip_address"]


@pytest.fixture
def tech(db):
    user = user_with_role("technician", "fieldtech")
    user.set_password(PASSWORD)
    user.save()
    return user


def attempt(username, password, address="198.51.100.10"):
    """One POST to the login form from `address`; the response."""
    return Client(REMOTE_ADDR=address).post(LOGIN, {"username": username, "password": password})


def logged_in(response):
    return response.status_code == 302 and response["Location"] == settings.LOGIN_REDIRECT_URL


def test_the_limit_holds_per_account_whatever_the_address(tech):
    for i in range(LIMIT - 1):
        response = attempt("fieldtech", f"guess-{i}", address=f"198.51.100.{i + 1}")
        assert response.status_code == 200  # the form again, "Please enter a correct username and password"
        assert "correct username and password" in response.content.decode()
    # the LIMIT-th failure locks, and says so at once
    assert attempt("fieldtech", "guess-last", address="198.51.100.9").status_code == 429
    # the right password from yet another address is refused now, with the lockout page
    response = attempt("fieldtech", PASSWORD, address="192.0.2.99")
    assert response.status_code == 429
    page = response.content.decode()
    assert f"There have been {LIMIT} failed log-in attempts for this account or from this" in page
    assert "ask an administrator" in page
    assert f"for {settings.AXES_COOLOFF_TIME.seconds // 60} minutes after the last attempt" in page
    # another account from that address is not affected
    other = user_with_role("reviewer", "deskreviewer")
    other.set_password(PASSWORD)
    other.save()
    assert logged_in(attempt("deskreviewer", PASSWORD, address="192.0.2.99"))


def test_the_limit_holds_per_address_whatever_the_account(tech):
    for i in range(LIMIT - 1):
        assert attempt(f"nobody-{i}", "guess", address="203.0.113.5").status_code == 200
    assert attempt("nobody-last", "guess", address="203.0.113.5").status_code == 429
    # from that address even a correct login is refused...
    assert attempt("fieldtech", PASSWORD, address="203.0.113.5").status_code == 429
    # ...while the account itself is not locked: from elsewhere it logs in
    assert logged_in(attempt("fieldtech", PASSWORD, address="203.0.113.6"))


def test_below_the_limit_a_correct_login_succeeds_and_clears_the_count(tech):
    for i in range(LIMIT - 1):
        attempt("fieldtech", f"guess-{i}", address=f"198.51.100.{i + 1}")
    assert logged_in(attempt("fieldtech", PASSWORD, address="198.51.100.200"))
    # the count started again: another LIMIT - 1 failures still leave the account open
    for i in range(LIMIT - 1):
        attempt("fieldtech", f"again-{i}", address=f"198.51.100.{i + 20}")
    assert logged_in(attempt("fieldtech", PASSWORD, address="198.51.100.201"))


def lock_account_and_address():
    """Lock the account fieldtech (failures from several addresses) and the address 203.0.113.9 (failures
    for several unknown names), independently of each other."""
    for i in range(LIMIT):
        attempt("fieldtech", f"guess-{i}", address=f"198.51.100.{i + 1}")
        attempt(f"nobody-{i}", "guess", address="203.0.113.9")
    assert attempt("fieldtech", PASSWORD, address="192.0.2.1").status_code == 429  # the account
    assert attempt("someone-else", "x", address="203.0.113.9").status_code == 429  # the address


def test_an_administrator_unlocks_an_account_and_an_address_on_the_lockouts_page(tech):
    lock_account_and_address()
    admin = Client()
    admin.force_login(user_with_role("administrator", "head-admin"))
    page = admin.get("/accounts/lockouts/")
    assert page.status_code == 200
    accounts, addresses = lockouts()
    assert [row["username"] for row in accounts] == ["fieldtech"]
    assert [row["ip_address"] for row in addresses] == ["203.0.113.9"]
    assert "Unlock fieldtech" in page.content.decode() and "Unlock 203.0.113.9" in page.content.decode()

    response = admin.post("/accounts/lockouts/", {"username": "fieldtech"}, follow=True)
    assert "Account fieldtech unlocked" in response.content.decode()
    assert logged_in(attempt("fieldtech", PASSWORD, address="192.0.2.1"))

    assert attempt("fieldtech", PASSWORD, address="203.0.113.9").status_code == 429  # the address is still locked
    response = admin.post("/accounts/lockouts/", {"ip_address": "203.0.113.9"}, follow=True)
    assert "Address 203.0.113.9 unlocked" in response.content.decode()
    assert logged_in(attempt("fieldtech", PASSWORD, address="203.0.113.9"))
    assert lockouts() == ([], [])


def test_unlocking_with_nothing_named_says_so(tech):
    admin = Client()
    admin.force_login(user_with_role("administrator", "head-admin"))
    response = admin.post("/accounts/lockouts/", {}, follow=True)
    assert "Say which account or address to unlock." in response.content.decode()


@pytest.mark.parametrize("role", ["technician", "reviewer"])
def test_only_administrators_see_or_unlock(tech, role):
    lock_account_and_address()
    client = Client()
    client.force_login(user_with_role(role, f"a-{role}"))
    assert client.get("/accounts/lockouts/").status_code == 403
    assert client.post("/accounts/lockouts/", {"username": "fieldtech"}).status_code == 403
    assert attempt("fieldtech", PASSWORD, address="192.0.2.1").status_code == 429  # still locked


def test_the_commands_unlock_too(tech):
    lock_account_and_address()
    call_command("axes_reset_username", "fieldtech", verbosity=0)
    assert logged_in(attempt("fieldtech", PASSWORD, address="192.0.2.1"))
    call_command("axes_reset_ip", "203.0.113.9", verbosity=0)
    assert logged_in(attempt("fieldtech", PASSWORD, address="203.0.113.9"))


def test_the_admin_login_is_throttled_too(tech):
    for i in range(LIMIT):
        Client(REMOTE_ADDR="198.51.100.77").post("/admin/login/", {"username": "fieldtech", "password": f"g{i}"})
    response = Client(REMOTE_ADDR="192.0.2.50").post("/admin/login/", {"username": "fieldtech", "password": PASSWORD})
    assert response.status_code == 429


def test_client_address_behind_trusted_proxies(settings):
    request = HttpRequest()
    request.META = {"REMOTE_ADDR": "10.0.0.2", "HTTP_X_FORWARDED_FOR": "1.2.3.4, 203.0.113.7"}
    settings.TRUSTED_PROXY_COUNT = 0
    assert client_ip(request) == "10.0.0.2"  # no proxy trusted: the header is ignored
    settings.TRUSTED_PROXY_COUNT = 1
    assert client_ip(request) == "203.0.113.7"  # what our proxy saw; "1.2.3.4" was sent by the client
    settings.TRUSTED_PROXY_COUNT = 3
    assert client_ip(request) == "10.0.0.2"  # fewer entries than proxies: not trusted


def test_password_validators_are_on():
    assert len(password_validation.get_default_password_validators()) == 4
    for weak in ("pw", "1234567890", "password123", "fieldtech-1"):
        with pytest.raises(ValidationError):
            password_validation.validate_password(weak, user=User(username="fieldtech-1"))
    password_validation.validate_password(PASSWORD, user=User(username="fieldtech"))


def test_the_test_clients_login_paths(tech):
    # force_login does not authenticate, so throttling does not see it
    client = Client()
    client.force_login(tech)
    assert client.get("/positions/").status_code == 200
    # Client.login authenticates without a request, which the throttle refuses: pass one
    with pytest.raises(AxesBackendRequestParameterRequired):
        Client().login(username="fieldtech", password=PASSWORD)
    client = Client()
    assert client.login(request=HttpRequest(), username="fieldtech", password=PASSWORD)
    assert client.get("/positions/").status_code == 200
