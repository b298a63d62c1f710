"""Keep each meter's derived maintenance tasks in step with its duty (principle and fluid).

Tasks a reviewer added or changed (origin "reviewer") are never touched here; derived tasks are created,
updated (frequency, reason) or retired as the duty calls for them, each change with its reason in the audit trail.
"""
from django.db import transaction

from maintenance import tasks as catalogue
from maintenance.models import MaintenanceTask

RETIRED_BY_DUTY = "No longer called for by the duty (principle or fluid changed)."


def _saved(task, reason):
    task.change_reason = reason[:300]
    task._change_reason = task.change_reason[:100]  # the audit row's note holds 100; the field keeps all
    task.save()


@transaction.atomic
def sync_tasks(device, today=None):
    """Create, update or retire the meter's derived tasks; returns the specs the duty calls for."""
    today = today or device.today()  # the date at the meter's site
    specs = catalogue.derive_tasks(device.principle, device.duty_findings())
    existing = {t.code: t for t in device.maintenance_tasks.filter(origin=MaintenanceTask.Origin.DERIVED)}
    reviewer_codes = set(device.maintenance_tasks.filter(origin=MaintenanceTask.Origin.REVIEWER)
                         .values_list("code", flat=True))
    for spec in specs:
        if spec.code in reviewer_codes:
            continue  # a reviewer has taken this task over
        task = existing.get(spec.code)
        if task is None:
            task = MaintenanceTask(device=device, code=spec.code, title=spec.title, reason=spec.reason,
                                   basis=spec.basis, base_days=spec.base_days, severity_factor=spec.factor,
                                   since=today)
            _saved(task, "Called for by the duty: " + spec.explanation())
            continue
        values = {"title": spec.title, "reason": spec.reason, "basis": spec.basis, "base_days": spec.base_days,
                  "severity_factor": spec.factor}
        if task.active and all(getattr(task, k) == v for k, v in values.items()):
            continue
        was_retired = not task.active
        for name, value in values.items():
            setattr(task, name, value)
        task.active = True
        if was_retired:
            task.since = today
            task.next_due_date = None  # due from today again
            task.frequency_days = None
        _saved(task, ("Called for again by the duty: " if was_retired else "Duty changed: ") + spec.explanation())
    wanted = {s.code for s in specs}
    for code, task in existing.items():
        if task.active and code not in wanted:
            task.active = False
            _saved(task, RETIRED_BY_DUTY)
    return specs


def add_tasks_in_bulk(devices, duty_findings, user):
    """The derived tasks of new devices written in bulk (the register import), as sync_tasks writes them one by
    one: same fields, reasons and audit rows. duty_findings: each device's principle×fluid findings, aligned."""
    from maintenance import loop
    from plant.importer import insert_with_history

    today_at = {}  # the day sync_tasks sets a derived task up: today at the device's site, read once per site
    tasks = []
    for device, findings in zip(devices, duty_findings):
        site_id = device.position.area.site_id if device.position_id else None
        if site_id not in today_at:
            today_at[site_id] = device.today()
        today = today_at[site_id]
        for spec in catalogue.derive_tasks(device.principle, findings):
            task = MaintenanceTask(device=device, code=spec.code, title=spec.title, reason=spec.reason,
                                   basis=spec.basis, base_days=spec.base_days, severity_factor=spec.factor,
                                   since=today)
            reason = "Called for by the duty: " + spec.explanation()  # as sync_tasks writes it
            task.change_reason = reason[:300]
            task._change_reason = task.change_reason[:100]
            # what MaintenanceTask.save sets
            task.start_days = catalogue.shortened(int(task.base_days), float(task.severity_factor))
            task.frequency_days = task.start_days
            task.next_due_date = loop.next_due(None, task.frequency_days, task.since)
            tasks.append(task)
    insert_with_history(MaintenanceTask, tasks, user)
