from django.apps import AppConfig


class OfflineConfig(AppConfig):
    name = "offline"
    verbose_name = "Offline field entry"

    def ready(self):
        from offline import calibration_kind, kinds

        kinds.register(calibration_kind.CalibrationKind())
