"""A large invented fleet with ten years of signed calibration history, for benchmarks and scale tests.

Seeded and deterministic: the same seed and size give the same plant, tags, dates and errors. Meters are
variations on the demo plant's installations (plant/demo_data.py); drift is
invented as in the demo history (stable, steady drift, jumps after fouling), scaled by each duty's risk.
Rows are written with bulk inserts in chunks of meters, so memory stays flat; the per-row save() checks
are bypassed on purpose, the values being computed with the same functions those checks use.
"""
from __future__ import annotations

import datetime as dt
import random

from django.db import transaction

from calibration import errors
from calibration.invented import NOMINALS, invented_found_errors
from plant import units
from calibration.models import CalibrationEvent, CalibrationPoint, ReferenceStandard
from plant.demo_data import FLUIDS, MAKERS, METERS
from plant.models import Area, DutyPeriod, Fluid, Installation, Device, Position, Site

TAG_PREFIX = "SYN-"
YEARS = 10
SITES = [
    ("Brackenholm Dairy Works", "Mill Road, Brackenholm (invented)"),
    ("Saltcote Water Treatment", "Estuary Lane, Saltcote (invented)"),
    ("Wendle Chemical Park", "Plot 9, Wendle Industrial Estate (invented)"),
    ("Copperdale Bottling", "Station Yard, Copperdale (invented)"),
    ("Ferrow Sugar Refinery", "Quayside, Ferrow (invented)"),
]
AREAS = ["Intake", "Process A", "Process B", "CIP", "Boiler house", "Utilities", "Dosing", "Effluent"]
TECHNICIANS = ["T. Arkwright-Nye", "L. Mbeki-Storr", "P. Halloran", "J. Vesterby", "K. Oduya"]
PROCEDURE = "In-situ comparison against a portable reference meter in series, five points up the range (WP-SY-01)."


def fluids():
    """The demo fluids, created when missing (a synthetic fleet may share a database with the demo)."""
    out = {}
    for (name, phase, cond, dens, visc, solids, chl, scale, slime, sticky, gas, temp) in FLUIDS:
        out[name], _ = Fluid.objects.get_or_create(name=name, defaults=dict(
            phase=phase, conductivity_us_cm=cond, density_kg_m3=dens, viscosity_mpa_s=visc, solids=solids,
            chlorides=chl, scaling=scale, biofouling=slime, sticky=sticky, entrained_gas=gas, temperature_c=temp))
    return out


def standards(today):
    """One standard per service (liquids; gases and steam) and unit: a standard reads in one unit, and the synthetic
    readings are in the meter's own."""
    out = {}
    for ident, service, unit_code, description, cert, days, U in (
            ("RS-SY-L", "liquid", "m3/h", "Portable reference meter, liquids", "SY-EXT-0001", 200, 0.1),
            ("RS-SY-LM", "liquid", "kg/h", "Portable Coriolis reference, liquids", "SY-EXT-0003", 200, 0.1),
            ("RS-SY-G", "gas", "m3/h", "Transfer standard, gases", "SY-EXT-0002", 9, 0.3),
            ("RS-SY-GM", "gas", "kg/h", "Transfer standard, gases and steam (mass)", "SY-EXT-0004", 9, 0.3)):
        out[(service, unit_code)], _ = ReferenceStandard.objects.get_or_create(identification=ident, defaults=dict(
            description=f"{description} (synthetic fleet)", range_min=0, range_max=100000, units=unit_code,
            certificate_number=cert, due_date=today + dt.timedelta(days=days), expanded_uncertainty=U,
            uncertainty_basis="pct_reading"))
    return out


