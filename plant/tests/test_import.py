"""Bulk import / export of the register: dry run, row-level errors, all-or-nothing apply, round trips."""
import io

import pandas as pd
import pytest
from django.core.files.uploadedfile import SimpleUploadedFile
from django.urls import reverse

from plant import importer
from plant.models import Area, DutyPeriod, Fluid, Device, Position, Site
from plant.installations import commission

pytestmark = pytest.mark.django_db


@pytest.fixture(autouse=True)
def media(settings, tmp_path):
    """Files kept between a dry run and its apply go under a MEDIA_ROOT of the test's own."""
    settings.MEDIA_ROOT = tmp_path / "media"
    return settings.MEDIA_ROOT

@pytest.fixture
def logged_in_client(client, django_user_model):
    user = django_user_model.objects.create_superuser("importer", "importer@example.com", "pw")
    client.force_login(user)
    return client


@pytest.fixture
def register():
    site = Site.objects.create(name="North")
    hall = Area.objects.create(site=site, name="Hall A")
    water = Fluid.objects.create(name="Water", phase="liquid", conductivity_us_cm=500, density_kg_m3=998,
                                 viscosity_mpa_s=1.0, temperature_c=20)
    Fluid.objects.create(name="Brine", phase="liquid", conductivity_us_cm=60000, chlorides=True)
    base = dict(principle="electromagnetic", area=hall, fluid=water, line_size="DN50", internal_diameter_mm=52.5,
                range_min=0, range_max=40, normal_flow=20, min_flow=5, wetted_material="316L", mpe_value=0.5)
    commission(tag="FT-100", serial="SN1", **base)
    commission(tag="FT-101", serial="SN2", **{**base, "wetted_material": "alloy C-276",
                                                         "material_details": "PTFE liner"})
    return {"site": site, "hall": hall, "water": water}


METER_HEADER = ",".join(importer.METER_COLUMNS)


def meter_line(tag, **overrides):
    values = {
        "tag": tag, "principle": "electromagnetic", "site": "North", "area": "Hall A", "fluid": "Water",
        "line_size": "DN50", "internal_diameter_mm": "52.5", "range_min": "0", "range_max": "40",
        "flow_units": "m³/h", "normal_flow": "20", "min_flow": "5", "wetted_material": "316L", "material_details": "",
        "serial": "", "maker": "", "model": "", "mpe_value": "0.5", "mpe_basis": "pct_reading", "base_interval_days": "365",
        "required_accuracy_pct": "",
    }
    values.update(overrides)
    return ",".join(values[c] for c in importer.METER_COLUMNS)


def csv_bytes(*lines, header=METER_HEADER):
    return ("\n".join([header, *lines]) + "\n").encode("utf-8")


def counts():
    return (Site.objects.count(), Area.objects.count(), Fluid.objects.count(), Device.objects.count(),
            DutyPeriod.objects.count())


def good_file():
    return csv_bytes(
        meter_line("FT-100", serial="SN1"),  # unchanged
        meter_line("FT-101", serial="SN2", range_max="60", fluid="Brine", wetted_material="alloy C-276",
                   material_details="PTFE liner"),  # update
        meter_line("FT-200", site="South", area="Pump house"),  # create, with a new site and area
        meter_line("FT-201", principle="Coriolis", wetted_material="", min_flow=""),  # label accepted for choice
    )


def plan_for(content, kind="meters", filename="meters.csv"):
    return importer.plan_import(kind, importer.read_table(content, filename))


# Planning ---------------------------------------------------------------------------------------------------------
def test_dry_run_plans_creates_and_updates_and_saves_nothing(register):
    before = counts()
    plan = plan_for(good_file())
    assert plan.ok, plan.errors
    assert [(r.row_number, r.key, r.action) for r in plan.rows] == [
        (2, "FT-100", "unchanged"), (3, "FT-101", "update"), (4, "FT-200", "create"), (5, "FT-201", "create"),
    ]
    changes = {c.column: (c.old, c.new) for c in plan.rows[1].changes}
    assert changes == {"fluid": ("Water", "Brine"), "range_max": ("40", "60")}
    assert plan.creates == ["site South", "area South / Pump house"]
    assert plan.rows[2].notes == ["creates site South", "creates area South / Pump house"]
    assert plan.counts == {"create": 2, "update": 1, "unchanged": 1}
    assert counts() == before
    assert Device.objects.get(position__tag="FT-101").range_max == 40


