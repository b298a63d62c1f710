"""Today's date where the meters are (issue 17 item 8): pure date arithmetic and the defaults that use it.

Hand-worked expectations from the IANA time zone database offsets: Pacific/Auckland is UTC+13 in December
(daylight time), America/Chicago UTC-6 in December, Europe/London UTC+0 in December.
"""
import datetime as dt

import pytest
from django.core.exceptions import ValidationError
from django.utils import timezone as django_timezone

from calibration.forms import CalibrationEntry
from plant import localtime
from plant.models import Area, Fluid, Site
from plant.installations import commission

LATE_EVENING_UTC = dt.datetime(2026, 12, 4, 23, 30, tzinfo=dt.timezone.utc)
EARLY_MORNING_UTC = dt.datetime(2026, 12, 5, 3, 0, tzinfo=dt.timezone.utc)


@pytest.mark.parametrize("instant, zone, expected", [
    (LATE_EVENING_UTC, "Pacific/Auckland", dt.date(2026, 12, 5)),  # 12:30 next day
    (LATE_EVENING_UTC, "Europe/London", dt.date(2026, 12, 4)),  # 23:30 same day
    (EARLY_MORNING_UTC, "America/Chicago", dt.date(2026, 12, 4)),  # 21:00 the day before
    (EARLY_MORNING_UTC, "UTC", dt.date(2026, 12, 5)),
])
def test_local_date_hand_worked(instant, zone, expected):
    assert localtime.local_date(instant, zone) == expected


def test_local_date_needs_an_aware_instant():
    with pytest.raises(ValueError):
        localtime.local_date(dt.datetime(2026, 12, 4, 23, 30), "UTC")


@pytest.fixture
def auckland_meter(db, monkeypatch):
    monkeypatch.setattr(django_timezone, "now", lambda: LATE_EVENING_UTC)
    site = Site.objects.create(name="South site", time_zone="Pacific/Auckland")
    area = Area.objects.create(site=site, name="Hall")
    water = Fluid.objects.create(name="Water", phase="liquid", conductivity_us_cm=500, temperature_c=20)
    return commission(tag="FT-NZ", principle="electromagnetic", area=area, fluid=water, line_size="DN50",
                                internal_diameter_mm=52.5, range_max=40, mpe_value=0.5, wetted_material="316L")


def test_calibration_date_default_is_the_sites_date(auckland_meter):
    # 2026-12-04 23:30 UTC is 2026-12-05 in Auckland: the form offers the 5th, not the UTC date.
    entry = CalibrationEntry(auckland_meter)
    assert entry.event_form.initial["performed_on"] == dt.date(2026, 12, 5)


def test_duty_change_dated_at_the_site(auckland_meter):
    assert auckland_meter.duties.get().since == dt.date(2026, 12, 5)


def test_site_without_zone_uses_the_plant_setting(db, monkeypatch, settings):
    monkeypatch.setattr(django_timezone, "now", lambda: EARLY_MORNING_UTC)
    settings.TIME_ZONE = "America/Chicago"
    assert Site(name="Plain").today() == dt.date(2026, 12, 4)
    assert Site(name="Own", time_zone="UTC").today() == dt.date(2026, 12, 5)


@pytest.mark.parametrize("name", ["Mars/Olympus", "UTC+3", "../etc/passwd", "Europe"])
def test_unknown_time_zone_refused_at_the_field(db, name):
    site = Site(name="Bad zone", time_zone=name)
    with pytest.raises(ValidationError) as refused:
        site.full_clean()
    assert list(refused.value.message_dict) == ["time_zone"]
    assert "IANA name" in refused.value.message_dict["time_zone"][0]
    with pytest.raises(ValidationError):
        Site.objects.create(name="Bad zone", time_zone=name)  # save() checks too
    assert Site.objects.count() == 0


def test_maintenance_entry_and_task_dates_are_the_sites(auckland_meter, client):
    # the entry page's date, the start of the tasks the duty calls for and the date an offline entry page
    # was rendered are the 5th at an Auckland position while the server's date (UTC) is still the 4th
    page = client.get(f"/positions/{auckland_meter.tag}/maintain/")
    assert page.status_code == 200
    assert page.context["form"].initial["performed_on"] == dt.date(2026, 12, 5)
    assert '"rendered_on": "2026-12-05"' in page.content.decode()
    from maintenance.sync import sync_tasks

    auckland_meter.maintenance_tasks.all().delete()  # set up again, now that the device is installed there
    sync_tasks(auckland_meter)
    tasks = list(auckland_meter.maintenance_tasks.all())
    assert tasks and {t.since for t in tasks} == {dt.date(2026, 12, 5)}


def test_the_offline_kit_counts_the_weeks_from_the_sites_date(auckland_meter, admin_user):
    from offline.kit import DEFAULTS, due_meters

    # due on the last day of the kit's weeks counted from the 5th, one day beyond them from the 4th
    last = dt.date(2026, 12, 5) + dt.timedelta(weeks=DEFAULTS["weeks_ahead"])
    type(auckland_meter).objects.filter(pk=auckland_meter.pk).update(next_due_date=last)
    assert list(due_meters(admin_user)) == [auckland_meter]
