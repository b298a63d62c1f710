from django.apps import AppConfig


class MaintenanceConfig(AppConfig):
    name = "maintenance"
    verbose_name = "Maintenance"

    def ready(self):
        from django.db.models.signals import post_migrate

        from ledger import registry
        from maintenance import signals  # noqa: F401  (registers the receivers)
        from maintenance.ledger_kinds import MAINTENANCE
        from maintenance.views import meter_section
        from plant import sections
        from plant.roles import ensure_roles

        post_migrate.connect(ensure_roles, sender=self)
        registry.register(MAINTENANCE)  # signed maintenance records are sealed in the ledger
        sections.register("maintenance", 20, meter_section, "maintenance/_device_section.html")