def test_bad_rows_reported_at_row_and_column_with_model_messages(register):
    content = csv_bytes(
        meter_line("FT-300"),
        meter_line("FT-301", min_flow="55", normal_flow=""),  # row 3: min flow above range
        meter_line("FT-300"),  # row 4: duplicate tag in the file
        meter_line("FT-302", fluid="Mercury"),  # row 5: unknown fluid
        meter_line("FT-303", internal_diameter_mm="fifty"),  # row 6: not a number
    )
    plan = plan_for(content)
    found = {(e.row_number, e.column): e.message for e in plan.errors}
    assert "above the calibrated range high (40 m³/h)" in found[(3, "min_flow")]
    assert found[(4, "tag")] == 'Duplicate tag "FT-300" in the file (first on row 2).'
    assert 'Unknown fluid "Mercury"' in found[(5, "fluid")]
    assert found[(6, "internal_diameter_mm")] == "Enter a number."
    assert len(plan.errors) == 4, plan.errors  # no knock-on "This field is required." for the unknown fluid

    fluid_plan = plan_for(
        csv_bytes("Oil,liquid,-3,,,,,,,,,,", "Gas,vapour,,,,,,,,,,,", header=",".join(importer.FLUID_COLUMNS)),
        kind="fluids", filename="fluids.csv",
    )
    errors = {(e.row_number, e.column): e.message for e in fluid_plan.errors}
    assert errors[(2, "conductivity_us_cm")] == "Conductivity cannot be negative."
    assert errors[(3, "phase")].startswith("Select a valid choice.")

    before = counts()
    result = importer.apply_import(plan)
    assert not result.applied
    assert counts() == before
    assert not Device.objects.filter(position__tag__startswith="FT-30").exists()


def test_missing_required_columns_is_one_error(register):
    plan = plan_for(b"tag,principle,site\nFT-1,vortex,North\n")
    assert len(plan.errors) == 1
    error = plan.errors[0]
    assert error.row_number == 1
    assert "area" in error.column and "fluid" in error.column and "range_max" in error.column
    assert "Missing required column" in error.message


def test_booleans_and_unknown_extension(register):
    header = ",".join(importer.FLUID_COLUMNS)
    plan = plan_for(csv_bytes("Slurry A,Slurry,,1200,,Yes,no,1,0,,TRUE,,", "Slurry B,slurry,,,,maybe,,,,,,,",
                              header=header), kind="fluids", filename="f.csv")
    assert [(e.row_number, e.column) for e in plan.errors] == [(3, "solids")]
    with pytest.raises(importer.ImportFileError, match="Unsupported file type"):
        importer.read_table(b"name\nx\n", "register.ods")


# Applying ---------------------------------------------------------------------------------------------------------
def test_good_file_applies_everything(register):
    plan = plan_for(good_file())
    result = importer.apply_import(plan)
    assert result.applied and result.counts == {"create": 2, "update": 1, "unchanged": 1}
    moved = Device.objects.get(position__tag="FT-101")
    assert (moved.fluid.name, moved.range_max) == ("Brine", 60)
    assert list(moved.duties.order_by("id").values_list("fluid__name", flat=True)) == ["Water", "Brine"]
    new = Device.objects.get(position__tag="FT-200")
    assert (new.area.site.name, new.area.name) == ("South", "Pump house")
    assert Device.objects.get(position__tag="FT-201").principle == "coriolis"
    assert Device.objects.get(position__tag="FT-201").min_flow is None
    assert Device.objects.count() == 4


