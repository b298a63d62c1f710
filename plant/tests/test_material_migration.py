"""The data migration that maps free-text wetted materials onto the fixed list (plant 0006)."""
import importlib

import pytest
from django.db import connection
from django.db.migrations.executor import MigrationExecutor

mapping = importlib.import_module("plant.migrations.0006_map_wetted_material_to_list")

BEFORE = ("plant", "0005_site_time_zone_wetted_material_list")
AFTER = ("plant", "0006_map_wetted_material_to_list")


@pytest.mark.parametrize("text, code", [
    ("316L", "316L"), ("SS 316L", "316L"), ("AISI 316 L", "316L"), ("1.4404", "316L"), ("316", "316"),
    ("Hastelloy C", "alloy C-276"),  # the successor grade; the text is kept in the details
    ("Hastelloy C-276", "alloy C-276"), ("alloy c-22", "alloy C-22"), ("titanium Gr2", "titanium"),
    ("Platinum-Iridium", "platinum-iridium"), ("TANTALUM", "tantalum"), ("aluminum", "aluminium"),
    ("Stainless steel 316L", "316L"),
    ("not titanium: 316L", None), ("PTFE liner, Hastelloy C", None), ("see datasheet", None),
])
def test_free_text_names_one_material_or_none(text, code):
    assert mapping.code_for(text) == code


@pytest.mark.django_db(transaction=True)
def test_migration_maps_existing_meters_and_keeps_the_text():
    executor = MigrationExecutor(connection)
    executor.migrate([BEFORE])
    old = executor.loader.project_state([BEFORE]).apps
    site = old.get_model("plant", "Site").objects.create(name="S")
    area = old.get_model("plant", "Area").objects.create(site=site, name="A")
    fluid = old.get_model("plant", "Fluid").objects.create(name="Brine", phase="liquid")
    Device = old.get_model("plant", "Meter")
    rows = {"M-1": "316L", "M-2": "Hastelloy C", "M-3": "PTFE liner, Hastelloy C", "M-4": "", "M-5": "ss 316l"}
    for tag, text in rows.items():
        Device.objects.create(tag=tag, principle="electromagnetic", area=area, fluid=fluid, line_size="DN50",
                             internal_diameter_mm=50, range_max=10, mpe_value=0.5, wetted_material=text)
    executor = MigrationExecutor(connection)
    executor.migrate([AFTER])
    new = executor.loader.project_state([AFTER]).apps
    stored = {m.tag: (m.wetted_material, m.material_details) for m in new.get_model("plant", "Meter").objects.all()}
    assert stored == {
        "M-1": ("316L", ""),  # already a code: nothing to keep
        "M-2": ("alloy C-276", "Hastelloy C"),
        "M-3": ("", "PTFE liner, Hastelloy C"),  # not one material: not recorded, text kept
        "M-4": ("", ""),
        "M-5": ("316L", "ss 316l"),
    }
    # and back: the text as written returns
    executor = MigrationExecutor(connection)
    executor.migrate([BEFORE])
    back = executor.loader.project_state([BEFORE]).apps
    assert {m.tag: m.wetted_material for m in back.get_model("plant", "Meter").objects.all()} == {
        "M-1": "316L", "M-2": "Hastelloy C", "M-3": "PTFE liner, Hastelloy C", "M-4": "", "M-5": "ss 316l"}
    executor = MigrationExecutor(connection)
    executor.migrate(executor.loader.graph.leaf_nodes())
