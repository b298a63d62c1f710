"""The register: validation at the field, nothing half-saved, duty history, and pages on the demo plant."""
import datetime as dt
import re

import pytest
from django.core.exceptions import ValidationError
from django.test import Client
from django.test.utils import CaptureQueriesContext
from django.db import connection

from calibration.intervals import whole_days
from plant.forms import FluidForm
from plant.importer import RegisterRow, RegisterRowForm
from plant.models import Area, DutyPeriod, Fluid, Device, Site
from plant.installations import commission
from tests.helpers import user_with_role

pytestmark = pytest.mark.django_db


@pytest.fixture
def site_area_fluid():
    site = Site.objects.create(name="Test site")
    area = Area.objects.create(site=site, name="Hall A")
    fluid = Fluid.objects.create(name="Water", phase="liquid", conductivity_us_cm=500, density_kg_m3=998, viscosity_mpa_s=1.0)
    return site, area, fluid


def meter_data(area, fluid, **overrides):
    data = {
        "tag": "FT-1", "principle": "electromagnetic", "area": area.pk, "fluid": fluid.pk, "line_size": "DN50",
        "internal_diameter_mm": 52.5, "range_min": 0, "range_max": 40, "flow_units": "m3/h", "normal_flow": 20,
        "min_flow": 5, "wetted_material": "316L", "mpe_value": 0.5, "mpe_basis": "pct_reading",
        "base_interval_days": 365,
    }
    data.update(overrides)
    return data


def test_negative_conductivity_rejected_at_field():
    form = FluidForm(data={"name": "Bad", "phase": "liquid", "conductivity_us_cm": -3})
    assert not form.is_valid()
    assert form.errors["conductivity_us_cm"] == ["Conductivity cannot be negative."]
    with pytest.raises(ValidationError):
        Fluid.objects.create(name="Bad", phase="liquid", conductivity_us_cm=-3)
    assert Fluid.objects.count() == 0


def new_row(data):
    """The register's new-meter row: a new position with a new device installed there (plant/importer.py)."""
    return RegisterRowForm(data=data, instance=RegisterRow())


def test_min_flow_above_range_rejected_at_field(site_area_fluid):
    _, area, fluid = site_area_fluid
    form = new_row(meter_data(area, fluid, min_flow=55, normal_flow=None))
    assert not form.is_valid()
    assert "above the calibrated range high (40 m³/h)" in form.errors["min_flow"][0]
    assert Device.objects.count() == 0
    assert DutyPeriod.objects.count() == 0


def test_duplicate_tag_rejected_at_field(site_area_fluid):
    _, area, fluid = site_area_fluid
    first = new_row(meter_data(area, fluid))
    assert first.is_valid()
    first.save()
    form = new_row(meter_data(area, fluid))
    assert not form.is_valid()
    assert form.errors["tag"] == ["A position with this tag already exists."]
    assert Device.objects.count() == 1
    assert DutyPeriod.objects.count() == 1


def test_duty_change_is_kept_in_history(site_area_fluid):
    site, area, fluid = site_area_fluid
    form = new_row(meter_data(area, fluid))
    assert form.is_valid()
    device = form.save().device
    brine = Fluid.objects.create(name="Brine", phase="liquid", conductivity_us_cm=60000, chlorides=True)
    position = device.position
    position.fluid = brine  # the duty is the position's: the device installed there serves the new one
    position.save()
    duties = list(device.duties.order_by("id"))
    assert [d.fluid.name for d in duties] == ["Water", "Brine"]
    assert duties[0].until is not None and duties[1].until is None
    device.serial = "SN-CHANGED"  # a save that is not a duty change adds no period
    device.save()
    assert device.duties.count() == 2


def test_effective_interval_uses_smallest_factor(site_area_fluid):
    _, area, _ = site_area_fluid
    brine = Fluid.objects.create(name="Brine", phase="liquid", conductivity_us_cm=60000, chlorides=True)
    form = new_row(meter_data(area, brine, wetted_material="316L"))
    assert form.is_valid()
    device = Device.objects.get(pk=form.save().device.pk)
    findings = device.findings()
    assert findings, "EM with stainless electrodes on brine must be flagged"
    factor = min(f.interval_factor for f in findings)
    assert device.effective_interval_days() == whole_days(365 * factor)  # the one rounding rule, halves up