@pytest.mark.parametrize("failing", ["update", "bulk write", "recompute"])
def test_failure_mid_apply_rolls_back_everything(register, monkeypatch, failing):
    """A failure anywhere in the apply (the changed row saved one by one, a bulk write of the new rows, the due-date
    recompute that ends it) leaves the register as it was."""
    before = counts()

    def fail(*args, **kwargs):
        raise RuntimeError("disk on fire")

    content = csv_bytes(
        meter_line("FT-100", serial="SN1-NEW"),
        meter_line("FT-400", site="West", area="Roof"),
        meter_line("FT-401"),
        meter_line("FT-402"),
    )
    plan = plan_for(content)
    assert plan.ok and plan.counts["create"] == 3
    if failing == "update":
        monkeypatch.setattr(Device, "save", fail)
    elif failing == "bulk write":  # the fourth table written in bulk (after positions and devices)
        original, calls = importer._insert, []

        def fail_fourth(*args, **kwargs):
            calls.append(args[0])
            if len(calls) == 4:
                fail()
            return original(*args, **kwargs)

        monkeypatch.setattr(importer, "_insert", fail_fourth)
        if not importer._fast_writes():
            monkeypatch.setattr(DutyPeriod.objects, "bulk_create", fail)
    else:
        monkeypatch.setattr("scheduling.fleet.recompute_due_dates", fail)
    with pytest.raises(RuntimeError, match="disk on fire"):
        importer.apply_import(plan)
    monkeypatch.undo()
    assert counts() == before
    assert Device.objects.get(position__tag="FT-100").serial == "SN1"
    assert not Site.objects.filter(name="West").exists()
    assert not Position.objects.filter(tag__startswith="FT-40").exists()


# Round trips ------------------------------------------------------------------------------------------------------
@pytest.mark.parametrize("kind", ["meters", "fluids"])
def test_export_csv_reimports_unchanged(register, kind, logged_in_client):
    Fluid.objects.create(name="Steam 10 bar", phase="steam", temperature_c=184.1, notes="line 1\nline 2, with comma")
    response = logged_in_client.get(reverse("plant:export-csv"), {"kind": kind})
    assert response.status_code == 200
    assert response["Content-Disposition"].endswith(f'{kind}-register.csv"')
    frame = pd.read_csv(io.BytesIO(response.content), encoding="utf-8-sig", dtype=str, keep_default_na=False)
    assert list(frame.columns) == importer.KINDS[kind]["columns"]
    plan = plan_for(response.content, kind=kind, filename="export.csv")
    assert plan.ok, plan.errors
    assert plan.rows and {r.action for r in plan.rows} == {"unchanged"}


@pytest.mark.parametrize("kind", ["meters", "fluids"])
def test_export_xlsx_reimports_unchanged(register, kind, logged_in_client):
    response = logged_in_client.get(reverse("plant:export-xlsx"), {"kind": kind})
    assert response.status_code == 200
    assert response["Content-Type"].startswith("application/vnd.openxmlformats")
    plan = plan_for(response.content, kind=kind, filename="export.xlsx")
    assert plan.ok, plan.errors
    assert plan.rows and {r.action for r in plan.rows} == {"unchanged"}


def test_export_rows_same_columns(register):
    assert list(importer.export_rows("meters").columns) == importer.METER_COLUMNS
    assert list(importer.export_rows("fluids").columns) == importer.FLUID_COLUMNS


# Views ------------------------------------------------------------------------------------------------------------
def upload(content, name="meters.csv"):
    return SimpleUploadedFile(name, content, content_type="text/csv")


def test_import_page_shows_form(logged_in_client):
    response = logged_in_client.get(reverse("plant:import"))
    assert response.status_code == 200
    body = response.content.decode()
    assert "csrfmiddlewaretoken" in body and 'name="dry_run"' in body and "checked" in body


