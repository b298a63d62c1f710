"""The week's work list (page, PDF, CSV), the iCalendar feeds behind a revocable token, the review's maintenance
lists with a constant query count, and the findings statistics; expectations worked by hand from the fixture."""
import csv
import datetime as dt
import io

import pytest
from django.test import Client
from django.utils import timezone
from icalendar import Calendar
from pypdf import PdfReader

from maintenance import stats, worklist
from maintenance.models import CalendarToken, MaintenanceRecord, MaintenanceTask, WalkOrder
from plant.models import Area, Fluid, Device, Site
from plant.installations import commission
from tests.helpers import user_with_role

pytestmark = pytest.mark.django_db
D = dt.timedelta


def device(tag, area, fluid, principle="electromagnetic", **stored):
    m = commission(tag=tag, principle=principle, area=area, fluid=fluid, line_size="DN50",
                             internal_diameter_mm=52.5, range_max=40, mpe_value=0.5, wetted_material="316L")
    if stored:
        Device.objects.filter(pk=m.pk).update(**stored)
    return m


def set_due(m, code, due):
    MaintenanceTask.objects.filter(device=m, code=code).update(next_due_date=due)


@pytest.fixture
def week():
    """A site of two areas walked Pump house then Tank farm; a week starting on a known Monday."""
    today = timezone.localdate()
    monday, sunday = worklist.week_of(today)
    site = Site.objects.create(name="Worklist site")
    tanks = Area.objects.create(site=site, name="A tank farm")   # first by name, second on the walk
    pumps = Area.objects.create(site=site, name="Pump house")
    WalkOrder.objects.create(area=pumps, position=1)
    WalkOrder.objects.create(area=tanks, position=2)
    water = Fluid.objects.create(name="Raw water", phase="liquid", conductivity_us_cm=500)
    caustic = Fluid.objects.create(name="Caustic 2 %", phase="liquid", conductivity_us_cm=90000)
    far = today + D(days=400)
    a = device("FT-A1", tanks, caustic, next_due_date=sunday, last_calibrated=today - D(days=300))
    b = device("FT-B1", pumps, water, next_due_date=far, last_calibrated=today)
    c = device("FT-C1", pumps, water, next_due_date=monday - D(days=3), last_calibrated=today - D(days=400))
    d = device("FT-D1", pumps, water, next_due_date=sunday + D(days=1), last_calibrated=today)
    for m in (a, b, c, d):  # every task due far away, then the few this week
        MaintenanceTask.objects.filter(device=m).update(next_due_date=far)
    set_due(b, "VISUAL_INSPECTION", monday + D(days=2))
    set_due(d, "TRANSMITTER_VERIFICATION", sunday + D(days=1))  # Monday next week: not this week
    spare = device("FT-SPARE", pumps, water, next_due_date=monday)
    Device.objects.filter(pk=spare.pk).update(status="spare")
    return {"today": today, "monday": monday, "sunday": sunday, "site": site, "tanks": tanks, "pumps": pumps}


def expected_order():
    # walking order: Pump house (1) before A tank farm (2); within an area by tag; calibration before maintenance
    return [("Pump house", "FT-B1", "Maintenance"), ("Pump house", "FT-C1", "Calibration"),
            ("A tank farm", "FT-A1", "Calibration")]


def test_rows_in_walking_order_with_overdue_and_nothing_of_next_week(week):
    items = worklist.rows(week["sunday"])
    assert [(i.area, i.tag, i.kind) for i in items] == expected_order()
    assert items[1].overdue_days(week["today"]) == (week["today"] - (week["monday"] - D(days=3))).days
    assert worklist.week_of(dt.date(2026, 12, 10)) == (dt.date(2026, 12, 7), dt.date(2026, 12, 13))  # Thu -> Mon/Sun
    # a list started on a Saturday covers seven days, Saturday to Friday (not the Saturday and Sunday left of the week)
    assert worklist.span(dt.date(2026, 12, 5)) == (dt.date(2026, 12, 5), dt.date(2026, 12, 11))


