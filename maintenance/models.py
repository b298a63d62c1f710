"""Maintenance tasks on meters, maintenance records entered in the field, and their photos.

A signed record and its photos are locked at the model level, as signed calibrations are
(calibration/models.py): save(), delete() and queryset update()/delete() on signed rows raise
SignedRecordError and change nothing. Task rows carry the stored next due date so the review reads it
without looking at the records.
"""
import datetime as dt
import secrets

from django.conf import settings
from django.core.exceptions import ValidationError
from django.core.validators import MaxValueValidator, MinValueValidator
from django.db import models
from django.urls import reverse
from django.utils import timezone
from simple_history.models import HistoricalRecords

from ledger.signed import LockedQuerySet, SignedRecord, SignedRecordError, signature_errors
from maintenance import loop
from maintenance.ledger_kinds import MAINTENANCE
from plant import citations
from plant.citations import CitedQuerySet, ProtectedWhileCited
from plant.models import DutyPeriod, Installation, Device, unstorable_value_errors

MAX_TASK_DAYS = 3650  # a sanity bound, as the meter's base interval


class MaintenanceTask(ProtectedWhileCited, models.Model):
    class Origin(models.TextChoices):
        DERIVED = "derived", "From the duty"
        REVIEWER = "reviewer", "Set by a reviewer"

    device = models.ForeignKey(Device, on_delete=models.PROTECT, related_name="maintenance_tasks")
    code = models.CharField(max_length=40, help_text="catalogue code (maintenance/tasks.py) or CUSTOM")
    title = models.CharField(max_length=120)
    reason = models.TextField()
    basis = models.CharField(max_length=120, default="common practice")
    origin = models.CharField(max_length=10, choices=Origin.choices, default=Origin.DERIVED)
    base_days = models.PositiveIntegerField(
        "base frequency (days)",
        validators=[MinValueValidator(1, "The frequency must be at least one day."),
                    MaxValueValidator(MAX_TASK_DAYS, f"The frequency cannot be longer than {MAX_TASK_DAYS} days.")])
    severity_factor = models.FloatField(default=1.0, validators=[
        MinValueValidator(0.01, "The factor must be above zero."), MaxValueValidator(1.0, "The factor is at most 1.")])
    start_days = models.PositiveIntegerField("frequency from the duty (days)", editable=False, default=1)
    since = models.DateField("set up on", default=timezone.localdate)
    active = models.BooleanField(default=True)
    change_reason = models.CharField("reason for the last change", max_length=300, blank=True)
    # kept by scheduling.maintenance_due (batched write) and on every signed record; not in the audit trail
    frequency_days = models.PositiveIntegerField(null=True, blank=True, editable=False)
    last_done = models.DateField(null=True, blank=True, editable=False)
    last_condition = models.CharField(max_length=20, blank=True, editable=False)
    next_due_date = models.DateField(null=True, blank=True, editable=False)
    history = HistoricalRecords(excluded_fields=["frequency_days", "last_done", "last_condition", "next_due_date"])

    objects = CitedQuerySet.as_manager()

    class Meta:
        ordering = ["device", "code", "id"]
        indexes = [models.Index(fields=["next_due_date"], condition=models.Q(active=True),
                                name="maint_task_due_idx"),
                   # the review joins tasks to installed devices: this answers it without reading the task rows
                   models.Index(fields=["device", "active", "next_due_date", "code"], include=["id"],
                                name="maint_task_meter_due_idx")]
        permissions = [("review_maintenance", "Can add, change and retire maintenance tasks")]

    def __str__(self):
        return f"{self.device}: {self.title}"

    def clean(self):
        errors = unstorable_value_errors(self)
        if errors:
            raise ValidationError(errors)

    def save(self, *args, **kwargs):
        self.full_clean()
        from maintenance.tasks import shortened

        self.start_days = shortened(int(self.base_days), float(self.severity_factor))
        if self.frequency_days is None:
            self.frequency_days = self.start_days
        if self.next_due_date is None:
            self.next_due_date = loop.next_due(self.last_done, self.frequency_days, self.since)
        super().save(*args, **kwargs)