def test_demo_plant_size_and_mix(demo_plant):
    assert Device.objects.count() >= 40
    assert Fluid.objects.count() >= 8
    severities = {tag: {f.severity for f in m.findings()} for m in Device.objects.filter(position__isnull=False).select_related("position__fluid") for tag in [m.tag]}
    assert any("misapplied" in s for s in severities.values())
    assert any(not s for s in severities.values()), "some meters must be clean"
    assert any("high" in s for s in severities.values())


def test_meter_list_and_filters(client, demo_plant):
    response = client.get("/positions/")
    assert response.status_code == 200
    assert b"FT-110" in response.content
    response = client.get("/positions/", {"principle": "coriolis", "sort": "tag"})
    body = response.content.decode()
    assert "FT-112" in body and "FT-110" not in body
    response = client.get("/positions/", {"q": "FT-70"})
    body = response.content.decode()
    assert "FT-701" in body and "FT-110" not in body


def test_every_meter_page_renders(client, demo_plant):
    for device in Device.objects.filter(position__isnull=False).select_related("position"):
        response = client.get(f"/positions/{device.tag}/")
        assert response.status_code == 200, device.tag
        assert f"Base interval set for this meter: <strong>{device.base_interval_days} days</strong>".encode() \
            in response.content  # never calibrated: due now, from the set base interval


def test_misapplied_meter_page_says_why(client, demo_plant):
    body = client.get("/positions/FT-401/").content.decode()  # EM meter on vegetable oil (0.0001 µS/cm)
    # Common practice (plant/risk.py): below ~5 µS/cm a magmeter cannot work: not fit, factor 0.25, and the
    # recommendation stands beside the shortened interval.
    assert "Not fit for this duty: replace or re-engineer." in body
    assert "not fit for this duty · interval factor 0.25" in body
    assert "Liquid too poorly conductive for a magnetic meter" in body  # plain words ...
    assert "EM_LOW_CONDUCTIVITY" not in body  # ... not the code
    assert "Why:" in body
    fit = client.get("/positions/FT-204/").content.decode()  # EM meter on town water
    assert "Not fit for this duty" not in fit


def test_unknown_meter_is_404(client, demo_plant):
    assert client.get("/positions/NOPE-1/").status_code == 404


@pytest.mark.parametrize("text", ["not titanium: 316L", "Hastelloy C-276", "316 L", "Stainless steel 316L"])
def test_wetted_material_off_the_list_refused_at_field(site_area_fluid, text):
    # Issue 17 item 7: a fixed list; the form posts codes, so free text (and a label) is refused with a message.
    _, area, fluid = site_area_fluid
    form = new_row(meter_data(area, fluid, wetted_material=text))
    assert not form.is_valid()
    assert form.errors["wetted_material"] == [
        f'"{text}" is not on the list of wetted materials; choose one of the list (its code or name), '
        "or leave it blank and describe it under material details."]
    with pytest.raises(ValidationError) as refused:
        commission(tag="FT-X", principle="coriolis", area=area, fluid=fluid, line_size="DN25",
                             internal_diameter_mm=26.6, range_max=8, mpe_value=0.2, wetted_material=text)
    assert "wetted_material" in refused.value.message_dict
    assert Device.objects.count() == 0 and DutyPeriod.objects.count() == 0


def test_wetted_material_from_the_list_saved_with_details(site_area_fluid):
    _, area, fluid = site_area_fluid
    form = new_row(meter_data(area, fluid, wetted_material="alloy C-276", material_details="PTFE liner"))
    assert form.is_valid()
    device = form.save().device
    assert (device.wetted_material, device.material_details) == ("alloy C-276", "PTFE liner")
    assert device.get_wetted_material_display() == "Nickel alloy C-276"


# The register's columns (issue 15 item 9) -----------------------------------------------------------------------------
def _rows(body):
    """Tag -> the text of its register row."""
    rows = {}
    for row in re.findall(r"<tr[^>]*>(.*?)</tr>", body, flags=re.S):
        cells = [" ".join(re.sub(r"<[^>]+>", " ", c).split()) for c in re.findall(r"<td[^>]*>(.*?)</td>", row, re.S)]
        if cells:
            rows[cells[0]] = cells
    return rows


