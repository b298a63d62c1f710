from django.apps import AppConfig


class OfflineConfig(AppConfig):
    name = "offline"
    verbose_name = "Offline field entry"

    def ready(self):
        # offline sits above the apps whose records a tablet may keep, so it registers their kinds itself
        from offline import calibration_kind, kinds, maintenance_kind

        kinds.register(calibration_kind.CalibrationKind())
        kinds.register(maintenance_kind.MaintenanceKind())  # maintenance records can be kept on a tablet too