class MaintenanceQuerySet(LockedQuerySet):
    """Refuses bulk update/delete that would touch a signed record, as for calibrations (ledger/signed.py)."""

    record_model = "maintenance.MaintenanceRecord"
    changed_message = "Signed maintenance records cannot be changed."
    deleted_message = "Signed maintenance records cannot be deleted."


class PhotoQuerySet(MaintenanceQuerySet):
    signed_lookup = "record__state"
    parent = "record"


class MaintenanceRecord(SignedRecord):
    class State(models.TextChoices):
        DRAFT = "draft", "Draft"
        SIGNED = "signed", "Signed"


    device = models.ForeignKey(Device, on_delete=models.PROTECT, related_name="maintenance_records")
    task = models.ForeignKey(MaintenanceTask, on_delete=models.PROTECT, related_name="records")
    performed_on = models.DateField("date of the work")
    technician = models.CharField(max_length=120)
    condition = models.CharField("condition found", max_length=20, choices=list(loop.CONDITIONS))
    action = models.TextField("action taken")
    parts = models.CharField("parts replaced", max_length=300, blank=True)
    minutes_spent = models.PositiveIntegerField(
        "time spent (minutes)",
        validators=[MinValueValidator(1, "Enter the time spent in minutes (at least 1)."),
                    MaxValueValidator(24 * 60 * 7, "More than a week on one record: split it, or check the units "
                                                   "(minutes).")])
    notes = models.TextField(blank=True)
    state = models.CharField(max_length=10, choices=State.choices, default=State.DRAFT)
    signed_by = models.CharField(max_length=120, blank=True)
    signed_role = models.CharField(max_length=60, blank=True)
    signed_at = models.DateTimeField(null=True, blank=True)
    created_by = models.ForeignKey(settings.AUTH_USER_MODEL, null=True, blank=True, on_delete=models.PROTECT,
                                   related_name="maintenance_entered")
    # the id a tablet gave an entry kept offline (offline/): the same id sent again saves nothing new
    client_id = models.UUIDField(null=True, blank=True, unique=True, editable=False)
    history = HistoricalRecords()

    objects = MaintenanceQuerySet.as_manager()
    # sign() is the signed record's (ledger/signed.py): sealed in the chain with its photos; the task's and the
    # device's due dates follow in the same transaction (scheduling listens)
    ledger_kind = MAINTENANCE.name

    class Meta:
        ordering = ["-performed_on", "-id"]
        indexes = [models.Index(fields=["device", "performed_on"], name="maint_record_meter_day_idx")]
        permissions = [("sign_maintenance", "Can sign own maintenance records")]

    def __str__(self):
        return f"{self.device} {self.performed_on} {self.get_condition_display()} ({self.get_state_display()})"

    def get_absolute_url(self):
        return reverse("maintenance:record-detail", args=[self.pk])

    @property
    def is_signed(self):
        return self.state == self.State.SIGNED

    def clean(self):
        errors = unstorable_value_errors(self)
        if self.task_id and self.device_id and self.task.device_id != self.device_id:
            errors["task"] = "This task belongs to another meter."
        elif self.task_id and self._state.adding and not self.task.active:
            errors["task"] = "This task is retired; choose an active task."
        # a day's slack: the tablet's local date may be a day ahead of the server's (UTC), as for calibrations
        if (isinstance(self.performed_on, dt.date) and self._state.adding
                and self.performed_on > timezone.localdate() + dt.timedelta(days=1)):
            errors["performed_on"] = "The date of the work is in the future."
        errors.update(signature_errors(self))
        if errors:
            raise ValidationError(errors)

    def _stored_state(self):
        if not self.pk:
            return None
        return MaintenanceRecord.objects.filter(pk=self.pk).values_list("state", flat=True).first()

    def save(self, *args, **kwargs):
        if self._stored_state() == self.State.SIGNED:
            raise SignedRecordError(f"Maintenance record {self.pk} is signed and cannot be changed.")
        self.full_clean()
        super().save(*args, **kwargs)

    def delete(self, *args, **kwargs):
        if self._stored_state() == self.State.SIGNED:
            raise SignedRecordError(f"Maintenance record {self.pk} is signed and cannot be deleted.")
        return super().delete(*args, **kwargs)


