from django.contrib import admin, messages

from calibration.models import CalibrationEvent, CalibrationPoint, ReferenceStandard
from plant.admin import RefuseCitedDeletes


class LockedWhenSigned:
    """Signed records are read-only in the admin too (the model refuses them as well)."""

    def _signed(self, obj):
        event = getattr(obj, "event", obj)
        return bool(event and event.is_signed)

    def has_change_permission(self, request, obj=None):
        return super().has_change_permission(request, obj) and not (obj and self._signed(obj))

    def has_delete_permission(self, request, obj=None):
        return super().has_delete_permission(request, obj) and not (obj and self._signed(obj))


class PointInline(LockedWhenSigned, admin.TabularInline):
    model = CalibrationPoint
    extra = 0


@admin.register(CalibrationEvent)
class CalibrationEventAdmin(LockedWhenSigned, admin.ModelAdmin):
    list_display = ("device", "performed_on", "technician", "contractor", "state", "as_found_in_tolerance")
    list_filter = ("state", "reason")
    inlines = [PointInline]
    actions = None  # no bulk delete of calibration records
    # signing is sign()'s alone (its checks, and the record chain in the same transaction)
    readonly_fields = ("state", "signed_by", "signed_role", "signed_at")

    def formfield_for_manytomany(self, db_field, request, **kwargs):
        # the admin leaves out a link with a through model of its own; StandardLink holds nothing but the link
        # (set() works on it), so a draft's standards stay editable here
        if db_field.name == "reference_standards":
            return db_field.formfield(**kwargs)
        return super().formfield_for_manytomany(db_field, request, **kwargs)


@admin.register(ReferenceStandard)
class ReferenceStandardAdmin(RefuseCitedDeletes, admin.ModelAdmin):
    """A standard that signed calibrations cite is withdrawn from use, not deleted: the records keep pointing at
    it and the tablet form no longer offers it."""

    list_display = ("identification", "description", "phase", "principle", "range_min", "range_max", "units", "due_date",
                    "certificate_number", "issuer", "withdrawn")
    list_filter = ("withdrawn", "phase", "principle")
    actions = ["withdraw_from_use"]

    @admin.action(description="Withdraw the selected standards from use", permissions=["change"])
    def withdraw_from_use(self, request, queryset):
        withdrawn = []
        for standard in queryset.filter(withdrawn=False).order_by("identification"):
            standard.withdrawn = True
            standard.save()  # one by one: the audit trail records each withdrawal
            withdrawn.append(standard.identification)
        if withdrawn:
            self.message_user(request, f"Withdrew {', '.join(withdrawn)} from use: new calibrations can no longer "
                                       "use them; the signed calibrations that cite them keep them.", messages.SUCCESS)
        else:
            self.message_user(request, "The selected standards were already withdrawn from use.", messages.INFO)
