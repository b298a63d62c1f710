"""Position pages have their own address, /positions/<tag>/, and views and templates of their own; every address
they had under /meters/ answers with the new one for good (bookmarks, links in kept pages, printed sheets)."""
import pytest
from django.urls import reverse

from plant.installations import commission
from plant.models import Area, Fluid, Site

pytestmark = pytest.mark.django_db

OLD_TO_NEW = [
    ("/meters/", "/positions/"),
    ("/meters/?principle=electromagnetic&sort=next_due_date", "/positions/?principle=electromagnetic&sort=next_due_date"),
    ("/meters/import/", "/positions/import/"),
    ("/meters/export.csv?kind=meters", "/positions/export.csv?kind=meters"),
    ("/meters/export.xlsx?kind=fluids", "/positions/export.xlsx?kind=fluids"),
    ("/meters/FT-A1/", "/positions/FT-A1/"),
    ("/meters/FT-A1/calibrate/", "/positions/FT-A1/calibrate/"),
    ("/meters/FT-A1/edit/", "/positions/FT-A1/edit/"),
    ("/meters/FT-A1/swap/", "/positions/FT-A1/swap/"),
    ("/meters/FT-A1/maintain/", "/positions/FT-A1/maintain/"),
    ("/meters/FT-A1/tasks/add/", "/positions/FT-A1/tasks/add/"),
    ("/meters/FT%20B%C3%A9/?x=1#no", "/positions/FT%20B%C3%A9/?x=1"),
]


@pytest.fixture
def position():
    site = Site.objects.create(name="Works")
    area = Area.objects.create(site=site, name="Filters")
    water = Fluid.objects.create(name="Filtered water", phase="liquid", conductivity_us_cm=300)
    device = commission(tag="FT-A1", principle="electromagnetic", area=area, fluid=water, line_size="DN80",
                        internal_diameter_mm=80, range_min=0, range_max=50, mpe_value=0.5, mpe_basis="pct_reading")
    return device.position


@pytest.mark.parametrize("old, new", OLD_TO_NEW)
def test_every_old_address_redirects_for_good(client, old, new):
    response = client.get(old)
    assert response.status_code == 301, old
    assert response["Location"] == new


def test_a_form_posted_to_an_old_address_keeps_its_method(client):
    # a page kept on a tablet before the move posts to its old address: a 301 would turn the post into a GET
    response = client.post("/meters/FT-A1/calibrate/", {"procedure": "x"})
    assert response.status_code == 308 and response["Location"] == "/positions/FT-A1/calibrate/"


def test_the_start_page_is_the_register(client):
    response = client.get("/")
    assert response.status_code == 302 and response["Location"] == "/positions/"


def test_url_names():
    assert reverse("plant:position-list") == "/positions/"
    for name, tail in [("position-detail", ""), ("position-calibrate", "calibrate/"), ("position-edit", "edit/"),
                       ("position-swap", "swap/"), ("position-maintain", "maintain/"),
                       ("position-task-add", "tasks/add/")]:
        assert reverse(f"plant:{name}", args=["FT-A1"]) == f"/positions/FT-A1/{tail}"


def test_position_and_device_pages_have_templates_of_their_own(client, position):
    device = position.installed_device()
    assert position.get_absolute_url() == "/positions/FT-A1/"
    page = client.get("/positions/FT-A1/")
    assert page.status_code == 200
    assert [t.name for t in page.templates][0] == "plant/position_detail.html"
    html = page.content.decode()
    assert 'id="position-moves"' in html and 'id="position-card"' in html and 'id="device-card"' in html
    assert 'id="maintenance"' in html and 'class="chart"' in html  # the sections other apps register
    device_page = client.get(f"/devices/{device.pk}/")
    assert [t.name for t in device_page.templates][0] == "plant/device_detail.html"
    html = device_page.content.decode()
    assert 'id="device-card"' in html and 'id="position-moves"' not in html and 'id="maintenance"' in html
    assert 'href="/devices/">Spares</a>' in html.replace('class="button secondary" ', "")
    for tail in ("", "calibrate/", "edit/", "swap/", "maintain/", "tasks/add/"):
        assert client.get(f"/positions/FT-A1/{tail}").status_code == 200, tail
