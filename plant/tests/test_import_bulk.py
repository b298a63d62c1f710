"""The bulk register import: the dry run reads the register once (no query per row), and the new rows it writes
in bulk are the rows the one-by-one path (the register's row form, as the new-meter page saves it) writes."""
import pytest
from django.db import connection
from django.test.utils import CaptureQueriesContext

from scheduling.fleet import recompute_due_dates
from maintenance.models import MaintenanceTask
from plant import importer
from plant.models import Area, DutyPeriod, Fluid, Installation, Device, Position, Site
from tests.helpers import row

pytestmark = [pytest.mark.django_db, pytest.mark.small_world("import")]

def rows(count, prefix="NEW"):
    return [row(f"{prefix}-{n:04d}", n) for n in range(count)]


# The dry run ------------------------------------------------------------------------------------------------------
def test_dry_run_makes_the_same_number_of_queries_for_10_and_100_rows(plant):
    counts = {}
    for size in (10, 100):
        with CaptureQueriesContext(connection) as queries:
            plan = importer.plan_import("meters", rows(size) + [row("FT-1", 1, serial="OLD-1-NEW")])
        assert plan.ok, plan.errors[:3]
        assert plan.counts == {"create": size, "update": 1, "unchanged": 0}
        counts[size] = len(queries)
    assert counts[10] == counts[100], counts
    assert counts[10] <= 6  # fluids, sites, areas, the positions the file names (with their devices)


def test_fluids_dry_run_makes_the_same_number_of_queries_for_10_and_100_rows(plant):
    counts = {}
    for size in (10, 100):
        fluid_rows = [{"name": f"Fluid {n}", "phase": "liquid", "density_kg_m3": "1000"} for n in range(size)]
        with CaptureQueriesContext(connection) as queries:
            plan = importer.plan_import("fluids", fluid_rows + [{"name": "water", "phase": "liquid"}])
        assert plan.ok, plan.errors[:3]
        assert plan.counts["create"] == size and plan.rows[-1].action == "update"  # Water, found ignoring case
        counts[size] = len(queries)
    assert counts[10] == counts[100] == 1


def test_a_new_site_and_area_are_found_by_later_rows_of_the_file(plant):
    plan = importer.plan_import("meters", [row("A-1", 0, site="West"), row("A-2", 0, site="west"),
                                           row("A-3", 0, site="West", area="pump HOUSE")])
    assert plan.ok, plan.errors
    assert plan.creates == ["site West", "area West / Pump house"]
    assert [r.notes for r in plan.rows] == [["creates site West", "creates area West / Pump house"], [], []]
    assert not Site.objects.filter(name="West").exists()


def test_a_new_site_name_too_long_is_refused_at_its_cell(plant):
    plan = importer.plan_import("meters", [row("A-1", 0, site="S" * 121), row("A-2", 0, area="A" * 121)])
    found = {(e.row_number, e.column): e.message for e in plan.errors}
    assert found == {(2, "site"): "Ensure this value has at most 120 characters (it has 121).",
                     (3, "area"): "Ensure this value has at most 120 characters (it has 121)."}


# The apply --------------------------------------------------------------------------------------------------------
def _one_by_one(values):
    """The register's new-meter row saved as the edit page saves it, then the device's due date recomputed."""
    data = dict(values)
    site = Site.objects.get_or_create(name=data.pop("site"))[0]
    data["area"] = Area.objects.get_or_create(site=site, name=data["area"])[0].pk
    data["fluid"] = Fluid.objects.get(name=data["fluid"]).pk
    form = importer.RegisterRowForm(data=data, instance=importer.RegisterRow())
    assert form.is_valid(), form.errors
    device = form.save().device
    recompute_due_dates(Device.objects.filter(pk=device.pk))
    return Device.objects.get(pk=device.pk)


