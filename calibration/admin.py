from django.contrib import admin

from calibration.models import CalibrationEvent, CalibrationPoint, ReferenceStandard


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
    list_display = ("meter", "performed_on", "technician", "contractor", "state", "as_found_in_tolerance")
    list_filter = ("state", "reason")
    inlines = [PointInline]
    actions = None  # no bulk delete of calibration records
    # signing is sign()'s alone (its checks, and the record chain in the same transaction)
    readonly_fields = ("state", "signed_by", "signed_role", "signed_at")


@admin.register(ReferenceStandard)
class ReferenceStandardAdmin(admin.ModelAdmin):
    list_display = ("identification", "description", "phase", "range_min", "range_max", "units", "due_date",
                    "certificate_number", "issuer", "withdrawn")
    list_filter = ("withdrawn", "phase")
