"""Invent 3–8 years of signed calibration history for the demo plant, with a fixed seed.

Drift is invented for the demo: stable meters, meters drifting steadily, and meters that jump after
fouling; the risk factor of each meter's duty scales how far it moves. Each calibration is done around
the due date the tracker set after the previous one, as a plant that is looked after would; a few meters
miss their last one and show overdue. Each reference standard reads in one unit: volumetric meters are compared
with a volumetric reference, mass meters with a mass one, except that the demineralised-water meter FT-206 is
calibrated on the weigh-tank rig (kg/h) from 2025: its readings are converted to m³/h with the water's density,
so the demo shows a conversion on a certificate. Written to
fixtures/demo_history.json (load it after fixtures/demo_plant.json).
"""
import datetime as dt
import random
from pathlib import Path

from django.conf import settings
from django.core.management import BaseCommand, call_command
from django.db import transaction

from calibration import errors
from plant import units
from calibration.models import CalibrationEvent, CalibrationPoint, ReferenceStandard
from calibration.invented import NOMINALS, invented_found_errors
from plant.models import Device

FIXTURE = Path(settings.BASE_DIR) / "fixtures" / "demo_history.json"
BENCH_SPARE = "SN730118"  # the demo's spare calibrated on the bench (plant/management/commands/build_demo_plant.py)
BENCH_PROCEDURE = "Bench comparison against the workshop reference meter in series, five points up the range (WP-FL-05)."
TODAY = dt.date(2026, 12, 4)  # the generator's fixed "today" (tests/test_demo_history.py GENERATED_ON)
LATE_WINDOW_DAYS = 150  # a calibration falling due in this many days before TODAY ...
LATE_CHANCE = 0.3  # ... is missed with this chance: the meter shows overdue
TECHNICIANS = ["R. Okonkwo-Hale", "M. Varga", "S. Lindqvist"]
PROCEDURE = {
    "flow": "In-situ comparison against a portable reference meter in series, five points up the range (WP-FL-03).",
    "clampon": "Comparison against a clamp-on reference on a straight run, five points (WP-FL-07).",
}


# demineralised water at about 20 °C, kg/m³ (from memory: the usual table value for pure water at 20 °C)
WEIGH_TANK_DENSITY = 998.2
WEIGH_TANK_METER, WEIGH_TANK_FROM = "FT-206", dt.date(2025, 1, 1)


def _standards():
    return {
        ("liquid", "kg/h"): ReferenceStandard.objects.create(
            identification="RS-101", description="Portable Coriolis reference, liquids", range_min=0,
            range_max=60000, units="kg/h", certificate_number="EXT-24-5531",
            due_date=dt.date(2027, 3, 31), expanded_uncertainty=0.1, uncertainty_basis="pct_reading"),
        ("liquid", "m3/h"): ReferenceStandard.objects.create(
            identification="RS-103", description="Portable electromagnetic reference, liquids", range_min=0,
            range_max=500, units="m3/h", certificate_number="EXT-24-5533",
            due_date=dt.date(2027, 3, 31), expanded_uncertainty=0.1, uncertainty_basis="pct_reading"),
        ("gas", "m3/h"): ReferenceStandard.objects.create(
            identification="RS-102", description="Transfer standard for gases", range_min=0,
            range_max=1500, units="m3/h", certificate_number="EXT-24-5532", phase="gas",
            due_date=dt.date(2027, 1, 15), expanded_uncertainty=0.3, uncertainty_basis="pct_reading"),
        ("steam", "kg/h"): ReferenceStandard.objects.create(
            identification="RS-104", description="Transfer standard for steam", range_min=0,
            range_max=10000, units="kg/h", certificate_number="EXT-24-5534", phase="steam",
            due_date=dt.date(2027, 1, 15), expanded_uncertainty=0.3, uncertainty_basis="pct_reading"),
        "weigh_tank": ReferenceStandard.objects.create(
            identification="RS-105", description="Weigh-tank rig (gravimetric, diverter and 2 t tank), liquids",
            range_min=0, range_max=20000, units="kg/h", certificate_number="EXT-25-0117", phase="liquid",
            due_date=dt.date(2027, 6, 30), expanded_uncertainty=0.05, uncertainty_basis="pct_reading"),
        "spare": ReferenceStandard.objects.create(
            identification="RS-090", description="Old turbine master meter (withdrawn)", range_min=0,
            range_max=100, units="m3/h", certificate_number="EXT-21-0410",
            due_date=dt.date(2026, 8, 1), expanded_uncertainty=0.25, uncertainty_basis="pct_reading"),
    }


