import pytest
from django.contrib.auth.models import Group, User
from django.core.management import call_command
from django.test import Client


# The demo in three stages, each loaded on top of the one before: the plant, its signed calibration history,
# its maintenance history.
DEMO_STAGES = ["demo_plant", "demo_history", "demo_maintenance"]


class DemoSnapshot:
    """The rows that loading the demo fixtures writes, stage by stage (the project's loaddata: Django's, then the
    ledger seals the signed records a fixture brought), kept in memory and written again for each test that asks.

    Loading reads 65k lines of JSON, saves every object one by one and hashes a thousand signed records: seconds
    each time. Writing the same rows back in batches takes a small part of that, so every test still gets its
    own fresh copy inside its own transaction (tests may change the demo)."""

    def __init__(self):
        self.stages = {}  # stage -> [(model, primary keys to delete first, objects to insert)]

    @staticmethod
    def _models():
        from django.apps import apps

        return [m for m in apps.get_models(include_auto_created=True) if m._meta.managed and not m._meta.proxy]

    @staticmethod
    def _values(model):
        names = [f.attname for f in model._meta.local_concrete_fields]
        return {row[0]: row for row in model._base_manager.values_list("pk", *names)}

    @staticmethod
    def _inserts(model, objects):
        """The INSERT statements (SQL and parameters) that write `objects` as loaddata would: raw (no save(), no
        signals, no auto_now), each field's value as stored."""
        from django.db import DEFAULT_DB_ALIAS, connections
        from django.db.models.sql import InsertQuery

        fields = [f for f in model._meta.local_concrete_fields if not getattr(f, "generated", False)]
        size = connections[DEFAULT_DB_ALIAS].ops.bulk_batch_size(fields, objects) or len(objects)
        statements = []
        for start in range(0, len(objects), size):
            query = InsertQuery(model)
            query.insert_values(fields, objects[start:start + size], raw=True)
            statements += query.get_compiler(using=DEFAULT_DB_ALIAS).as_sql()
        return statements

    def capture(self):
        """Load the stages one after another in a transaction that is rolled back; keep what each added or changed."""
        from django.db import transaction

        models = self._models()
        before = {model: self._values(model) for model in models}
        with transaction.atomic():
            for stage in DEMO_STAGES:
                call_command("loaddata", f"fixtures/{stage}.json", verbosity=0)
                rows = []
                for model in models:
                    after = self._values(model)
                    changed = [pk for pk, row in after.items() if before[model].get(pk) != row]
                    gone = [pk for pk in before[model] if pk not in after]
                    if changed or gone:
                        stale = [pk for pk in changed if pk in before[model]] + gone
                        rows.append((model, stale, self._inserts(model, list(model._base_manager.filter(pk__in=changed)))))
                    before[model] = after
                self.stages[stage] = rows
            transaction.set_rollback(True)
        return self

    def restore(self, stage):
        """Write one stage's rows again."""
        from django.core.management.color import no_style
        from django.db import DEFAULT_DB_ALIAS, connections, transaction

        connection = connections[DEFAULT_DB_ALIAS]
        rows = self.stages[stage]
        with transaction.atomic(), connection.cursor() as cursor:
            # one transaction: foreign keys are checked at its end (a transactional test has no outer one)
            for model, stale, statements in rows:
                if stale:
                    model._base_manager.filter(pk__in=stale)._raw_delete(DEFAULT_DB_ALIAS)
                for sql, params in statements:
                    cursor.execute(sql, params)
            # as loaddata does: PostgreSQL's sequences move past the ids written (nothing to do on SQLite)
            for sql in connection.ops.sequence_reset_sql(no_style(), [row[0] for row in rows]):
                cursor.execute(sql)


@pytest.fixture(scope="session")
def demo_snapshot(django_db_setup, django_db_blocker):
    """The demo's rows, read once per test run (per worker) from the fixtures."""
    with django_db_blocker.unblock():
        return DemoSnapshot().capture()


@pytest.fixture
def demo_plant(db, demo_snapshot):
    """The invented demo plant (fixtures/demo_plant.json), fresh for this test."""
    demo_snapshot.restore("demo_plant")


@pytest.fixture
def demo_history(demo_plant, demo_snapshot):
    """The demo plant and its signed calibration history (fixtures/demo_history.json), sealed in the record chain
    as loading the fixture seals it."""
    demo_snapshot.restore("demo_history")


@pytest.fixture
def demo_maintenance(demo_history, demo_snapshot):
    """The demo plant with its calibration and maintenance histories (fixtures/demo_maintenance.json)."""
    demo_snapshot.restore("demo_maintenance")


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
