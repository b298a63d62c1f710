"""The weekly review's maintenance lists: tasks overdue and due soon, read from the stored next due date on each
task row (one counting query for both, one page read each), whatever the fleet size."""
import datetime as dt

from django.db.models import Count, Q


def tasks_in_service(filters: dict):
    from maintenance.models import MaintenanceTask
    from reports.review import installed

    return MaintenanceTask.objects.filter(installed(filters, via="device__"), active=True)


def buckets(filters: dict, days: int, today: dt.date):
    from maintenance.tables import MaintenanceDueTable, MaintenanceOverdueTable
    from reports.review import Bucket

    conditions = {
        "maint_overdue": Q(next_due_date__lt=today),
        "maint_due": Q(next_due_date__gte=today, next_due_date__lte=today + dt.timedelta(days=days)),
    }
    base = tasks_in_service(filters)
    counts = base.aggregate(**{key: Count("pk", filter=c) for key, c in conditions.items()})
    # installed devices' tags are unique: tag, code and id order the list as the register does
    rows = base.select_related("device__position__area__site").order_by("device__position__tag", "code", "pk")
    return [
        Bucket("maint_overdue", "Maintenance overdue", rows.filter(conditions["maint_overdue"]),
               MaintenanceOverdueTable, counts["maint_overdue"]),
        Bucket("maint_due", f"Maintenance due in the next {days} days", rows.filter(conditions["maint_due"]),
               MaintenanceDueTable, counts["maint_due"]),
    ]