class Command(BaseCommand):
    help = "Create signed demo calibration history for every demo meter and write fixtures/demo_history.json."

    def add_arguments(self, parser):
        parser.add_argument("--seed", type=int, default=7)

    @transaction.atomic
    def handle(self, *args, seed, **options):
        rng = random.Random(seed)
        standards = _standards()
        events = 0
        for device in (Device.objects.filter(position__isnull=False).select_related("position__fluid")
                      .order_by("position__tag")):
            events += self._history(device, rng, standards)
        events += self._bench(Device.objects.get(serial=BENCH_SPARE, position__isnull=True), rng, standards)
        # the records only: the audit trail (historical rows) is written again as the fixture loads, and
        # dumped ids of it would collide with that on PostgreSQL, whose sequences do not skip loaded ids
        call_command("dumpdata", "calibration.referencestandard", "calibration.calibrationevent",
                     "calibration.calibrationpoint", indent=1, output=str(FIXTURE))
        self.stdout.write(self.style.SUCCESS(f"{events} signed calibrations written to {FIXTURE}"))

    def _history(self, device, rng, standards):
        """One meter's invented history, kept the way a plant that is looked after keeps it: each next
        calibration is done on or a little before the due date the tracker gave after the previous one
        (scheduling/fleet.py recomputes it at every sign-off), except that a few meters miss their last one.
        """
        factor = device.risk_factor()
        mpe = device.mpe_value
        behaviour = rng.choices(["stable", "steady", "fouling"], weights=[8, 2, 0] if factor >= 1 else [4, 4, 2])[0]
        # invented drift in units of MPE per year; risky duties move more
        rate = {"stable": 0.0, "steady": 0.2, "fouling": 0.1}[behaviour] * mpe / max(factor, 0.25) * rng.choice([-1, 1])
        years = rng.randint(5, 8)
        day = TODAY - dt.timedelta(days=int(365.25 * years)) + dt.timedelta(days=rng.randint(0, 20))
        baseline = rng.uniform(-0.1, 0.1) * mpe
        phase = device.fluid.phase if device.fluid.phase in ("gas", "steam") else "liquid"
        standard = standards[(phase, device.flow_units)]
        count = 0
        jumped = False
        previous = None
        while True:
            elapsed_years = (day - previous).days / 365.25 if previous else 0.0
            offset = baseline + rate * elapsed_years
            if behaviour == "fouling" and not jumped and previous and rng.random() < 0.2:
                offset += rng.choice([-1, 1]) * rng.uniform(0.8, 1.6) * mpe
                jumped = True
            found = invented_found_errors(rng, offset, mpe)
            adjust = max(abs(e) for e in found) > 0.6 * mpe
            used = standard
            if device.tag == WEIGH_TANK_METER and day >= WEIGH_TANK_FROM:
                used = standards["weigh_tank"]
            event = CalibrationEvent.objects.create(
                device=device, performed_on=day, technician=rng.choice(TECHNICIANS),
                meter_units=device.flow_units, reference_units=used.units,
                density_kg_m3=WEIGH_TANK_DENSITY if used.units != device.flow_units else None,
                procedure=PROCEDURE["clampon" if device.principle == "ultrasonic_clampon" else "flow"],
                ambient_temp_c=round(rng.uniform(8, 28), 1), fluid_temp_c=device.fluid.temperature_c,
                pressure_bar=round(rng.uniform(1.5, 6), 1), reason="scheduled", adjusted=adjust,
                decision_rule="simple",
                notes="Zero and span adjusted." if adjust else "",
            )
            event.reference_standards.add(used)
            self._points(event, device, CalibrationPoint.Kind.AS_FOUND, found, rng)
            if adjust:
                left = [rng.gauss(0, 0.05 * mpe) for _ in NOMINALS]
                self._points(event, device, CalibrationPoint.Kind.AS_LEFT, left, rng)
                baseline, jumped = sum(left) / len(left), False
            else:
                baseline = offset
            event.sign(event.technician, "Instrument technician",
                       at=dt.datetime.combine(day, dt.time(15, 0), tzinfo=dt.timezone.utc))
            count += 1
            device.refresh_from_db(fields=["next_due_date"])
            previous = day
            # done on the due date or up to three weeks before it, never sooner than two weeks after the last
            day = max(device.next_due_date - dt.timedelta(days=rng.randint(0, 21)), day + dt.timedelta(days=14))
            if day >= TODAY - dt.timedelta(days=3):
                return count
            if day >= TODAY - dt.timedelta(days=LATE_WINDOW_DAYS) and rng.random() < LATE_CHANCE:
                return count  # the last one is missed: its due date has passed

    def _bench(self, device, rng, standards):
        """The spare's calibration on the workshop bench a month ago, so it may be installed."""
        day = TODAY - dt.timedelta(days=30)
        standard = standards[("liquid", device.flow_units)]
        event = CalibrationEvent.objects.create(
            device=device, performed_on=day, technician=rng.choice(TECHNICIANS), procedure=BENCH_PROCEDURE,
            meter_units=device.flow_units, reference_units=standard.units,
            ambient_temp_c=20.5, fluid_temp_c=18.0, pressure_bar=2.0, reason="scheduled", decision_rule="simple",
            condition_received="New from stores, sealed.")
        event.reference_standards.add(standard)
        self._points(event, device, CalibrationPoint.Kind.AS_FOUND,
                     [rng.gauss(0, 0.1 * device.mpe_value) for _ in NOMINALS], rng)
        event.sign(event.technician, "Instrument technician",
                   at=dt.datetime.combine(day, dt.time(15, 0), tzinfo=dt.timezone.utc))
        return 1

    def _points(self, event, device, kind, errors_in_basis, rng):
        span = device.range_max - device.range_min
        for nominal, error in zip(NOMINALS, errors_in_basis):
            reference = round(device.range_min + span * nominal / 100 * rng.uniform(0.97, 1.03), 4)
            entered = reference
            if event.converted:  # the rig's reading in its own units, as the technician would type it
                entered = round(units.convert(reference, event.device_units, event.entered_units,
                                              density_kg_m3=event.density_kg_m3), 2)
                reference = units.convert(entered, event.entered_units, event.device_units,
                                          density_kg_m3=event.density_kg_m3)
            indicated = errors.indication_for_error(reference, error, device.mpe_basis, span)
            point = CalibrationPoint(event=event, kind=kind, nominal_pct=nominal, reference_value=reference,
                                     reference_entered=entered, indicated_value=round(indicated, 5))
            point.compute(device, event.reference_standards.first(), event.decision_rule, factor=event.unit_factor())
            point.save()