@pytest.fixture
def small_register(site_area_fluid):
    _, area, fluid = site_area_fluid
    make = dict(principle="electromagnetic", area=area, fluid=fluid, line_size="DN50", internal_diameter_mm=52.5,
                range_max=40, mpe_value=0.5, wetted_material="316L")
    commission(tag="FT-NEVER", **make)
    commission(tag="FT-GOOD", **make)
    commission(tag="FT-BAD", **make)
    # the stored fields the due-date recompute keeps (tested in test_due_dates.py)
    Device.objects.filter(position__tag="FT-GOOD").update(next_due_date=dt.date(2027, 6, 1), last_calibrated=dt.date(2026, 6, 1),
                                               last_in_tolerance=True, drift_status="flat")
    Device.objects.filter(position__tag="FT-BAD").update(next_due_date=dt.date(2027, 1, 15), last_calibrated=dt.date(2026, 11, 1),
                                              last_in_tolerance=False, drift_status="out_of_tolerance")
    return area, fluid


def test_register_shows_due_last_verdict_drift_and_calibrate(client, small_register):
    body = client.get("/positions/").content.decode()
    for heading in ("Due date", "Last calibrated", "Last verdict", "Drift"):
        assert f">{heading}<" in body
    rows = _rows(body)
    assert rows["FT-GOOD"][:5] == ["FT-GOOD", "2027-06-01", "2026-06-01", "in tolerance", "no significant drift"]
    assert rows["FT-BAD"][:5] == ["FT-BAD", "2027-01-15", "2026-11-01", "out of tolerance",
                                  "last found out of tolerance"]
    assert rows["FT-NEVER"][:5] == ["FT-NEVER", "now (never calibrated)", "—", "—", "—"]
    assert rows["FT-GOOD"][5] == "Calibrate"
    assert 'href="/positions/FT-BAD/calibrate/"' in body


def test_calibrate_action_only_for_those_allowed_to_calibrate(small_register):
    technician, reviewer = Client(), Client()
    technician.force_login(user_with_role("technician"))
    reviewer.force_login(user_with_role("reviewer"))  # reviewers countersign; they do not enter calibrations
    assert 'href="/positions/FT-BAD/calibrate/"' in technician.get("/positions/").content.decode()
    assert "/calibrate/" not in reviewer.get("/positions/").content.decode()


@pytest.mark.parametrize("sort, expected", [
    # never calibrated counts as most urgent: first by due date, last when the order is reversed
    ("next_due_date", ["FT-NEVER", "FT-BAD", "FT-GOOD"]),
    ("-next_due_date", ["FT-GOOD", "FT-BAD", "FT-NEVER"]),
    ("last_calibrated", ["FT-NEVER", "FT-GOOD", "FT-BAD"]),
    ("last_in_tolerance", ["FT-BAD", "FT-NEVER", "FT-GOOD"]),  # out, not yet judged, in
    ("drift_status", ["FT-BAD", "FT-GOOD", "FT-NEVER"]),  # out of tolerance, flat, blank
])
def test_register_sorts_by_the_new_columns(client, small_register, sort, expected):
    assert list(_rows(client.get("/positions/", {"sort": sort}).content.decode())) == expected


def test_register_query_count_does_not_grow_with_fleet(client, small_register):
    area, fluid = small_register
    with CaptureQueriesContext(connection) as small:
        assert client.get("/positions/", {"sort": "next_due_date"}).status_code == 200
    for i in range(60):
        commission(tag=f"FT-X{i:03d}", principle="vortex", area=area, fluid=fluid, line_size="DN50",
                             internal_diameter_mm=52.5, range_max=40, mpe_value=1)
    with CaptureQueriesContext(connection) as large:
        body = client.get("/positions/", {"sort": "next_due_date"}).content.decode()
    assert "63 meters" in body
    assert len(large.captured_queries) == len(small.captured_queries)


def test_overdue_due_dates_stand_out(client, small_register):
    # Due yesterday at the site is overdue, due tomorrow is not, never calibrated is due now. (The clock is not
    # moved: the login session would expire with it.)
    today = Site.objects.get().today()
    Device.objects.filter(position__tag="FT-BAD").update(next_due_date=today - dt.timedelta(days=1))
    Device.objects.filter(position__tag="FT-GOOD").update(next_due_date=today + dt.timedelta(days=1))
    body = client.get("/positions/").content.decode()
    marked = re.findall(r'<td class="nowrap overdue"[^>]*>\s*([^<]*?)\s*</td>', body)
    assert sorted(marked) == [(today - dt.timedelta(days=1)).isoformat(), "now (never calibrated)"]
