"""Fleet statistics: hand-computed rates on a tiny fleet, CSV/XLSX exports equal the tables, and the page."""
import datetime as dt
import io
import math

import pandas as pd
import pytest
from django.utils import timezone

from calibration.models import CalibrationEvent
from plant.models import Area, Fluid, Device, Site
from plant.installations import commission
from reports import stats

pytestmark = pytest.mark.django_db

TODAY = timezone.localdate()


def device(tag, principle, area, fluid, drift):
    return commission(
        tag=tag, principle=principle, area=area, fluid=fluid, line_size="DN50", internal_diameter_mm=52.5,
        range_max=40, mpe_value=0.5, drift_rate_per_year=drift,
    )


def event(m, days_ago, found, state="signed", **extra):
    return CalibrationEvent.objects.create(
        device=m, performed_on=TODAY - dt.timedelta(days=days_ago), technician="T", procedure="P",
        state=state, as_found_in_tolerance=found, **extra,
    )


@pytest.fixture
def fleet():
    north, south = Site.objects.create(name="North"), Site.objects.create(name="South")
    a1, a2 = Area.objects.create(site=north, name="Hall 1"), Area.objects.create(site=south, name="Hall 2")
    water = Fluid.objects.create(name="Water", phase="liquid", conductivity_us_cm=500, density_kg_m3=998, viscosity_mpa_s=1)
    air = Fluid.objects.create(name="Air", phase="gas", density_kg_m3=1.2, viscosity_mpa_s=0.018)
    m1 = device("FT-1", "electromagnetic", a1, water, 0.3)
    m2 = device("FT-2", "vortex", a2, air, -0.4)
    m3 = device("FT-3", "vortex", a1, water, None)
    device("FT-4", "electromagnetic", a2, water, -0.6)  # no calibrations at all
    # FT-1: the event 60 days ago was corrected (the original, out of tolerance, is superseded)
    event(m1, 800, False), event(m1, 430, True), event(m1, 100, True), event(m1, 10, False)
    original = event(m1, 60, False)
    event(m1, 60, True, supersedes=original, correction_reason="As-found readings transposed")
    # FT-2: the event exactly 365 days ago is outside the 12-month window
    event(m2, 700, True), event(m2, 365, False), event(m2, 5, True)
    # FT-3: a signed event without an as-found verdict counts as a calibration but not in the rate; drafts are ignored
    event(m3, 500, True), event(m3, 200, True), event(m3, 30, None)
    event(m3, 50, False, state="draft")
    return {"north": north, "south": south}


def by_group(table):
    return table.set_index("group").to_dict("index")


def test_rates_intervals_and_drift_match_hand_computation(fleet, django_assert_max_num_queries):
    with django_assert_max_num_queries(2):
        events, devices = stats.fleet_frame(TODAY)
    by_principle, by_fluid = stats.fleet_statistics(events, devices, TODAY)
    assert list(by_principle.columns) == stats.COLUMNS == list(by_fluid.columns)
    assert list(by_principle["group"]) == ["Electromagnetic", "Vortex"]  # display names
    assert list(by_fluid["group"]) == ["Air", "Water"]

    p = by_group(by_principle)
    # Electromagnetic: FT-1 (-800 F, -430 T, -100 T, -60 T correction, -10 F) and FT-4 (none)
    assert p["Electromagnetic"]["meters"] == 2
    assert p["Electromagnetic"]["calibrations_12m"] == 3
    assert p["Electromagnetic"]["in_tolerance_12m_pct"] == pytest.approx(200 / 3)
    assert p["Electromagnetic"]["calibrations_all"] == 5
    assert p["Electromagnetic"]["in_tolerance_all_pct"] == pytest.approx(60.0)
    assert p["Electromagnetic"]["mean_interval_days"] == pytest.approx((370 + 330 + 40 + 50) / 4)
    assert p["Electromagnetic"]["mean_abs_drift_per_year"] == pytest.approx(0.45)
    # Vortex: FT-2 (-700 T, -365 F, -5 T) and FT-3 (-500 T, -200 T, -30 no verdict)
    assert p["Vortex"]["meters"] == 2
    assert p["Vortex"]["calibrations_12m"] == 3
    assert p["Vortex"]["in_tolerance_12m_pct"] == pytest.approx(100.0)
    assert p["Vortex"]["calibrations_all"] == 6
    assert p["Vortex"]["in_tolerance_all_pct"] == pytest.approx(80.0)
    assert p["Vortex"]["mean_interval_days"] == pytest.approx((335 + 360 + 300 + 170) / 4)
    assert p["Vortex"]["mean_abs_drift_per_year"] == pytest.approx(0.4)  # FT-3 has no drift rate

    f = by_group(by_fluid)
    assert f["Water"]["meters"] == 3 and f["Air"]["meters"] == 1
    assert (f["Water"]["calibrations_12m"], f["Water"]["calibrations_all"]) == (5, 8)
    assert f["Water"]["in_tolerance_12m_pct"] == pytest.approx(75.0)
    assert f["Water"]["in_tolerance_all_pct"] == pytest.approx(500 / 7)
    assert f["Water"]["mean_interval_days"] == pytest.approx((370 + 330 + 40 + 50 + 300 + 170) / 6)
    assert f["Water"]["mean_abs_drift_per_year"] == pytest.approx(0.45)
    assert (f["Air"]["calibrations_12m"], f["Air"]["calibrations_all"]) == (1, 3)
    assert f["Air"]["in_tolerance_12m_pct"] == pytest.approx(100.0)
    assert f["Air"]["in_tolerance_all_pct"] == pytest.approx(200 / 3)
    assert f["Air"]["mean_interval_days"] == pytest.approx(347.5)
    assert f["Air"]["mean_abs_drift_per_year"] == pytest.approx(0.4)


