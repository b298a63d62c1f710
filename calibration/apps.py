from django.apps import AppConfig
from django.db.models.signals import post_migrate


class CalibrationConfig(AppConfig):
    name = "calibration"

    def ready(self):
        from plant.roles import ensure_roles

        post_migrate.connect(ensure_roles, sender=self)
