"""Tablet entry of a maintenance record (with photos), and the reviewer's task form."""
from django import forms
from django.conf import settings
from django.db import transaction
from django.utils.html import format_html

from maintenance.models import MaintenancePhoto, MaintenanceRecord, MaintenanceTask

PHOTO_FORMATS = {"JPEG": "image/jpeg", "PNG": "image/png", "WEBP": "image/webp"}
MAX_PHOTOS = 6
MAX_PIXELS = 60_000_000  # larger than any tablet camera: refuse before decoding a "decompression bomb"


class MultipleFileInput(forms.ClearableFileInput):
    allow_multiple_selected = True


class PhotoField(forms.FileField):
    """Up to MAX_PHOTOS images; each checked by its content (not its name): JPEG, PNG or WebP, size-limited."""

    def __init__(self, **kwargs):
        kwargs.setdefault("widget", MultipleFileInput(attrs={"accept": ",".join(PHOTO_FORMATS.values())}))
        kwargs.setdefault("required", False)
        super().__init__(**kwargs)

    def clean(self, data, initial=None):
        files = [f for f in (data if isinstance(data, (list, tuple)) else [data]) if f]
        if len(files) > MAX_PHOTOS:
            raise forms.ValidationError(f"At most {MAX_PHOTOS} photos per record; {len(files)} were chosen.")
        return [(f, check_photo(f)) for f in files]


def check_photo(upload) -> str:
    """The content type of an acceptable photo, or a ValidationError naming the file and the reason."""
    from PIL import Image, UnidentifiedImageError

    limit = settings.MAINTENANCE_PHOTO_MAX_BYTES
    name = upload.name or "the photo"
    if upload.size > limit:
        raise forms.ValidationError(
            f"{name} is {upload.size / 1048576:.1f} MB; a photo may be at most {limit / 1048576:.0f} MB.")
    if upload.size == 0:
        raise forms.ValidationError(f"{name} is empty.")
    try:
        upload.seek(0)
        with Image.open(upload) as image:
            kind = image.format
            if image.width * image.height > MAX_PIXELS:
                raise forms.ValidationError(f"{name} is {image.width}×{image.height} pixels, too large a picture.")
            image.verify()
    except forms.ValidationError:
        raise
    except (UnidentifiedImageError, OSError, ValueError, SyntaxError, Image.DecompressionBombError):
        raise forms.ValidationError(f"{name} is not a readable image; attach a JPEG, PNG or WebP photo.")
    finally:
        upload.seek(0)
    if kind not in PHOTO_FORMATS:
        raise forms.ValidationError(f"{name} is a {kind} image; attach a JPEG, PNG or WebP photo.")
    return PHOTO_FORMATS[kind]


def task_label(task):
    """The task's title, then how often and when due, the date kept whole on a narrow tablet."""
    every = task.frequency_days or task.start_days
    if task.next_due_date is None:
        return format_html('{} <span class="nowrap">(every {} d)</span>', task.title, every)
    return format_html('{} (every {} d, <span class="nowrap">due {}</span>)', task.title, every,
                       f"{task.next_due_date:%Y-%m-%d}")


class RecordForm(forms.ModelForm):
    photos = PhotoField(label="Photos (optional)",
                        help_text=f"JPEG, PNG or WebP, up to {MAX_PHOTOS}, each at most "
                                  f"{settings.MAINTENANCE_PHOTO_MAX_BYTES // 1048576} MB.")

    class Meta:
        model = MaintenanceRecord
        fields = ["performed_on", "task", "condition", "action", "parts", "minutes_spent", "notes"]
        widgets = {
            "performed_on": forms.DateInput(attrs={"type": "date"}, format="%Y-%m-%d"),
            "task": forms.RadioSelect,
            "condition": forms.RadioSelect,
            "action": forms.Textarea(attrs={"rows": 3}),
            "notes": forms.Textarea(attrs={"rows": 2}),
            "minutes_spent": forms.NumberInput(attrs={"inputmode": "numeric", "autocomplete": "off", "min": 1}),
        }
        error_messages = {
            "task": {"required": "Choose the task you did.", "invalid_choice": "Choose one of this meter's tasks."},
            "condition": {"required": "Choose what you found."},
            "action": {"required": "Say what you did."},
            "minutes_spent": {"required": "Enter the time spent in minutes.",
                              "invalid": "Enter the time spent as whole minutes."},
            "performed_on": {"required": "Enter the date of the work.", "invalid": "Enter a valid date."},
        }

    def __init__(self, *args, device=None, user=None, **kwargs):
        super().__init__(*args, **kwargs)
        self.device, self.user = device, user
        self.fields["task"].queryset = MaintenanceTask.objects.filter(device=device, active=True).order_by("code", "pk")
        self.fields["task"].empty_label = None
        self.fields["task"].label_from_instance = task_label
        self.fields["condition"].choices = [c for c in self.fields["condition"].choices if c[0]]
        self.instance.device = device
        self.instance.technician = (user.get_full_name() or user.username) if user else ""

    @transaction.atomic
    def save(self, commit=True):
        record = super().save(commit=False)
        record.device = self.device
        record.created_by = self.user
        record.technician = (self.user.get_full_name() or self.user.username) if self.user else record.technician
        record.save()
        for upload, content_type in self.cleaned_data.get("photos") or []:
            photo = MaintenancePhoto(record=record, content_type=content_type)
            photo.image.save("photo", upload, save=False)
            photo.save()
        return record


class TaskForm(forms.ModelForm):
    """A reviewer adds, changes or retires a task; the reason is required and kept in the audit trail."""

    change_reason = forms.CharField(label="Reason for this change", max_length=300,
                                    widget=forms.Textarea(attrs={"rows": 2}),
                                    error_messages={"required": "Say why (kept in the change history)."})

    class Meta:
        model = MaintenanceTask
        fields = ["title", "reason", "base_days", "active", "change_reason"]
        labels = {"base_days": "Frequency (days)", "reason": "What and why", "active": "Active (untick to retire)"}
        widgets = {"reason": forms.Textarea(attrs={"rows": 3}),
                   "base_days": forms.NumberInput(attrs={"inputmode": "numeric", "min": 1})}

    def __init__(self, *args, **kwargs):
        super().__init__(*args, **kwargs)
        if self.instance.pk is None:
            self.fields.pop("active")
        else:
            self.initial["change_reason"] = ""
            if self.instance.severity_factor < 1:
                # a reviewer's frequency is used as is: show what the duty made of it
                self.initial["base_days"] = self.instance.start_days

    def save(self, commit=True):
        task = super().save(commit=False)
        task.origin = MaintenanceTask.Origin.REVIEWER
        task.severity_factor = 1.0
        task.basis = "set by a reviewer"
        if not task.code:
            task.code = "CUSTOM"
        task.frequency_days = task.next_due_date = None  # recomputed from the new frequency
        task._change_reason = task.change_reason[:100]  # the audit row's note holds 100; the field keeps all
        task.save()
        return task
