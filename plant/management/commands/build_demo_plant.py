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
from plant.demo_data import AREAS, DETAILS, FLUIDS, MAKERS, METERS
from plant.installations import commission
from plant.models import Area, DutyPeriod, Fluid, Installation, Device, Position, Site


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
        moved = Device.objects.get(position__tag="FT-305")
        brine = Position.objects.create(tag="FT-115", area=areas["Brine & pickling"], fluid=fluids["Pickling brine"],
                                        line_size="DN25", internal_diameter_mm=26.6, flow_units="m3/h",
                                        normal_flow=2.5, min_flow=0.4)
        Installation.objects.create(device=moved, position=brine, since=COMMISSIONED_ON, until=MOVED_ON,
                                    removal_reason="moved to the syrup kitchen; brine pre-dosing stopped")
        DutyPeriod.objects.create(device=moved, position=brine, area=brine.area, fluid=brine.fluid,
                                  since=COMMISSIONED_ON, until=MOVED_ON)
        Device.objects.filter(pk=moved.pk).update(risk_severity=risk.worst_severity(moved.findings()))
        # two spares in stores: one calibrated on the bench (demo history), one never calibrated
        for serial, principle, rmax, units_text, material, mpe in SPARES:
            Device.objects.create(principle=principle, range_min=0, range_max=rmax, flow_units=units_text,
                                 wetted_material=material, serial=serial, maker=rng.choice(MAKERS),
                                 model=f"M{rng.randint(10, 99)}", mpe_value=mpe, status=Device.Status.SPARE)
        FIXTURE.parent.mkdir(exist_ok=True)
        # the records only: the audit trail is written again as the fixture loads (see build_demo_history)
        call_command("dumpdata", "plant.site", "plant.area", "plant.fluid", "plant.position", "plant.device",
                     "plant.installation", "plant.dutyperiod", indent=1, output=str(FIXTURE))
        self.stdout.write(self.style.SUCCESS(f"{Position.objects.count()} positions and {Device.objects.count()} devices "
                                             f"written to {FIXTURE}"))
