from django.contrib import admin
from simple_history.admin import SimpleHistoryAdmin

from maintenance.models import MaintenancePhoto, MaintenanceRecord, MaintenanceTask, WalkOrder
from plant.admin import RefuseCitedDeletes


class LockedWhenSigned:
    """Signed records and their photos are read-only in the admin too (the model refuses them as well)."""

    def _signed(self, obj):
        record = getattr(obj, "record", obj)
        return bool(record and record.is_signed)

    def has_change_permission(self, request, obj=None):
        return super().has_change_permission(request, obj) and not (obj and self._signed(obj))

    def has_delete_permission(self, request, obj=None):
        return super().has_delete_permission(request, obj) and not (obj and self._signed(obj))


class PhotoInline(LockedWhenSigned, admin.TabularInline):
    model = MaintenancePhoto
    extra = 0


@admin.register(MaintenanceRecord)
class MaintenanceRecordAdmin(LockedWhenSigned, SimpleHistoryAdmin):
    list_display = ("device", "performed_on", "task", "condition", "technician", "state")
    list_filter = ("state", "condition")
    inlines = [PhotoInline]
    actions = None  # no bulk delete of maintenance records
    # signing is sign()'s alone (the record chain is written in the same transaction)
    readonly_fields = ("state", "signed_by", "signed_role", "signed_at")


@admin.register(MaintenanceTask)
class MaintenanceTaskAdmin(RefuseCitedDeletes, SimpleHistoryAdmin):
    list_display = ("device", "title", "frequency_days", "next_due_date", "origin", "active")
    list_filter = ("origin", "active", "code")
    actions = None


@admin.register(WalkOrder)
class WalkOrderAdmin(admin.ModelAdmin):
    list_display = ("area", "position")
    ordering = ("area__site__name", "position")