def test_as_of_date_and_site_filter(fleet):
    # as of 20 days ago, the events since then do not exist yet and the window moves back
    earlier = TODAY - dt.timedelta(days=20)
    p = by_group(stats.fleet_statistics(*stats.fleet_frame(earlier), earlier)[0])
    assert p["Electromagnetic"]["calibrations_all"] == 4  # not the one 10 days ago
    # window is now (-385, -20]: -365 F, -200 T, -30 no verdict; -5 is after the as-of date
    assert p["Vortex"]["calibrations_12m"] == 3
    assert p["Vortex"]["in_tolerance_12m_pct"] == pytest.approx(50.0)

    south = by_group(stats.fleet_statistics(*stats.fleet_frame(TODAY, site=fleet["south"]), TODAY)[0])
    assert south["Electromagnetic"]["meters"] == 1  # FT-4 only
    assert south["Electromagnetic"]["calibrations_all"] == 0
    assert math.isnan(south["Electromagnetic"]["in_tolerance_all_pct"])
    assert math.isnan(south["Electromagnetic"]["mean_interval_days"])
    assert south["Electromagnetic"]["mean_abs_drift_per_year"] == pytest.approx(0.6)
    assert south["Vortex"]["calibrations_all"] == 3 and south["Vortex"]["meters"] == 1


def test_empty_register_gives_empty_tables(db):
    by_principle, by_fluid = stats.fleet_statistics(*stats.fleet_frame(TODAY), TODAY)
    assert by_principle.empty and by_fluid.empty
    assert list(by_principle.columns) == stats.COLUMNS
    assert "<svg" in stats.in_tolerance_chart_svg(by_principle)


def expected():
    return stats.fleet_statistics(*stats.fleet_frame(), timezone.localdate())


@pytest.mark.parametrize("by, index", [("principle", 0), ("fluid", 1), (None, 0)])
def test_csv_reads_back_as_the_table(fleet, client, by, index):
    response = client.get("/stats.csv", {"by": by} if by else {})
    assert response.status_code == 200
    assert response["Content-Type"].startswith("text/csv")
    got = pd.read_csv(io.BytesIO(response.content))
    pd.testing.assert_frame_equal(got, expected()[index], check_dtype=False)


def test_csv_unknown_grouping_is_refused(fleet, client):
    response = client.get("/stats.csv", {"by": "site"})
    assert response.status_code == 400
    assert b"by=principle or by=fluid" in response.content


def test_xlsx_has_both_sheets_equal_to_the_tables(fleet, client):
    response = client.get("/stats.xlsx", {"site": fleet["north"].pk})
    assert response.status_code == 200
    sheets = pd.read_excel(io.BytesIO(response.content), sheet_name=None, engine="openpyxl")
    assert list(sheets) == ["by principle", "by fluid"]
    events, devices = stats.fleet_frame(site=fleet["north"])
    by_principle, by_fluid = stats.fleet_statistics(events, devices, timezone.localdate())
    pd.testing.assert_frame_equal(sheets["by principle"], by_principle, check_dtype=False)
    pd.testing.assert_frame_equal(sheets["by fluid"], by_fluid, check_dtype=False)


def test_page_shows_tables_chart_and_export_links(fleet, client):
    response = client.get("/stats/")
    assert response.status_code == 200
    html = response.content.decode()
    assert "<svg" in html and "in-tolerance rate by group" in html
    assert "/stats.csv?by=principle" in html and "/stats.csv?by=fluid" in html and "/stats.xlsx" in html
    by_principle, by_fluid = expected()
    for table in (by_principle, by_fluid):
        for row in table.itertuples(index=False):
            assert f"<td>{row.group}</td>" in html
            assert f"<td>{row.in_tolerance_all_pct:.1f}</td>" in html
    assert "<td>66.7</td>" in html and "<td>71.4</td>" in html


def test_page_site_filter_and_bad_site(fleet, client):
    response = client.get("/stats/", {"site": fleet["south"].pk})
    assert response.status_code == 200
    assert f"site={fleet['south'].pk}" in response.content.decode()  # carried to the export links
    assert "<td>Water</td>" in response.content.decode()
    assert client.get("/stats/", {"site": 999999}).status_code == 400
    assert client.get("/stats.csv", {"site": "x"}).status_code == 400


def test_demo_page_renders_with_bounded_queries(demo_history, client, django_assert_max_num_queries):
    with django_assert_max_num_queries(10):
        response = client.get("/stats/")
    assert response.status_code == 200
    html = response.content.decode()
    assert "<svg" in html
    by_principle, _ = expected()
    assert by_principle["calibrations_all"].sum() > 0
    for group in by_principle["group"]:
        assert f"<td>{group}</td>" in html