def test_view_dry_run_shows_plan_and_saves_nothing(register, logged_in_client):
    before = counts()
    response = logged_in_client.post(reverse("plant:import"),
                                     {"kind": "meters", "dry_run": "on", "file": upload(good_file())})
    assert response.status_code == 200
    body = response.content.decode()
    assert "FT-200" in body and "creates area South / Pump house" in body and "Apply 3 changes" in body
    assert counts() == before

    # the "Apply" button names the file kept on the server: the file itself is not in the page
    apply_form = response.context["apply_form"]
    token = apply_form.initial["token"]
    assert token in body and "payload" not in body
    assert good_file().decode().splitlines()[3] not in body
    response = logged_in_client.post(reverse("plant:import"), {"kind": "meters", "token": token})
    assert response.status_code == 200
    assert response.context["plan"].applied
    assert "Imported meters.csv" in response.content.decode()
    assert Device.objects.filter(position__tag__in=["FT-200", "FT-201"]).count() == 2
    # applied: no longer kept
    response = logged_in_client.post(reverse("plant:import"), {"kind": "meters", "token": token})
    assert response.status_code == 400
    assert "no longer kept on the server" in response.content.decode()


def test_view_errors_are_400_and_apply_saves_nothing(register, logged_in_client):
    before = counts()
    content = csv_bytes(meter_line("FT-500"), meter_line("FT-501", fluid="Mercury"))
    response = logged_in_client.post(reverse("plant:import"), {"kind": "meters", "dry_run": "on",
                                                               "file": upload(content)})
    assert response.status_code == 400
    assert 'Unknown fluid &quot;Mercury&quot;' in response.content.decode()
    response = logged_in_client.post(reverse("plant:import"), {"kind": "meters", "file": upload(content)})
    assert response.status_code == 400
    assert counts() == before


def test_view_apply_shows_counts(register, logged_in_client):
    response = logged_in_client.post(reverse("plant:import"), {"kind": "meters", "file": upload(good_file())})
    assert response.status_code == 200
    assert response.context["plan"].counts == {"create": 2, "update": 1, "unchanged": 1}
    assert "Imported meters.csv" in response.content.decode()
    assert Device.objects.count() == 4


def test_view_rejects_unknown_file_type(logged_in_client):
    response = logged_in_client.post(reverse("plant:import"), {"kind": "meters", "dry_run": "on",
                                                               "file": upload(b"x", name="register.pdf")})
    assert response.status_code == 400
    assert "Unsupported file type (.pdf)" in response.content.decode()


# The fixed list of wetted materials (issue 17 item 7) ----------------------------------------------------------------
def test_wetted_material_not_on_the_list_is_refused_at_its_cell(register):
    before = counts()
    plan = plan_for(csv_bytes(
        meter_line("FT-300", wetted_material="not titanium: 316L"),
        meter_line("FT-301", wetted_material="Hastelloy C-276"),
        meter_line("FT-302", wetted_material="Nickel alloy C-276"),  # the label, as for any choice
        meter_line("FT-303", wetted_material="TITANIUM", material_details="grade 2"),  # the code, any case
    ))
    errors = {(e.row_number, e.column): e.message for e in plan.errors}
    assert set(errors) == {(2, "wetted_material"), (3, "wetted_material")}
    assert errors[(2, "wetted_material")].startswith('"not titanium: 316L" is not on the list of wetted materials')
    assert "material details" in errors[(3, "wetted_material")]
    assert importer.apply_import(plan).applied is False
    assert counts() == before  # nothing half-saved


def test_wetted_material_label_and_code_import_as_the_code(register):
    plan = importer.apply_import(plan_for(csv_bytes(
        meter_line("FT-302", wetted_material="Nickel alloy C-276"),
        meter_line("FT-303", wetted_material="TITANIUM", material_details="grade 2"),
    )))
    assert plan.applied, plan.errors
    assert Device.objects.get(position__tag="FT-302").wetted_material == "alloy C-276"
    assert (Device.objects.get(position__tag="FT-303").wetted_material, Device.objects.get(position__tag="FT-303").material_details) == (
        "titanium", "grade 2")