def test_seven_days_from_a_saturday_serial_standards_and_draft(client, week):
    """Item 9 of issue 27: seven days from the chosen date; serial and the standards the tablet form offers on each
    calibration row; a meter with an unsigned draft marked "draft waiting for sign-off", not listed as new work."""
    from calibration.models import CalibrationEvent, ReferenceStandard

    saturday = week["monday"] + D(days=5)
    a, c, d = (Device.objects.get(position__tag=t) for t in ("FT-A1", "FT-C1", "FT-D1"))
    Device.objects.filter(pk=a.pk).update(serial="SN-A1-0042")
    Device.objects.filter(pk=d.pk).update(next_due_date=saturday + D(days=6))  # the following Friday: last day
    Device.objects.filter(pk=c.pk).update(next_due_date=saturday + D(days=7))  # one day past the span
    fits = ReferenceStandard.objects.create(identification="RS-FITS", description="covers 0–40", range_max=100,
                                            certificate_number="C-1", due_date=saturday + D(days=300),
                                            expanded_uncertainty=0.1)
    ReferenceStandard.objects.create(identification="RS-SMALL", description="too small a range", range_max=10,
                                     certificate_number="C-2", due_date=saturday + D(days=300),
                                     expanded_uncertainty=0.1)
    ReferenceStandard.objects.create(identification="RS-GAS", description="gas only", range_max=100, phase="gas",
                                     certificate_number="C-3", due_date=saturday + D(days=300),
                                     expanded_uncertainty=0.1)
    ReferenceStandard.objects.create(identification="RS-OLD", description="out of date", range_max=100,
                                     certificate_number="C-4", due_date=saturday - D(days=1),
                                     expanded_uncertainty=0.1)
    expected = sorted(ReferenceStandard.offered_for(a, on_date=saturday).values_list("identification", flat=True))
    assert expected == [fits.identification]  # the tablet form's own choice, so the list says nothing else
    draft = CalibrationEvent.objects.create(device=d, performed_on=saturday, technician="A. Fieldtech", procedure="p")

    items = worklist.rows(saturday + D(days=6), start=saturday)
    by_tag = {(i.tag, i.kind): i for i in items}
    assert ("FT-C1", "Calibration") not in by_tag and ("FT-D1", "Calibration") in by_tag
    assert by_tag[("FT-A1", "Calibration")].serial == "SN-A1-0042"
    assert list(by_tag[("FT-A1", "Calibration")].standards) == expected
    waiting = by_tag[("FT-D1", "Calibration")]
    assert waiting.draft_id == draft.pk and waiting.work == worklist.DRAFT_WORK
    assert not by_tag[("FT-A1", "Calibration")].draft_waiting

    query = {"start": saturday.isoformat()}
    body = client.get("/maintenance/worklist/", query).content.decode()
    assert f"{saturday.isoformat()}</span> to <span class=\"nowrap\">{saturday + D(days=6):%a} " in body
    assert "SN-A1-0042" in body and "RS-FITS" in body and "RS-SMALL" not in body and "RS-OLD" not in body
    assert "draft waiting for sign-off" in body and f'href="/calibrations/{draft.pk}/"' in body
    rows = list(csv.reader(io.StringIO(client.get("/maintenance/worklist.csv", query).content.decode())))
    head = rows[0]
    csv_by_tag = {(r[head.index("tag")], r[head.index("kind")]): dict(zip(head, r)) for r in rows[1:]}
    assert csv_by_tag[("FT-A1", "Calibration")]["serial"] == "SN-A1-0042"
    assert csv_by_tag[("FT-A1", "Calibration")]["reference standards"] == "RS-FITS"
    assert csv_by_tag[("FT-D1", "Calibration")]["work"] == "Draft waiting for sign-off"
    assert csv_by_tag[("FT-D1", "Calibration")]["draft"].endswith(f"/calibrations/{draft.pk}/")
    assert ("FT-C1", "Calibration") not in csv_by_tag
    response = client.get("/maintenance/worklist.pdf", query)
    text = " ".join(" ".join(p.extract_text().split()) for p in PdfReader(io.BytesIO(response.content)).pages)
    assert "SN-A1-0042" in text and "RS-FITS" in text and "DRAFT WAITING FOR SIGN-OFF" in text


