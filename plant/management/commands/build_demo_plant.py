"""Build the invented demo plant (Marrowfield Preserves, a food-processing site) and write it to fixtures/.

All names and tags are invented for the demo.
"""
import datetime as dt
import random
from pathlib import Path

from django.conf import settings
from django.core.management import BaseCommand, call_command
from django.db import transaction

from plant import risk
from plant.installations import commission
from plant.models import Area, DutyPeriod, Fluid, Installation, Meter, Position, Site

FLUIDS = [
    # name, phase, conductivity, density, viscosity, solids, chlorides, scaling, slime, sticky, gas, temp
    ("Pickling brine", "liquid", 60000, 1150, 1.6, False, True, False, False, False, False, 15),
    ("Town makeup water", "liquid", 450, 998, 1.0, False, False, True, True, False, False, 12),
    ("Saturated steam 8 bar", "steam", None, 4.7, 0.015, False, False, False, False, False, False, 175),
    ("Natural gas 4 bar", "gas", None, 3.5, 0.011, False, False, False, False, False, False, 10),
    ("Caustic cleaning solution 2 %", "liquid", 90000, 1020, 1.1, False, False, False, False, False, False, 75),
    ("Sugar syrup 65 Brix", "liquid", 30, 1320, 150.0, False, False, False, False, True, False, 40),
    ("Vegetable oil", "liquid", 0.0001, 915, 50.0, False, False, False, False, True, False, 25),
    ("Compressed air 7 bar", "gas", None, 9.4, 0.018, False, False, False, False, False, False, 25),
    ("Tomato pulp slurry", "slurry", 4000, 1050, 300.0, True, False, False, False, True, False, 60),
    ("Demineralised water", "liquid", 1.0, 998, 1.0, False, False, False, False, False, False, 20),
    ("Cooling tower water", "liquid", 1800, 998, 0.9, True, True, True, True, False, False, 30),
]

AREAS = ["Brine & pickling", "Boiler house", "Syrup kitchen", "Oil & frying", "CIP station", "Utilities", "Pulp line"]

