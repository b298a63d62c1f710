"""Maintenance pages: tablet entry, record and sign-off, photos, reviewer task edits, the meter page section."""
from django.contrib import messages
from django.contrib.auth.decorators import permission_required
from django.core.exceptions import PermissionDenied
from django.http import FileResponse, Http404
from django.db import transaction
from django.shortcuts import get_object_or_404, redirect, render
from django.views.decorators.http import require_POST

from ledger.signed import SignedRecordError
from maintenance import loop
from maintenance.forms import RecordForm, TaskForm
from maintenance.models import MaintenancePhoto, MaintenanceRecord, MaintenanceTask
from maintenance.signals import tasks_changed
from plant.db_failures import nothing_saved_page
from plant.models import Device
from plant.params import query_id
from plant.roles import role_of


@permission_required("maintenance.add_maintenancerecord", raise_exception=True)
def new_record(request, tag):
    device = get_object_or_404(Device.objects.select_related("position__area__site", "position__fluid"), position__tag=tag)
    if request.method == "POST":
        form = RecordForm(request.POST, request.FILES, device=device, user=request.user)
        if form.is_valid():
            return redirect(form.save())
    else:
        initial = {"performed_on": device.today()}  # the date at the position's site
        task = query_id(request, "task")
        if task is not None:
            initial["task"] = task
        form = RecordForm(device=device, user=request.user, initial=initial)
    return render(request, "maintenance/entry.html", {"device": device, "form": form},
                  status=400 if request.method == "POST" else 200)


@permission_required("maintenance.view_maintenancerecord", raise_exception=True)
def record_detail(request, pk, sign_error=None):
    record = get_object_or_404(MaintenanceRecord.objects.select_related("device__position__area__site", "device__position__fluid", "task"),
                               pk=pk)
    can_sign = (not record.is_signed and request.user.has_perm("maintenance.sign_maintenance")
                and record.created_by_id == request.user.pk)
    return render(request, "maintenance/record_detail.html", {
        "record": record, "photos": list(record.photos.all()), "can_sign": can_sign, "sign_error": sign_error,
    }, status=400 if sign_error else 200)


@require_POST
@permission_required("maintenance.sign_maintenance", raise_exception=True)
@nothing_saved_page("sign-off", back="maintenance:record-detail")
def sign_record(request, pk):
    record = get_object_or_404(MaintenanceRecord, pk=pk)
    if record.created_by_id != request.user.pk:
        raise PermissionDenied("Only the technician who entered a maintenance record can sign it.")
    try:
        record.sign(by=request.user.get_full_name() or request.user.username,
                    role=role_of(request.user) or "Technician")
    except SignedRecordError as exc:
        return record_detail(request, pk, sign_error=str(exc))
    return redirect(record)


@permission_required("maintenance.view_maintenancerecord", raise_exception=True)
def photo(request, pk):
    """A record's photo, to logged-in users who may read maintenance records (never a public media URL)."""
    item = get_object_or_404(MaintenancePhoto, pk=pk)
    try:
        handle = item.image.open("rb")
    except FileNotFoundError:
        raise Http404("The photo file is missing.")
    response = FileResponse(handle, content_type=item.content_type)
    response["Cache-Control"] = "private, max-age=3600"
    response["Content-Disposition"] = f'inline; filename="maintenance-{item.record_id}-{item.pk}.{item.extension}"'
    return response


def _task_form(request, device, task):
    form = TaskForm(request.POST or None, instance=task)
    if request.method == "POST" and form.is_valid():
        with transaction.atomic():
            saved = form.save()
            tasks_changed.send(sender=MaintenanceTask, devices=[device.pk])  # the due dates follow (scheduling)
        messages.success(request, f"Task “{saved.title}” saved.")
        return redirect(device.get_absolute_url() + "#maintenance")
    return render(request, "maintenance/task_form.html", {"form": form, "device": device, "task": task},
                  status=400 if request.method == "POST" else 200)


@permission_required("maintenance.review_maintenance", raise_exception=True)
def task_add(request, tag):
    device = get_object_or_404(Device, position__tag=tag)
    return _task_form(request, device, MaintenanceTask(device=device))


@permission_required("maintenance.review_maintenance", raise_exception=True)
def task_edit(request, pk):
    task = get_object_or_404(MaintenanceTask.objects.select_related("device"), pk=pk)
    return _task_form(request, task.device, task)


# The meter page's section ---------------------------------------------------------------------------
def meter_section(device, calibrations=None):
    """Context of the meter page's maintenance section: three queries (tasks, records, calibration verdicts)."""
    tasks = list(device.maintenance_tasks.order_by("-active", "next_due_date", "code"))
    records = list(device.maintenance_records.select_related("task").order_by("performed_on", "id"))
    signed = [r for r in records if r.is_signed]
    rows = []
    for task in tasks:
        visits = [r for r in signed if r.task_id == task.pk]
        result = loop.next_frequency(task.start_days, [r.condition for r in visits], [r.performed_on for r in visits])
        last = visits[-1].performed_on if visits else None
        rows.append({"task": task, "frequency": result.frequency_days, "steps": result.steps,
                     "due": loop.next_due(last, result.frequency_days, task.since) if task.active else None,
                     "due_sentence": loop.due_sentence(last, result.frequency_days, task.since)})
    verdicts = list(device.calibrations.filter(state="signed").values_list("performed_on", "as_found_in_tolerance"))
    pairs = loop.failures_after_fouling([(r.performed_on, r.condition) for r in signed], verdicts)
    return {"rows": rows, "records": list(reversed(records))[:20],
            "failures_after_fouling": pairs, "window": loop.FAILURE_WINDOW_DAYS}