def test_page_csv_and_pdf(client, week):
    query = {"start": week["monday"].isoformat()}
    page = client.get("/maintenance/worklist/", query)
    body = page.content.decode()
    assert page.status_code == 200 and body.index("<h3>Pump house") < body.index("<h3>A tank farm")
    assert "permit to work" in body
    rows = list(csv.reader(io.StringIO(client.get("/maintenance/worklist.csv", query).content.decode())))
    assert rows[0][:8] == ["site", "area", "walk order", "tag", "serial", "kind", "work", "due date"]
    assert [(r[1], r[3], r[5]) for r in rows[1:]] == expected_order()
    assert rows[1][2] == "1" and rows[3][2] == "2"
    response = client.get("/maintenance/worklist.pdf", query)
    assert response.status_code == 200 and response["Content-Type"] == "application/pdf"
    text = " ".join(" ".join(p.extract_text().split()) for p in PdfReader(io.BytesIO(response.content)).pages)
    assert f"Work list · {week['monday']:%a} {week['monday'].isoformat()}" in text
    assert "permit to work" in text and "depressurise" in text and "licensed practice" in text
    assert text.index("Pump house") < text.index("A tank farm")
    for tag in ("FT-A1", "FT-B1", "FT-C1"):
        assert tag in text
    assert "FT-D1" not in text and "FT-SPARE" not in text
    assert "OVERDUE since" in text
    assert client.get("/maintenance/worklist.csv", {"start": "not a date"}).status_code == 400


def test_area_filter(client, week):
    rows = list(csv.reader(io.StringIO(client.get("/maintenance/worklist.csv", {
        "start": week["monday"].isoformat(), "area": week["tanks"].pk}).content.decode())))
    assert [r[3] for r in rows[1:]] == ["FT-A1"]


def test_icalendar_feed_parsed_back_and_token_revoked(week):
    tech = user_with_role("technician", "caltech")
    c = Client()
    c.force_login(tech)
    assert c.post("/maintenance/calendar/token/").status_code == 302
    token = CalendarToken.objects.get(user=tech).token
    url = f"/maintenance/calendar/{token}/area-{week['pumps'].pk}.ics"
    assert url in c.get("/maintenance/calendar/").content.decode()
    anonymous = Client()  # a calendar application: no session, only the secret
    response = anonymous.get(url)
    assert response.status_code == 200 and response["Content-Type"].startswith("text/calendar")
    calendar = Calendar.from_ical(response.content)
    events = {str(e["summary"]): e for e in calendar.walk("VEVENT")}
    today = week["today"]
    set_due(Device.objects.get(position__tag="FT-B1"), "VISUAL_INSPECTION", today + D(days=10))
    response = anonymous.get(url)
    calendar = Calendar.from_ical(response.content)
    events = {str(e["summary"]): e for e in calendar.walk("VEVENT")}
    # FT-C1's calibration is overdue: shown on today; FT-B1's inspection on its due date; nothing of the tank farm
    overdue = events["OVERDUE · FT-C1 · Calibrate (as-found, as-left) (calibration)"]
    assert overdue.decoded("dtstart") == today and overdue.decoded("dtend") == today + D(days=1)
    inspection = events["FT-B1 · Visual inspection for leaks and damage (maintenance)"]
    assert inspection.decoded("dtstart") == today + D(days=10)
    assert str(inspection["location"]) == "Worklist site / Pump house"
    assert "permit to work" in str(inspection["description"])
    assert not any("FT-A1" in s for s in events)
    assert len({str(e["uid"]) for e in calendar.walk("VEVENT")}) == len(events)
    # revoked: the old address stops working; a new one works
    assert c.post("/maintenance/calendar/token/", {"action": "revoke"}).status_code == 302
    assert anonymous.get(url).status_code == 404
    c.post("/maintenance/calendar/token/")
    assert anonymous.get(url).status_code == 404
    fresh = CalendarToken.objects.get(user=tech).token
    assert anonymous.get(f"/maintenance/calendar/{fresh}/area-{week['pumps'].pk}.ics").status_code == 200
    tech.is_active = False
    tech.save()
    assert anonymous.get(f"/maintenance/calendar/{fresh}/area-{week['pumps'].pk}.ics").status_code == 404