# tag prefix, principle, fluid, area, line size, ID mm, range max, units, material, mpe, basis
METERS = [
    ("FT-110", "electromagnetic", "Pickling brine", "Brine & pickling", "DN50", 52.5, 40, "m3/h", "316L", 0.5, "pct_reading"),
    ("FT-111", "electromagnetic", "Pickling brine", "Brine & pickling", "DN40", 40.9, 25, "m3/h", "alloy C-276", 0.5, "pct_reading"),
    ("FT-112", "coriolis", "Pickling brine", "Brine & pickling", "DN25", 26.6, 8, "m3/h", "316L", 0.2, "pct_reading"),
    ("FT-113", "ultrasonic_clampon", "Pickling brine", "Brine & pickling", "DN80", 82.5, 60, "m3/h", "", 2.0, "pct_reading"),
    ("FT-114", "turbine", "Pickling brine", "Brine & pickling", "DN25", 26.6, 10, "m3/h", "316", 0.5, "pct_reading"),
    ("FT-201", "vortex", "Saturated steam 8 bar", "Boiler house", "DN80", 77.9, 4000, "kg/h", "316L", 1.0, "pct_reading"),
    ("FT-202", "vortex", "Saturated steam 8 bar", "Boiler house", "DN50", 52.5, 1500, "kg/h", "316L", 1.0, "pct_reading"),
    ("FT-203", "orifice", "Saturated steam 8 bar", "Boiler house", "DN100", 102.3, 6000, "kg/h", "316", 2.0, "pct_span"),
    ("FT-204", "electromagnetic", "Town makeup water", "Boiler house", "DN50", 52.5, 30, "m3/h", "316L", 0.5, "pct_reading"),
    ("FT-205", "venturi", "Town makeup water", "Boiler house", "DN80", 82.5, 50, "m3/h", "316", 1.0, "pct_span"),
    ("FT-206", "electromagnetic", "Demineralised water", "Boiler house", "DN25", 26.6, 5, "m3/h", "316L", 0.5, "pct_reading"),
    ("FT-207", "coriolis", "Demineralised water", "Boiler house", "DN25", 26.6, 5, "m3/h", "316L", 0.2, "pct_reading"),
    ("FT-208", "thermal_mass", "Natural gas 4 bar", "Boiler house", "DN50", 52.5, 300, "m3/h", "316L", 1.5, "pct_reading"),
    ("FT-209", "ultrasonic_transit", "Natural gas 4 bar", "Boiler house", "DN100", 102.3, 800, "m3/h", "316", 1.0, "pct_reading"),
    ("FT-210", "turbine", "Natural gas 4 bar", "Boiler house", "DN80", 77.9, 600, "m3/h", "aluminium", 1.0, "pct_reading"),
    ("FT-301", "coriolis", "Sugar syrup 65 Brix", "Syrup kitchen", "DN40", 40.9, 12000, "kg/h", "316L", 0.15, "pct_reading"),
    ("FT-302", "positive_displacement", "Sugar syrup 65 Brix", "Syrup kitchen", "DN40", 40.9, 8, "m3/h", "316", 0.5, "pct_reading"),
    ("FT-303", "electromagnetic", "Sugar syrup 65 Brix", "Syrup kitchen", "DN40", 40.9, 8, "m3/h", "316L", 0.5, "pct_reading"),
    ("FT-304", "vortex", "Sugar syrup 65 Brix", "Syrup kitchen", "DN25", 26.6, 6, "m3/h", "316L", 1.0, "pct_reading"),
    ("FT-305", "electromagnetic", "Town makeup water", "Syrup kitchen", "DN25", 26.6, 6, "m3/h", "316L", 0.5, "pct_reading"),
    ("FT-401", "electromagnetic", "Vegetable oil", "Oil & frying", "DN50", 52.5, 20, "m3/h", "316L", 0.5, "pct_reading"),
    ("FT-402", "coriolis", "Vegetable oil", "Oil & frying", "DN40", 40.9, 15000, "kg/h", "316L", 0.15, "pct_reading"),
    ("FT-403", "positive_displacement", "Vegetable oil", "Oil & frying", "DN40", 40.9, 15, "m3/h", "316", 0.3, "pct_reading"),
    ("FT-404", "turbine", "Vegetable oil", "Oil & frying", "DN25", 26.6, 6, "m3/h", "316", 0.5, "pct_reading"),
    ("FT-405", "thermal_mass", "Natural gas 4 bar", "Oil & frying", "DN40", 40.9, 150, "m3/h", "316L", 1.5, "pct_reading"),
    ("FT-501", "electromagnetic", "Caustic cleaning solution 2 %", "CIP station", "DN50", 52.5, 30, "m3/h", "316L", 0.5, "pct_reading"),
    ("FT-502", "electromagnetic", "Caustic cleaning solution 2 %", "CIP station", "DN50", 52.5, 30, "m3/h", "316L", 0.5, "pct_reading"),
    ("FT-503", "coriolis", "Caustic cleaning solution 2 %", "CIP station", "DN25", 26.6, 6000, "kg/h", "316L", 0.2, "pct_reading"),
    ("FT-504", "electromagnetic", "Town makeup water", "CIP station", "DN50", 52.5, 30, "m3/h", "316L", 0.5, "pct_reading"),
    ("FT-505", "vortex", "Town makeup water", "CIP station", "DN50", 52.5, 30, "m3/h", "316L", 1.0, "pct_reading"),
    ("FT-601", "averaging_pitot", "Cooling tower water", "Utilities", "DN200", 202.7, 400, "m3/h", "316", 2.0, "pct_span"),
    ("FT-602", "electromagnetic", "Cooling tower water", "Utilities", "DN150", 154.1, 250, "m3/h", "316L", 0.5, "pct_reading"),
    ("FT-603", "orifice", "Cooling tower water", "Utilities", "DN150", 154.1, 250, "m3/h", "316", 2.0, "pct_span"),
    ("FT-604", "pitot", "Compressed air 7 bar", "Utilities", "DN100", 102.3, 1200, "m3/h", "316", 3.0, "pct_span"),
    ("FT-605", "thermal_mass", "Compressed air 7 bar", "Utilities", "DN80", 82.5, 900, "m3/h", "316L", 1.5, "pct_reading"),
    ("FT-606", "vortex", "Compressed air 7 bar", "Utilities", "DN50", 52.5, 500, "m3/h", "316L", 1.0, "pct_reading"),
    ("FT-607", "ultrasonic_clampon", "Town makeup water", "Utilities", "DN150", 154.1, 200, "m3/h", "", 2.0, "pct_reading"),
    ("FT-608", "ultrasonic_transit", "Town makeup water", "Utilities", "DN100", 102.3, 100, "m3/h", "316", 0.5, "pct_reading"),
    ("FT-701", "electromagnetic", "Tomato pulp slurry", "Pulp line", "DN80", 82.5, 50, "m3/h", "316L", 0.5, "pct_reading"),
    ("FT-702", "coriolis", "Tomato pulp slurry", "Pulp line", "DN50", 52.5, 40000, "kg/h", "316L", 0.2, "pct_reading"),
    ("FT-703", "turbine", "Tomato pulp slurry", "Pulp line", "DN50", 52.5, 40, "m3/h", "316", 0.5, "pct_reading"),
    ("FT-704", "ultrasonic_transit", "Tomato pulp slurry", "Pulp line", "DN80", 82.5, 50, "m3/h", "316", 1.0, "pct_reading"),
    ("FT-705", "electromagnetic", "Tomato pulp slurry", "Pulp line", "DN80", 82.5, 50, "m3/h", "alloy C-276", 0.5, "pct_reading"),
    ("FT-706", "venturi", "Tomato pulp slurry", "Pulp line", "DN80", 82.5, 50, "m3/h", "316", 1.5, "pct_span"),
]

# what the list of wetted materials does not say (the magnetic meters' liners)
DETAILS = {"FT-705": "PTFE liner"}

