"""The fixtures of the whole suite, by name (helpers that are not fixtures are in tests/helpers.py).

demo_plant, demo_history, demo_maintenance  the invented demo, each stage with those before it, fresh per test
admin_user, client                          an administrator, and a client logged in as one (see small worlds)
meter, standard, signed_event, plant        a small world's, chosen by pytest.mark.small_world(NAME)
browser, shots                              Debian's Chromium through Playwright; the screenshot folder
terminal_summary_lines                      lines shown at the end of the run
"""
import datetime as dt

import pytest
from django.core.management import call_command
from django.test import Client

from tests.helpers import ARTIFACTS, CHROMIUM, LAUNCH_ARGS, TIMEOUT_MS, at, enter, sign, user_with_role


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


@pytest.fixture
def admin_user(db):
    return user_with_role("administrator", "admin-tester")


@pytest.fixture
def client(request, db):
    """Most page tests act as an administrator; the permission matrix uses each role. A module in the
    certificate's small world acts as the technician who signs ("B. Signatory")."""
    c = Client()
    if small_world(request).get("signatory"):
        user = user_with_role("technician", "b-signatory")
        user.first_name, user.last_name = "B.", "Signatory"
        user.save()
    else:
        user = request.getfixturevalue("admin_user")
    c.force_login(user)
    return c


# Small worlds: one site, one hall, one water, one meter and the standard that calibrates it. A module names the
# world it works in with `pytest.mark.small_world(NAME)` (the bench by default); the fixtures `meter`, `standard`
# and `client` then give that world's, `plant` the import's or the maintenance records' plant.
SMALL_WORLDS = {
    "bench": {
        "site": {"name": "Test site"}, "area": "Hall A", "water": {"name": "Water", "conductivity_us_cm": 500},
        "device": {"tag": "FT-9"},
        "standard": {"identification": "RS-1", "description": "Master meter", "certificate_number": "C-100"},
    },
    "certificate": {  # what a certificate prints: an address, a maker and model, a traceable standard
        "site": {"name": "Marrowfield Works", "address": "1 Brine Street\nMarrowfield MF1 2AB"},
        "area": "Pickling hall", "water": {"name": "Process water", "conductivity_us_cm": 500},
        "device": {"tag": "FT-101", "serial": "SN-778812", "maker": "Ternwell Flow", "model": "TW-300"},
        "standard": {"identification": "RS-7", "description": "Portable master meter",
                     "certificate_number": "UKAS-0042-7781"},
        "signatory": True,
    },
    "guarded": {  # MPE ±1.0 % of reading, no risk finding; the standards are made per case (guarded_standard)
        "site": {"name": "Guard test site"}, "area": "Hall G", "water": {"name": "Process water", "conductivity_us_cm": 500},
        "device": {"tag": "FT-G1", "mpe_value": 1.0, "base_interval_days": 365}, "no_risk_finding": True,
    },
    "import": {},  # a plant only (the plant fixture)
    "maintenance": {},  # a plant only (the plant fixture)
}


def small_world(request):
    marker = request.node.get_closest_marker("small_world")
    return SMALL_WORLDS[marker.args[0] if marker else "bench"]


@pytest.fixture
def device(request, db):
    from plant.installations import commission
    from plant.models import Area, Fluid, Site

    world = small_world(request)
    area = Area.objects.create(site=Site.objects.create(**world["site"]), name=world["area"])
    water = Fluid.objects.create(phase="liquid", **world["water"])
    values = {"principle": "electromagnetic", "line_size": "DN50", "internal_diameter_mm": 52.5, "range_min": 0,
              "range_max": 40, "mpe_value": 0.5, "mpe_basis": "pct_reading", "wetted_material": "316L",
              **world["device"]}
    device = commission(area=area, fluid=water, **values)
    if world.get("no_risk_finding"):
        assert device.risk_factor() == 1.0  # no finding for this duty: the risk candidate is the base interval
    return device


@pytest.fixture
def standard(request, db):
    from calibration.models import ReferenceStandard

    return ReferenceStandard.objects.create(range_min=0, range_max=40, due_date=dt.date(2027, 6, 1),
                                            expanded_uncertainty=0.1, uncertainty_basis="pct_reading",
                                            **small_world(request)["standard"])


