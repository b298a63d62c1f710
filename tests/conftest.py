import pytest
from django.contrib.auth.models import Group, User
from django.core.management import call_command
from django.test import Client


@pytest.fixture
def demo_plant(db):
    call_command("loaddata", "fixtures/demo_plant.json", verbosity=0)


@pytest.fixture
def demo_history(demo_plant):
    call_command("loaddata", "fixtures/demo_history.json", verbosity=0)


@pytest.fixture
def demo_maintenance(demo_history):
    call_command("loaddata", "fixtures/demo_maintenance.json", verbosity=0)


def user_with_role(role, username=None):
    user = User.objects.create_user(username or role, password="pw", first_name=role.capitalize(), last_name="Tester")
    user.groups.add(Group.objects.get(name=role))
    if role == "administrator":
        user.is_staff = True
        user.save()
    return user


@pytest.fixture
def admin_user(db):
    return user_with_role("administrator", "admin-tester")


@pytest.fixture
def client(admin_user):
    """Most page tests act as an administrator; the permission matrix uses each role."""
    c = Client()
    c.force_login(admin_user)
    return c


# Lines a test module asks to show at the end of the run (visible with -q too), e.g. how many generated cases ran.
_SUMMARY_LINES = pytest.StashKey[list]()


def pytest_configure(config):
    config.stash[_SUMMARY_LINES] = []


@pytest.fixture(scope="session", autouse=True)
def fast_password_hasher(django_test_environment):
    """Every user a test makes hashes a password: the deliberately slow PBKDF2 cost seconds per test on a busy
    machine. No test checks the hashing itself; a test that needs the real hashers can override the setting."""
    from django.test import override_settings

    with override_settings(PASSWORD_HASHERS=["django.contrib.auth.hashers.MD5PasswordHasher"]):
        yield


@pytest.fixture(scope="session")
def terminal_summary_lines(pytestconfig):
    return pytestconfig.stash[_SUMMARY_LINES]


def pytest_terminal_summary(terminalreporter, config):
    for line in config.stash.get(_SUMMARY_LINES, []):
        terminalreporter.write_line(line)


def send_twice_at_once(user, send_one):
    """Two logged-in clients of `user` call send_one(client) at the same moment; their status codes.

    The clients log in here, one after the other (two threads writing sessions at once would race on their
    own); a thread that dies fails the caller's assertion instead of leaving the other at the barrier."""
    import threading

    from django.db import connection

    barrier = threading.Barrier(2, timeout=60)
    statuses, failures = [], []
    clients = []
    for _ in range(2):
        client = Client()
        client.force_login(user)
        clients.append(client)

    def go(client):
        try:
            barrier.wait()
            statuses.append(send_one(client).status_code)
        except Exception as exc:
            failures.append(repr(exc))
            barrier.abort()
        finally:
            connection.close()

    threads = [threading.Thread(target=go, args=(c,)) for c in clients]
    for t in threads:
        t.start()
    for t in threads:
        t.join(timeout=120)
    assert failures == [] and not any(t.is_alive() for t in threads), failures
    return statuses
