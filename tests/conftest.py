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


@pytest.fixture(scope="session")
def terminal_summary_lines(pytestconfig):
    return pytestconfig.stash[_SUMMARY_LINES]


def pytest_terminal_summary(terminalreporter, config):
    for line in config.stash.get(_SUMMARY_LINES, []):
        terminalreporter.write_line(line)
