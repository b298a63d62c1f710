"""The data migrations that turn free-text flow units into unit codes (plant 0008, calibration 0006)."""
import datetime as dt
import importlib

import pytest
from django.db import connection
from django.db.migrations.executor import MigrationExecutor

from plant import units

plant_mapping = importlib.import_module("plant.migrations.0008_flow_units_codes")
calibration_mapping = importlib.import_module("calibration.migrations.0006_units_density_entered")

BEFORE = [("plant", "0007_merge_20261204_1610"), ("calibration", "0005_merge_20261204_1629")]
AFTER = [("plant", "0008_flow_units_codes"), ("calibration", "0006_units_density_entered")]


@pytest.mark.parametrize("mapping", [plant_mapping])
def test_frozen_spellings_agree_with_code_for(mapping):
    """The migrations keep their own copy of the spellings; today it reads every spelling as code_for does.
    The standards' migration (calibration 0006) maps with the very same frozen rule."""
    assert calibration_mapping.map_units is plant_mapping.map_units
    assert set(mapping.CODES) == set(units.FLOW_UNITS)
    for text in [*units.LEGACY_SPELLINGS, *units.FLOW_UNITS, " M³/H ", "LB/HR", "Gpm"]:
        assert mapping.code_for(text) == units.code_for(text), text
    for text in ("per meter's units", "", "m3", "kg"):
        assert mapping.code_for(text) is None
        with pytest.raises(units.UnitError):
            units.code_for(text)


def _old_state():
    executor = MigrationExecutor(connection)
    executor.migrate(BEFORE)
    return executor.loader.project_state(BEFORE).apps


def _migrate(targets):
    executor = MigrationExecutor(connection)
    executor.loader.build_graph()
    executor.migrate(targets)
    return executor.loader.project_state(targets).apps


def _meters(old, spellings):
    site = old.get_model("plant", "Site").objects.create(name="S")
    area = old.get_model("plant", "Area").objects.create(site=site, name="A")
    fluid = old.get_model("plant", "Fluid").objects.create(name="Water", phase="liquid")
    Device = old.get_model("plant", "Meter")
    for tag, text in spellings.items():
        Device.objects.create(tag=tag, principle="electromagnetic", area=area, fluid=fluid, line_size="DN50",
                             internal_diameter_mm=50, range_max=10, mpe_value=0.5, flow_units=text)


def _standards(old, spellings):
    Standard = old.get_model("calibration", "ReferenceStandard")
    for ident, text in spellings.items():
        Standard.objects.create(identification=ident, description="rig", range_max=100, units=text,
                                certificate_number="C", due_date=dt.date(2030, 1, 1), expanded_uncertainty=0.1)


def _cleared(state):
    """Remove the rows a case made, so the next one starts from an empty register (a state migrated to plant's
    target alone holds no calibration models, and that case made no standards)."""
    labels = [("plant", "Meter"), ("plant", "Fluid"), ("plant", "Area"), ("plant", "Site")]
    if "calibration" in state.app_configs:
        labels.append(("calibration", "ReferenceStandard"))
    for label in labels:
        state.get_model(*label).objects.all().delete()


def legacy_spellings_become_codes(old):
    _meters(old, {"M-1": "m³/h", "M-2": "l/s", "M-3": "kg/h", "M-4": "Nm³/h", "M-5": " gpm ", "M-6": "LB/HR",
                  "M-7": "t/h"})
    _standards(old, {"RS-1": "m³/h", "RS-2": "kg/h", "RS-3": "L/min"})
    new = _migrate(AFTER)
    devices = dict(new.get_model("plant", "Meter").objects.values_list("tag", "flow_units"))
    assert devices == {"M-1": "m3/h", "M-2": "L/s", "M-3": "kg/h", "M-4": "Nm3/h", "M-5": "USgpm",
                      "M-6": "lb/h", "M-7": "t/h"}
    standards = dict(new.get_model("calibration", "ReferenceStandard").objects.values_list("identification",
                                                                                         "units"))
    assert standards == {"RS-1": "m3/h", "RS-2": "kg/h", "RS-3": "L/min"}
    _cleared(new)


def an_unknown_unit_stops_the_migration_naming_the_row_and_changes_nothing(old):
    _meters(old, {"M-1": "m³/h", "M-2": "furlongs/fortnight"})
    with pytest.raises(plant_mapping.UnknownUnits) as refused:
        _migrate([AFTER[0]])
    message = str(refused.value)
    assert "meter M-2 ('furlongs/fortnight')" in message and "M-1" not in message
    assert "migrate again" in message
    # the migration ran in one transaction: M-1 was not mapped either
    assert dict(old.get_model("plant", "Meter").objects.values_list("tag", "flow_units")) == {
        "M-1": "m³/h", "M-2": "furlongs/fortnight"}
    # corrected by hand, it goes through
    old.get_model("plant", "Meter").objects.filter(tag="M-2").update(flow_units="m3/h")
    new = _migrate([AFTER[0]])
    assert set(new.get_model("plant", "Meter").objects.values_list("flow_units", flat=True)) == {"m3/h"}
    _cleared(new)


def an_unknown_standard_unit_stops_the_calibration_migration(old):
    _standards(old, {"RS-101": "per meter's units", "RS-9": "m³/h"})
    with pytest.raises(calibration_mapping.UnknownUnits) as refused:
        _migrate(AFTER)
    assert "reference standard RS-101 (\"per meter's units\")" in str(refused.value)
    old.get_model("calibration", "ReferenceStandard").objects.filter(identification="RS-101").update(units="kg/h")


@pytest.mark.django_db(transaction=True)
def test_the_unit_migrations_map_spellings_and_stop_on_an_unknown_unit():
    """Three cases on one trip back to the migrations before the unit codes (a trip there and back to the latest
    migration costs seconds; the migrations undo with nothing to do, so each case goes back only these two)."""
    old = _old_state()
    try:
        for case in (legacy_spellings_become_codes, an_unknown_unit_stops_the_migration_naming_the_row_and_changes_nothing,
                     an_unknown_standard_unit_stops_the_calibration_migration):
            old = _migrate(BEFORE)
            case(old)
    finally:
        _migrate(MigrationExecutor(connection).loader.graph.leaf_nodes())