MAKERS = ["Northbeck Instruments", "Calder & Wray", "Tessel Flow", "Orrin Metering"]

FIXTURE = Path(settings.BASE_DIR) / "fixtures" / "demo_plant.json"

COMMISSIONED_ON = dt.date(2016, 3, 1)  # the invented plant's register starts here
MOVED_ON = dt.date(2019, 3, 1)
# serial, principle, range max, units, material, MPE (% of reading): spare devices on the shelf
SPARES = [
    ("SN730118", "electromagnetic", 30, "m3/h", "316L", 0.5),
    ("SN730342", "vortex", 4000, "kg/h", "316L", 1.0),
]


# the demo's two misapplied devices went in at commissioning, before the duty rules refused them
DEMO_UNFIT_TAGS = {"FT-206", "FT-401"}
DEMO_UNFIT_REASON = ("Installed at commissioning in 2016, before the duty rules were applied; "
                     "replacement is on the capital plan.")


class Command(BaseCommand):
    help = "Create the invented demo plant in the database and write it to fixtures/demo_plant.json."

    @transaction.atomic
    def handle(self, *args, **options):
        rng = random.Random(20261202)
        site = Site.objects.create(name="Marrowfield Preserves", address="Unit 4, Gullet Lane, Marrowfield (invented)",
                                   time_zone="Europe/London")
        areas = {name: Area.objects.create(site=site, name=name) for name in AREAS}
        fluids = {}
        for (name, phase, cond, dens, visc, solids, chl, scale, slime, sticky, gas, temp) in FLUIDS:
            fluids[name] = Fluid.objects.create(
                name=name, phase=phase, conductivity_us_cm=cond, density_kg_m3=dens, viscosity_mpa_s=visc,
                solids=solids, chlorides=chl, scaling=scale, biofouling=slime, sticky=sticky,
                entrained_gas=gas, temperature_c=temp,
            )
        for (tag, principle, fluid, area, size, bore, rmax, units, material, mpe, basis) in METERS:
            normal = round(rmax * rng.uniform(0.4, 0.7), 2)
            minimum = round(rmax * rng.uniform(0.05, 0.15), 2)
            if tag in ("FT-304", "FT-505"):  # vortex meters run far below their normal flow at night
                minimum = round(rmax * 0.03, 3)
            commission(
                since=MOVED_ON if tag == "FT-305" else COMMISSIONED_ON,
                tag=tag, principle=principle, area=areas[area], fluid=fluids[fluid], line_size=size,
                internal_diameter_mm=bore, range_min=0, range_max=rmax, flow_units=units,
                normal_flow=normal, min_flow=minimum, wetted_material=material,
                material_details=DETAILS.get(tag, ""),
                serial=f"SN{rng.randint(100000, 999999)}", maker=rng.choice(MAKERS),
                model=f"M{rng.randint(10, 99)}", mpe_value=mpe, mpe_basis=basis,
                base_interval_days=rng.choice([365, 365, 730, 180]),
                unfit_reason=DEMO_UNFIT_REASON if tag in DEMO_UNFIT_TAGS else "",
            )
        # one device moved: the one at FT-305 served on brine at FT-115 before the syrup kitchen; FT-115 has
        # stood empty since (the brine pre-dosing it measured was stopped)
        moved = Meter.objects.get(position__tag="FT-305")
        brine = Position.objects.create(tag="FT-115", area=areas["Brine & pickling"], fluid=fluids["Pickling brine"],
                                        line_size="DN25", internal_diameter_mm=26.6, flow_units="m3/h",
                                        normal_flow=2.5, min_flow=0.4)
        Installation.objects.create(device=moved, position=brine, since=COMMISSIONED_ON, until=MOVED_ON,
                                    removal_reason="moved to the syrup kitchen; brine pre-dosing stopped")
        DutyPeriod.objects.create(meter=moved, position=brine, area=brine.area, fluid=brine.fluid,
                                  since=COMMISSIONED_ON, until=MOVED_ON)
        Meter.objects.filter(pk=moved.pk).update(risk_severity=risk.worst_severity(moved.findings()))
        # two spares in stores: one calibrated on the bench (demo history), one never calibrated
        for serial, principle, rmax, units_text, material, mpe in SPARES:
            Meter.objects.create(principle=principle, range_min=0, range_max=rmax, flow_units=units_text,
                                 wetted_material=material, serial=serial, maker=rng.choice(MAKERS),
                                 model=f"M{rng.randint(10, 99)}", mpe_value=mpe, status=Meter.Status.SPARE)
        FIXTURE.parent.mkdir(exist_ok=True)
        # the records only: the audit trail is written again as the fixture loads (see build_demo_history)
        call_command("dumpdata", "plant.site", "plant.area", "plant.fluid", "plant.position", "plant.meter",
                     "plant.installation", "plant.dutyperiod", indent=1, output=str(FIXTURE))
        self.stdout.write(self.style.SUCCESS(f"{Position.objects.count()} positions and {Meter.objects.count()} devices "
                                             f"written to {FIXTURE}"))
