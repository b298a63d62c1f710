from django.apps import AppConfig


class ReportsConfig(AppConfig):
    name = "reports"

    def ready(self):
        from plant import sections
        from reports.trend import meter_drift_chart

        # the drift chart closes the next-due-date card of a device's part of the position and device pages
        sections.register("drift-chart", 10, meter_drift_chart, "reports/_drift_chart_section.html", slot="due")