def photo_path(instance, filename):
    # our own name on disk: never the uploaded file name (it could hold a path or odd characters)
    return f"maintenance/{timezone.now():%Y/%m}/{secrets.token_hex(12)}.{instance.extension}"


class MaintenancePhoto(models.Model):
    record = models.ForeignKey(MaintenanceRecord, on_delete=models.PROTECT, related_name="photos")
    image = models.FileField(upload_to=photo_path)
    content_type = models.CharField(max_length=40)
    uploaded_at = models.DateTimeField(default=timezone.now)

    objects = PhotoQuerySet.as_manager()

    EXTENSIONS = {"image/jpeg": "jpg", "image/png": "png", "image/webp": "webp"}

    @property
    def extension(self):
        return self.EXTENSIONS.get(self.content_type, "bin")

    def _record_signed(self):
        return MaintenanceRecord.objects.filter(pk=self.record_id, state=MaintenanceRecord.State.SIGNED).exists()

    def save(self, *args, **kwargs):
        if self.record_id and self._record_signed():
            raise SignedRecordError("Photos of a signed maintenance record cannot be changed.")
        super().save(*args, **kwargs)

    def delete(self, *args, **kwargs):
        if self._record_signed():
            raise SignedRecordError("Photos of a signed maintenance record cannot be deleted.")
        self.image.delete(save=False)
        return super().delete(*args, **kwargs)

    def get_absolute_url(self):
        return reverse("maintenance:photo", args=[self.pk])


def new_token():
    return secrets.token_urlsafe(32)


class CalendarToken(models.Model):
    """A per-user secret for the iCalendar feeds; revoking it (delete) stops every feed URL that used it."""

    user = models.ForeignKey(settings.AUTH_USER_MODEL, on_delete=models.CASCADE, related_name="calendar_tokens")
    token = models.CharField(max_length=64, unique=True, default=new_token)
    created_at = models.DateTimeField(default=timezone.now)

    def __str__(self):
        return f"calendar token of {self.user} from {self.created_at:%Y-%m-%d}"


class WalkOrder(models.Model):
    """The order in which a technician walks the areas of a site; the work list follows it (unset: by name)."""

    area = models.OneToOneField("plant.Area", on_delete=models.CASCADE, related_name="walk_order", primary_key=True)
    position = models.PositiveIntegerField(help_text="1 = visited first on the site")

    class Meta:
        ordering = ["position"]

    def __str__(self):
        return f"{self.area}: {self.position}"


# What signed maintenance records cite (plant/citations.py): a task's meter is frozen while signed records of it exist
# (moved to another meter, the records would say the work was done on a device it was not done on)
citations.protect(MaintenanceTask, label=lambda t: f"Maintenance task “{t.title}” of {t.device}",
                  instead="retire it instead (untick Active)", frozen=("device",))
SIGNED_RECORDS = ("signed maintenance record", "signed maintenance records")
SIGNED_ONLY = {"state": MaintenanceRecord.State.SIGNED}
for cited, lookup in ((Device, "device"), (MaintenanceTask, "task")):
    citations.cite(cited, citations.Citation(MaintenanceRecord._meta.label, lookup, "is cited by", SIGNED_RECORDS,
                                             SIGNED_ONLY))
for cited, device_field in ((DutyPeriod, "device"), (Installation, "device")):
    citations.cite(cited, citations.Coverage(MaintenanceRecord._meta.label, "covers the dates of", SIGNED_RECORDS,
                                             device_field, SIGNED_ONLY))
citations.cite(settings.AUTH_USER_MODEL, citations.Citation(
    MaintenanceRecord._meta.label, "created_by", "entered and signed", ("maintenance record", "maintenance records"),
    SIGNED_ONLY))