class FleetBuilder:
    """Builds `count` meters and their history, chunk by chunk (call `build`)."""

    def __init__(self, count, seed=20261202, today=None, chunk=250):
        self.count = count
        self.rng = random.Random(seed)
        self.today = today or dt.date(2026, 11, 30)
        self.chunk = chunk
        self.totals = {"meters": 0, "events": 0, "points": 0, "drafts": 0, "tasks": 0, "maintenance": 0}
        self.maintenance_rng = random.Random(seed + 1)  # its own stream: the calibration history stays as it was

    def build(self, progress=None):
        if Position.objects.filter(tag__startswith=TAG_PREFIX).exists():
            raise ValueError("This database already holds a synthetic fleet; build it into an empty database.")
        with transaction.atomic():
            self.fluids = fluids()
            self.standards = standards(self.today)
            self.areas = []
            for name, address in SITES:
                site, _ = Site.objects.get_or_create(name=name, defaults={"address": address})
                self.areas += [Area.objects.get_or_create(site=site, name=area)[0] for area in AREAS]
        for start in range(0, self.count, self.chunk):
            size = min(self.chunk, self.count - start)
            with transaction.atomic():
                self._chunk(start, size)
            if progress:
                progress(size)
        return self.totals

    def _meter(self, number):
        rng = self.rng
        (_, principle, fluid, _, size, bore, rmax, units_text, material, mpe, basis) = rng.choice(METERS)
        scale = rng.choice([0.5, 1, 1, 2])
        rmax = round(rmax * scale, 3)
        status = rng.choices(["in_service", "spare", "removed"], weights=[96, 3, 1])[0]
        code = units.code_for(units_text)
        position = Position(
            tag=f"{TAG_PREFIX}{number:06d}", area=rng.choice(self.areas), fluid=self.fluids[fluid], line_size=size,
            internal_diameter_mm=bore, flow_units=code, normal_flow=round(rmax * rng.uniform(0.4, 0.7), 3),
            min_flow=round(rmax * rng.uniform(0.03, 0.15), 3))
        device = Device(
            principle=principle, range_min=0, range_max=rmax, flow_units=code, wetted_material=material,
            serial=f"SN{rng.randint(1000000, 9999999)}", maker=rng.choice(MAKERS), model=f"M{rng.randint(10, 99)}",
            mpe_value=mpe, mpe_basis=basis, base_interval_days=rng.choice([365, 365, 540, 730]), status=status,
        )
        # spares and retired devices are on the shelf: they served at a place (their duty) but hold no position
        device._duty = (position.area, position.fluid)
        return (position if status == "in_service" else None), device

    def _chunk(self, start, size):
        pairs = [self._meter(start + i + 1) for i in range(size)]
        positions = [p for p, _ in pairs if p is not None]
        for position in positions:  # the model's own checks, less the per-row lookups of area and fluid
            position.clean_fields(exclude=["area", "fluid"])
            position.clean()
        Position.objects.bulk_create(positions)
        devices = []
        for position, device in pairs:
            device.position = position
            device.clean_fields()
            device.clean()
            devices.append(device)
        Device.objects.bulk_create(devices)
        # bulk_create skips the installation path (plant.installations): the installations and the duty
        # history are written here, one row per device
        since = self.today - dt.timedelta(days=int(365.25 * YEARS))
        Installation.objects.bulk_create([Installation(device=m, position=m.position, since=since)
                                          for m in devices if m.position is not None])
        DutyPeriod.objects.bulk_create([DutyPeriod(device=m, position=m.position, area=m._duty[0], fluid=m._duty[1],
                                                   since=since, until=None if m.position else self.today)
                                        for m in devices])
        plans = [(device, self._history(device)) for device in devices]
        events = [event for _, history in plans for event, _ in history]
        CalibrationEvent.objects.bulk_create(events, batch_size=2000)
        links = CalibrationEvent.reference_standards.through
        links.objects.bulk_create([links(calibrationevent_id=event.pk, referencestandard_id=standard.pk)
                                   for _, history in plans for event, (standard, _) in history], batch_size=5000)
        points = []
        for _, history in plans:
            for event, (_, event_points) in history:
                for point in event_points:
                    point.event_id = event.pk
                    points.append(point)
        CalibrationPoint.objects.bulk_create(points, batch_size=5000)
        from maintenance.synthetic import add_fleet_history

        tasks, records = add_fleet_history(devices, self.maintenance_rng, self.today - dt.timedelta(days=int(365.25 * 5)),
                                           self.today - dt.timedelta(days=3))
        self.totals["tasks"] += tasks
        self.totals["maintenance"] += records
        self.totals["meters"] += len(devices)
        self.totals["events"] += len(events)
        self.totals["points"] += len(points)

    def _history(self, device):
        """[(event, (standard, points))] over ten years; the event verdicts are computed here."""
        rng = self.rng
        fluid = device._duty[1]  # a spare's too: the fluid of the duty it served
        # no maintenance findings while the calibration history is invented
        factor = device.risk_factor(evidence=[], last_fluid=fluid)
        mpe = device.mpe_value
        behaviour = rng.choices(["stable", "steady", "fouling"], weights=[6, 3, 1] if factor >= 1 else [3, 4, 3])[0]
        rate = {"stable": 0.0, "steady": 0.2, "fouling": 0.1}[behaviour] * mpe / max(factor, 0.5) * rng.choice([-1, 1])
        interval = max(365, device.effective_interval_days(evidence=[], last_fluid=fluid))
        day = self.today - dt.timedelta(days=int(365.25 * YEARS) - rng.randint(0, 120))
        standard = self.standards[("gas" if fluid.phase in ("gas", "steam") else "liquid", device.flow_units)]
        rule = "guarded" if rng.random() < 0.1 else "simple"
        baseline = rng.uniform(-0.1, 0.1) * mpe
        history = []
        jumped = False
        while day < self.today - dt.timedelta(days=10):
            offset = baseline + rate * interval / 365.25
            if behaviour == "fouling" and not jumped and rng.random() < 0.3:
                offset += rng.choice([-1, 1]) * rng.uniform(0.8, 1.6) * mpe
                jumped = True
            found = invented_found_errors(rng, offset, mpe)
            adjust = max(abs(e) for e in found) > 0.6 * mpe
            left = [rng.gauss(0, 0.05 * mpe) for _ in NOMINALS] if adjust else []
            event = CalibrationEvent(
                device=device, position=device.position, performed_on=day, technician=rng.choice(TECHNICIANS), procedure=PROCEDURE,
                ambient_temp_c=round(rng.uniform(5, 30), 1), fluid_temp_c=fluid.temperature_c,
                pressure_bar=round(rng.uniform(1.5, 6), 1), reason="scheduled", adjusted=adjust,
                decision_rule=rule, notes="Zero and span adjusted." if adjust else "",
                state=CalibrationEvent.State.SIGNED, signed_by="", signed_role="Instrument technician",
                signed_at=dt.datetime.combine(day, dt.time(15, 0), tzinfo=dt.timezone.utc),
            )
            event.signed_by = event.technician
            points = self._points(device, standard, rule, CalibrationPoint.Kind.AS_FOUND, found)
            points += self._points(device, standard, rule, CalibrationPoint.Kind.AS_LEFT, left)
            self._verdicts(event, points)
            history.append((event, (standard, points)))
            baseline = sum(left) / len(left) if adjust else offset
            day += dt.timedelta(days=int(interval * rng.uniform(0.9, 1.1)))
        if device.status == "in_service" and rng.random() < 0.005:  # a few drafts left unsigned
            event = CalibrationEvent(device=device, position=device.position, performed_on=self.today,
                                     technician=rng.choice(TECHNICIANS),
                                     procedure=PROCEDURE, decision_rule=rule)
            points = self._points(device, standard, rule, CalibrationPoint.Kind.AS_FOUND,
                                  [rng.gauss(0, 0.1 * mpe) for _ in NOMINALS])
            self._verdicts(event, points)
            history.append((event, (standard, points)))
            self.totals["drafts"] += 1
        return history

    def _points(self, device, standard, rule, kind, errors_in_basis):
        span = device.range_max - device.range_min
        out = []
        for nominal, error in zip(NOMINALS, errors_in_basis):
            reference = round(device.range_min + span * nominal / 100 * self.rng.uniform(0.97, 1.0), 4)
            indicated = errors.indication_for_error(reference, error, device.mpe_basis, span)
            point = CalibrationPoint(kind=kind, nominal_pct=nominal, reference_value=reference,
                                     indicated_value=round(indicated, 6))
            point.compute(device, standard, rule)
            out.append(point)
        return out

    @staticmethod
    def _verdicts(event, points):
        from calibration import decision

        found = [p.decision for p in points if p.kind == CalibrationPoint.Kind.AS_FOUND]
        left = [p.decision for p in points if p.kind == CalibrationPoint.Kind.AS_LEFT] or found
        event.as_found_in_tolerance = decision.verdict_in_tolerance(found)
        event.as_left_in_tolerance = decision.verdict_in_tolerance(left)
        found_points = [p for p in points if p.kind == CalibrationPoint.Kind.AS_FOUND]
        event.as_found_observed_in_tolerance = decision.observed_in_tolerance([p.error for p in found_points],
                                                                              [p.mpe for p in found_points])