def test_review_lists_maintenance_overdue_and_due_with_constant_queries(client, week, django_assert_max_num_queries):
    from django.db import connection
    from django.test.utils import CaptureQueriesContext

    today = week["today"]
    b = Device.objects.get(position__tag="FT-B1")
    set_due(Device.objects.get(position__tag="FT-D1"), "TRANSMITTER_VERIFICATION", today + D(days=100))
    set_due(b, "VISUAL_INSPECTION", today - D(days=4))
    set_due(b, "TRANSMITTER_VERIFICATION", today + D(days=3))
    overdue = list(csv.reader(io.StringIO(client.get("/review/", {"export": "maint_overdue"}).content.decode())))
    assert [(r[0], r[3]) for r in overdue[1:]] == [("FT-B1", "Visual inspection for leaks and damage")]
    assert overdue[1][5] == "4"  # days overdue
    due = list(csv.reader(io.StringIO(client.get("/review/", {"export": "maint_due"}).content.decode())))
    assert [(r[0], r[3]) for r in due[1:]] == [("FT-B1", "In-situ verification of the transmitter")]
    with CaptureQueriesContext(connection) as small:
        assert client.get("/review/").status_code == 200
    water = Fluid.objects.get(name="Raw water")
    for i in range(60):
        m = device(f"EXTRA-{i}", week["pumps"], water, next_due_date=today + D(days=200))
        MaintenanceTask.objects.filter(device=m).update(next_due_date=today - D(days=i + 1))
    with django_assert_max_num_queries(len(small.captured_queries)):
        body = client.get("/review/").content.decode()
    assert 'id="count-maint_overdue">121<' in body  # 1 + 60 meters × 2 tasks (visual, transmitter)


def test_findings_statistics_by_principle_and_fluid(client, week):
    b, c = Device.objects.get(position__tag="FT-B1"), Device.objects.get(position__tag="FT-C1")
    a = Device.objects.get(position__tag="FT-A1")
    tech = user_with_role("technician", "stats-tech")
    today = week["today"]
    for m, condition in ((b, "clean"), (b, "heavy_deposit"), (c, "blocked"), (c, "clean"), (a, "corroded")):
        record = MaintenanceRecord.objects.create(device=m, task=MaintenanceTask.objects.get(device=m,
                                                  code="VISUAL_INSPECTION"), performed_on=today, technician="T",
                                                  condition=condition, action="a", minutes_spent=10, created_by=tech)
        record.sign(by="T")
    MaintenanceRecord.objects.create(device=a, task=MaintenanceTask.objects.get(device=a, code="VISUAL_INSPECTION"),
                                     performed_on=today, technician="T", condition="blocked", action="draft",
                                     minutes_spent=1)  # a draft is not counted
    table = stats.condition_table(stats.findings_frame())
    rows = {(r.principle, r.fluid): r for r in table.itertuples()}
    water = rows[("Electromagnetic", "Raw water")]
    # by hand: 4 records on EM/raw water: 2 clean, 1 heavy deposit, 1 blocked -> fouled 2 of 4 = 50 %
    assert (water.inspections, water.clean, water.heavy_deposit, water.blocked, water.fouled_pct) == (4, 2, 1, 1, 50.0)
    caustic = rows[("Electromagnetic", "Caustic 2 %")]
    assert (caustic.inspections, caustic.corroded, caustic.fouled_pct) == (1, 1, 0.0)
    page = client.get("/maintenance/stats/").content.decode()
    assert "<svg" in page and "Heavy deposit or blocked (%)" in page and "Heavy deposit: 1 of 4" in page
    exported = list(csv.reader(io.StringIO(client.get("/maintenance/stats.csv").content.decode())))
    assert exported[0] == stats.COLUMNS and ["Electromagnetic", "Raw water", "4", "2", "0", "1", "1", "0", "0", "0",
                                             "0", "50.0"] in exported
    import openpyxl

    book = openpyxl.load_workbook(io.BytesIO(client.get("/maintenance/stats.xlsx").content))
    sheet = book["findings"]
    assert [c.value for c in sheet[1]][:3] == ["Principle", "Fluid", "Records"]
    assert sheet.max_row == 3
