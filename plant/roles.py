"""The three roles and what each may do, as Django groups with model permissions.

technician: read the register, enter calibrations and sign their own, swap devices at positions.
reviewer: read everything, the weekly review and statistics, change positions/devices/fluids/standards (intervals
and rules), import the register, countersign others' calibrations.
administrator: everything, including the admin site and accounts.
"""
from django.contrib.auth.models import Group, Permission

TECHNICIAN, REVIEWER, ADMINISTRATOR = "technician", "reviewer", "administrator"

READ = ["plant.view_site", "plant.view_area", "plant.view_fluid", "plant.view_device", "plant.view_dutyperiod",
        "plant.view_position", "plant.view_installation",
        "calibration.view_referencestandard", "calibration.view_calibrationevent", "calibration.view_calibrationpoint"]

ROLE_PERMISSIONS = {
    TECHNICIAN: READ + ["calibration.add_calibrationevent", "calibration.add_calibrationpoint",
                        "calibration.sign_calibration", "plant.swap_device",
                        "maintenance.view_maintenancetask", "maintenance.view_maintenancerecord",
                        "maintenance.add_maintenancerecord", "maintenance.sign_maintenance"],
    REVIEWER: READ + ["calibration.view_review", "calibration.countersign_calibration",
                      "plant.add_device", "plant.change_device", "plant.add_position", "plant.change_position",
                      "plant.swap_device", "plant.accept_unfit_device", "plant.add_fluid", "plant.change_fluid",
                      "plant.add_site", "plant.add_area", "calibration.add_referencestandard",
                      "calibration.change_referencestandard",
                      "maintenance.view_maintenancetask", "maintenance.view_maintenancerecord",
                      "maintenance.review_maintenance"],
}


def _permission(dotted):
    app_label, codename = dotted.split(".")
    return Permission.objects.get(content_type__app_label=app_label, codename=codename)


def ensure_roles(**kwargs):
    """Create or refresh the role groups (run after every migrate)."""
    # runs after each app's migrations: wait until the last app with role permissions (maintenance) has its own
    if not Permission.objects.filter(codename__in=["sign_calibration", "sign_maintenance"]).count() == 2:
        return
    for name, dotted in ROLE_PERMISSIONS.items():
        group, _ = Group.objects.get_or_create(name=name)
        group.permissions.set([_permission(p) for p in dotted])
    admin_group, _ = Group.objects.get_or_create(name=ADMINISTRATOR)
    admin_group.permissions.set(Permission.objects.all())


def role_of(user):
    names = set(user.groups.values_list("name", flat=True))
    for role in (ADMINISTRATOR, REVIEWER, TECHNICIAN):
        if role in names:
            return role.capitalize()
    return "Administrator" if user.is_superuser else ""