@pytest.fixture
def signed_event(client, device, standard, monkeypatch):
    """The certificate world's calibration: entered adjusted, signed three days later."""
    left = [(4, 4.0), (10, 10.01), (20, 20.0), (30, 30.01), (40, 40.0)]
    event = enter(client, device, standard, adjusted=True, left=left)
    return sign(client, event, at(dt.date(2026, 11, 23)), monkeypatch)


@pytest.fixture
def plant(request, db):
    """The small world's plant: "import" (the register import's: a site, three fluids, one meter) or
    "maintenance" (a biofouling cooling water, an averaging pitot and a technician)."""
    from plant.installations import commission
    from plant.models import Area, Fluid, Site

    marker = request.node.get_closest_marker("small_world")
    name = marker.args[0] if marker else None
    if name == "import":
        site = Site.objects.create(name="North")
        hall = Area.objects.create(site=site, name="Hall A")
        water = Fluid.objects.create(name="Water", phase="liquid", conductivity_us_cm=500, density_kg_m3=998,
                                     viscosity_mpa_s=1.0, temperature_c=20)
        Fluid.objects.create(name="Brine", phase="liquid", conductivity_us_cm=60000, chlorides=True, scaling=True)
        Fluid.objects.create(name="Lime slurry", phase="slurry", solids=True, sticky=True, density_kg_m3=1200)
        commission(tag="FT-1", serial="OLD-1", principle="vortex", area=hall, fluid=water, line_size="DN50",
                   internal_diameter_mm=52.5, range_max=40, mpe_value=1.0)
        return site
    if name == "maintenance":
        request.getfixturevalue("settings").MEDIA_ROOT = request.getfixturevalue("tmp_path") / "media"
        site = Site.objects.create(name="Maint site")
        area = Area.objects.create(site=site, name="Utilities")
        cooling = Fluid.objects.create(name="Cooling water", phase="liquid", conductivity_us_cm=1800,
                                       biofouling=True)
        pitot = commission(tag="FT-P1", principle="averaging_pitot", area=area, fluid=cooling,
                           line_size="DN200", internal_diameter_mm=202.7, range_max=400, mpe_value=2.0,
                           mpe_basis="pct_span", wetted_material="316")
        tech = user_with_role("technician", "tech1")
        return {"device": pitot, "fluid": cooling, "area": area, "tech": tech}
    raise pytest.UsageError('the plant fixture needs pytest.mark.small_world("import") or ("maintenance")')


# The browser tests ----------------------------------------------------------------------------------------------
@pytest.fixture
def browser(monkeypatch):
    from django.db import connections
    from playwright.sync_api import expect, sync_playwright  # in the "test" extra: pip install -e ".[test]"

    # Playwright's sync API keeps an asyncio loop in this thread; Django's ORM refuses to run beside a running
    # loop unless told otherwise. Scoped to this test by monkeypatch.
    monkeypatch.setenv("DJANGO_ALLOW_ASYNC_UNSAFE", "true")
    if not CHROMIUM.exists():
        pytest.fail(f"{CHROMIUM} not found: the browser test needs Debian's Chromium "
                    f"(apt-get install chromium; .ci/run installs it when absent).", pytrace=False)
    expect.set_options(timeout=TIMEOUT_MS)
    with sync_playwright() as p:
        chromium = p.chromium.launch(executable_path=str(CHROMIUM), headless=True, args=LAUNCH_ARGS)
        try:
            yield chromium
        finally:
            chromium.close()
            # While Playwright's loop runs, Django keeps this thread's database connections apart from the usual
            # ones (per async context); close them here, or PostgreSQL keeps a session open on the test database
            # and refuses to drop it at the end of the run.
            connections.close_all()


@pytest.fixture
def shots(request):
    """Screenshot folder, emptied of the previous run's pictures and PDF."""
    ARTIFACTS.mkdir(parents=True, exist_ok=True)
    for old in [*ARTIFACTS.glob("*.png"), *ARTIFACTS.glob("*.pdf")]:
        old.unlink()
    line = f"browser screenshots: {ARTIFACTS}"
    print(f"\n{line}")  # shown with -s, and in the report of a failure
    try:  # the end-of-run summary, where the suite offers one
        request.getfixturevalue("terminal_summary_lines").append(line)
    except pytest.FixtureLookupError:
        pass
    return ARTIFACTS


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
