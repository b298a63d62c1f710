from django.apps import AppConfig


class SchedulingConfig(AppConfig):
    name = "scheduling"
    verbose_name = "Scheduling"

    def ready(self):
        from plant import evidence
        from scheduling import maintenance_due, receivers  # noqa: F401  (connects the receivers)

        # what was found on a device (fouled again and again) is one of its risk findings
        evidence.add_source(maintenance_due.findings_of)
