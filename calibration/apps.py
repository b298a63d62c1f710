from django.apps import AppConfig
from django.db.models.signals import post_migrate


class CalibrationConfig(AppConfig):
    name = "calibration"

    def ready(self):
        from calibration.ledger_kinds import CALIBRATION, COUNTERSIGNATURE
        from calibration.starting_point import as_left_of_last_calibration
        from ledger import registry
        from plant import installations
        from plant.roles import ensure_roles

        post_migrate.connect(ensure_roles, sender=self)
        registry.register(CALIBRATION)  # signed calibrations and countersignatures are sealed in the ledger
        registry.register(COUNTERSIGNATURE)
        installations.read_starting_point_with(as_left_of_last_calibration)  # an installation keeps the as-left