def _written(device):
    """Everything the register holds for a new device and its position, without ids and tags."""
    skip = {"id", "position", "tag", "serial"}
    position = device.position
    return {
        "device": {f.attname: getattr(device, f.attname) for f in Device._meta.concrete_fields if f.name not in skip},
        "position": {f.attname: getattr(position, f.attname) for f in Position._meta.concrete_fields
                     if f.name not in skip},
        "installations": list(Installation.objects.filter(device=device)
                              .values_list("since", "until", "starting_point", "removal_reason")),
        "duties": list(DutyPeriod.objects.filter(device=device).values_list("area_id", "fluid_id", "since", "until")),
        # (the one-by-one path saves the device as a spare first, so its tasks are first derived from the principle
        # alone and then changed by the duty, "Duty changed: ..."; the bulk path writes them once from the duty,
        # "Called for by the duty: ...": the reasons are compared below, not here)
        "tasks": sorted(MaintenanceTask.objects.filter(device=device).values_list(
            "code", "title", "reason", "basis", "origin", "base_days", "severity_factor", "start_days", "since",
            "active", "frequency_days", "next_due_date")),
        "position audit": list(Position.history.filter(id=position.pk).values_list("history_type", "area_id")),
        "installation audit": list(Installation.history.filter(device_id=device.pk).values_list("history_type")),
        "device audit, last": list(Device.history.filter(id=device.pk).order_by("-history_id")
                                   .values_list("status", "principle", "range_max")[:1]),
    }


def test_new_rows_written_in_bulk_are_those_the_one_by_one_path_writes(plant, django_user_model):
    user = django_user_model.objects.create_user("loader")
    new_rows = rows(12)
    result = importer.apply_import(importer.plan_import("meters", new_rows), user=user)
    assert result.applied, result.errors
    for n, values in enumerate(new_rows):
        bulk = Device.objects.get(position__tag=values["tag"])
        reference = _one_by_one({**values, "tag": f"REF-{n:04d}", "serial": f"REF-{n}"})
        assert _written(bulk) == _written(reference), values["tag"]
        assert bulk.serial == values["serial"] and bulk.status == "in_service"
        assert bulk.risk_severity == reference.risk_severity  # due fields: compared above (never calibrated: none)
        assert Installation.objects.get(device=bulk).installed_by == user
        tasks = MaintenanceTask.objects.filter(device=bulk)
        assert sorted(MaintenanceTask.history.filter(device_id=bulk.pk).values_list("code", "history_type")) == sorted(
            (code, "+") for code in tasks.values_list("code", flat=True))
        for task in tasks:
            assert task.change_reason.startswith("Called for by the duty: " + task.title)
        assert {h.history_user for h in Device.history.filter(id=bulk.pk)} == {user}
    assert MaintenanceTask.objects.filter(device__position__tag__startswith="NEW-").exists()


def test_apply_writes_in_bulk_not_per_row(plant):
    """The writes of 10 and of 60 new rows take about the same number of queries (batches, not rows)."""
    counts = {}
    for size, prefix in ((10, "A"), (60, "B")):
        plan = importer.plan_import("meters", rows(size, prefix))
        with CaptureQueriesContext(connection) as queries:
            result = importer.apply_import(plan)
        assert result.applied, result.errors
        counts[size] = len(queries)
    assert counts[60] <= counts[10] + 5, counts


def test_an_apply_rechecks_against_the_register_as_it_is_now(plant):
    plan = importer.plan_import("meters", [row("NEW-1", 0), row("NEW-2", 1, fluid="Brine")])
    assert plan.ok
    Fluid.objects.filter(name="Brine").update(name="Brine 2")  # changed since the dry run
    result = importer.apply_import(plan)
    assert not result.applied
    assert [(e.row_number, e.column) for e in result.errors] == [(3, "fluid")]
    assert not Position.objects.filter(tag__startswith="NEW-").exists()


def test_a_changed_row_moves_its_position_to_an_area_the_file_creates(plant):
    result = importer.apply_import(importer.plan_import("meters", [
        row("FT-1", 2, principle="vortex", site="East", area="New hall", serial="OLD-1", fluid="Water")]))
    assert result.applied, result.errors
    assert result.rows[0].action == "update" and result.creates == ["site East", "area East / New hall"]
    device = Device.objects.get(position__tag="FT-1")
    assert (device.area.site.name, device.area.name) == ("East", "New hall")
    assert list(device.duties.order_by("id").values_list("area__name", flat=True)) == ["Hall A", "New hall"]
