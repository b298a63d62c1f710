"""Invented maintenance history: tasks from each meter's duty and visits that follow the loop, seeded.

Used by the demo fixture (management command build_demo_maintenance) and by make_fleet at scale. What is found is
invented: the odds of each condition depend on the duty (deposits build up with the time since the last visit, fast
on the small ports of pitots and impulse lines in a fouling fluid, slowly elsewhere; chlorides bring corrosion and
moving parts wear), and each visit falls when the loop
(maintenance/loop.py) says the task is next due, give or take a tenth.
"""
from __future__ import annotations

import datetime as dt
import random

from maintenance import loop
from maintenance import tasks as catalogue

BLOCKING_TASKS = {"IMPULSE_BLOWDOWN", "PITOT_PULL_CLEAN"}
WEAR_TASKS = {"TURBINE_ROTOR_STRAINER", "PD_CHAMBER_INSPECTION", "ORIFICE_PLATE_INSPECTION"}
TECHNICIANS = ["R. Okonkwo-Hale", "M. Varga", "S. Lindqvist"]
ACTIONS = {
    "clean": "Inspected; nothing to clean. Refitted and checked the reading.",
    "light_deposit": "Light film wiped off; refitted and checked the reading.",
    "heavy_deposit": "Heavy deposit removed by hand and with a mild cleaning solution; refitted, zero checked.",
    "blocked": "Found blocked; cleared (rodded / back-flushed), refitted and checked the reading moves with flow.",
    "corroded": "Corrosion noted and photographed; cleaned, reported for material review.",
    "worn": "Wear found; worn parts replaced, freedom of movement checked.",
    "damaged": "Damage found and made safe; repair requested.",
    "leaking": "Leak found at a fitting; joint remade and checked tight.",
}


NOT_WETTED = {"VISUAL_INSPECTION", "TRANSMITTER_VERIFICATION", "DP_ZERO_CHECK", "CLAMPON_COUPLING"}


def duty_model(code: str, fluid) -> dict:
    """Invented: how fast deposits build up on what the task looks at (tau, days for a "heavy" deposit; None when
    the task sees nothing wetted) and the odds per visit of the rarer findings."""
    fouling = fluid.scaling or fluid.biofouling or fluid.sticky or fluid.solids or fluid.phase == "slurry"
    model = {"tau": None, "damaged": 0.02, "leaking": 0.02, "corroded": 0.0, "worn": 0.0}
    if code not in NOT_WETTED:
        model["tau"] = (35.0 if code in BLOCKING_TASKS else 220.0) if fouling else 2500.0
        if fluid.chlorides:
            model["corroded"] = 0.05
    if code in WEAR_TASKS:
        model["worn"] = 0.10 if (fluid.solids or fluid.phase == "slurry") else 0.04
    return model


def found(rng: random.Random, interval_days: float, code: str, model: dict) -> str:
    """What a visit finds after `interval_days`: a rare finding by its odds, else the deposit built up since the last
    visit (interval / tau, with a spread), graded clean / light / heavy / blocked."""
    for rare in ("damaged", "leaking", "corroded", "worn"):
        if rng.random() < model[rare]:
            return rare
    if model["tau"] is None:
        return "clean"
    build_up = interval_days / model["tau"] * rng.lognormvariate(0.0, 0.5)
    if build_up < 0.3:
        return "clean"
    if build_up < 1.0:
        return "light_deposit"
    if build_up < 2.0 or code not in BLOCKING_TASKS:
        return "heavy_deposit"
    return "blocked"


def invent_visits(rng: random.Random, start_days: int, since: dt.date, until: dt.date, code: str,
                  model: dict, upset_from: dt.date | None = None) -> list[tuple[dt.date, str]]:
    """[(date, condition)] from `since` to `until`: each visit when the loop says the task is due (±10 %), what is
    found depending on the time since the last visit. From `upset_from` on, the process is upset (treatment out
    of service): deposits build up six times as fast."""
    upset = {**model, "tau": model["tau"] / 6} if model["tau"] else model
    lower, upper = loop.bounds(start_days)
    current, streak = min(max(start_days, lower), upper), 0
    day, out = since, []
    while True:
        interval = max(1, round(current * rng.uniform(0.9, 1.1)))
        day = day + dt.timedelta(days=interval)
        if day > until:
            return out
        condition = found(rng, interval, code, upset if upset_from and day >= upset_from else model)
        out.append((day, condition))
        current, streak = loop.step(current, streak, condition, lower, upper)


def specs_for(device):
    return catalogue.derive_tasks(device.principle, device.duty_findings())


def build_tasks(device, since):
    """Unsaved derived tasks of a meter, their stored fields filled as save() would."""
    from maintenance.models import MaintenanceTask

    return [MaintenanceTask(device=device, code=s.code, title=s.title, reason=s.reason, basis=s.basis,
                            base_days=s.base_days, severity_factor=s.factor, start_days=s.frequency_days,
                            frequency_days=s.frequency_days, next_due_date=since, since=since,
                            change_reason="Called for by the duty: " + s.explanation())
            for s in specs_for(device)]


def build_records(task, visits, rng):
    """Unsaved signed records of a task's visits."""
    from maintenance.models import MaintenanceRecord

    out = []
    for day, condition in visits:
        technician = rng.choice(TECHNICIANS)
        out.append(MaintenanceRecord(
            device_id=task.device_id, task=task, performed_on=day, technician=technician, condition=condition,
            action=ACTIONS[condition], parts="", minutes_spent=rng.choice([20, 30, 45, 60, 90]), notes="",
            state=MaintenanceRecord.State.SIGNED, signed_by=technician, signed_role="Technician",
            signed_at=dt.datetime.combine(day, dt.time(14, 30), tzinfo=dt.timezone.utc)))
    return out


def add_fleet_history(devices, rng, since, until):
    """Tasks and signed visits for freshly bulk-created meters (make_fleet); returns (tasks, records) counts."""
    from maintenance.models import MaintenanceRecord, MaintenanceTask

    tasks = [t for m in devices for t in build_tasks(m, since)]
    MaintenanceTask.objects.bulk_create(tasks, batch_size=2000)
    fluids = {m.pk: m.fluid.props() for m in devices}
    records = []
    for task in tasks:
        model = duty_model(task.code, fluids[task.device_id])
        # a few duties upset over the last months (invented): the fouling finding occurs at scale too
        upset = until - dt.timedelta(days=150) if model["tau"] and model["tau"] < 1000 and rng.random() < 0.08 else None
        visits = invent_visits(rng, task.start_days, since, until, task.code, model, upset_from=upset)
        records += build_records(task, visits, rng)
    MaintenanceRecord.objects.bulk_create(records, batch_size=5000)
    return len(tasks), len(records)
