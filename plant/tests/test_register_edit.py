"""Reviewers change a meter's interval and duty, and a fluid's properties, through checked forms."""
import pytest
from django.test import Client

from plant.models import Area, Fluid, Device, Position, Site
from plant.installations import commission
from tests.helpers import user_with_role

pytestmark = pytest.mark.django_db


@pytest.fixture
def device():
    area = Area.objects.create(site=Site.objects.create(name="Edit site"), name="Hall")
    water = Fluid.objects.create(name="Water", phase="liquid", conductivity_us_cm=400)
    return commission(tag="FT-E1", principle="electromagnetic", area=area, fluid=water, line_size="DN50",
                                internal_diameter_mm=52.5, range_max=40, normal_flow=20, min_flow=12,
                      mpe_value=0.5, wetted_material="316L")


@pytest.fixture
def reviewer():
    client = Client()
    client.force_login(user_with_role("reviewer"))
    return client


def form_data(instance, **changes):
    data = {}
    for f in instance._meta.concrete_fields:
        if not f.editable or f.primary_key:
            continue
        value = getattr(instance, f.attname)
        if isinstance(value, bool):
            if value:
                data[f.name] = "on"
            continue
        data[f.name] = "" if value is None else value
    data.update(changes)
    return {k: v for k, v in data.items() if v is not False}


def test_reviewer_changes_the_interval_and_the_change_is_audited(reviewer, device):
    # the interval is the device's: edited on the device, the page then shown is its position's
    response = reviewer.post(f"/devices/{device.pk}/edit/", form_data(device, base_interval_days=180))
    assert response.status_code == 302 and response["Location"] == f"/positions/{device.tag}/"
    device.refresh_from_db()
    assert device.base_interval_days == 180
    latest = device.history.first()
    assert latest.history_user.username == "reviewer"
    assert [(c.field, c.old, c.new) for c in latest.diff_against(latest.prev_record).changes] == [
        ("base_interval_days", 365, 180)]


def test_bad_values_are_refused_at_the_field_and_nothing_is_saved(reviewer, device):
    before = Device.objects.values().get(pk=device.pk), Position.objects.values().get(pk=device.position_id)
    audit = device.history.count(), device.position.history.count()
    cases = [
        (device, {"base_interval_days": "0"}, "The interval must be at least one day."),
        (device, {"range_max": "abc"}, "Enter a number."),
        (device, {"mpe_value": "-1"}, "MPE must be greater than zero."),
        (device, {"range_max": "10", "range_min": "0"}, "is above the calibrated range high"),  # below FT-E1's flows
        (device.position, {"min_flow": "50", "normal_flow": "60"}, "is above the calibrated range high"),
        (device.position, {"min_flow": "-1"}, "A process flow cannot be negative."),
    ]
    for instance, change, message in cases:
        url = f"/positions/{device.tag}/edit/" if isinstance(instance, Position) else f"/devices/{device.pk}/edit/"
        response = reviewer.post(url, form_data(instance, **change))
        assert response.status_code == 400, change
        assert message in response.content.decode(), (change, message)
    assert (Device.objects.values().get(pk=device.pk), Position.objects.values().get(pk=device.position_id)) == before
    assert (device.history.count(), device.position.history.count()) == audit  # nothing recorded


def test_fluid_change_rejudges_its_meters(reviewer, device):
    fluid = device.fluid
    response = reviewer.post(f"/fluids/{fluid.pk}/edit/", form_data(fluid, conductivity_us_cm="0.5"))
    assert response.status_code == 302
    assert Device.objects.get(pk=device.pk).risk_severity == "misapplied"
    page = reviewer.get(f"/positions/{device.tag}/").content.decode()
    assert "Liquid too poorly conductive for a magnetic meter" in page  # EM_LOW_CONDUCTIVITY, in plain words
    assert "Not fit for this duty: replace or re-engineer." in page
    response = reviewer.post(f"/fluids/{fluid.pk}/edit/", form_data(fluid, conductivity_us_cm="-3"))
    assert response.status_code == 400 and "Conductivity cannot be negative." in response.content.decode()
    assert Fluid.objects.get(pk=fluid.pk).conductivity_us_cm == 0.5
