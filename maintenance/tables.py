import django_tables2 as tables

from plant.columns import IsoDateColumn


class MaintenanceTaskColumns(tables.Table):
    tag = tables.Column(accessor="device__position__tag", verbose_name="Tag", order_by=("device__position__tag",),
                        linkify=lambda record: record.device.get_absolute_url() + "#maintenance")
    site = tables.Column(accessor="device__position__area__site__name", verbose_name="Site", order_by=("device__position__area__site__name",))
    area = tables.Column(accessor="device__position__area__name", verbose_name="Area", order_by=("device__position__area__name",))
    title = tables.Column(verbose_name="Task")
    next_due_date = IsoDateColumn(verbose_name="Due date")

    class Meta:
        attrs = {"class": "grid"}
        orderable = True


class MaintenanceOverdueTable(MaintenanceTaskColumns):
    days_overdue = tables.Column(empty_values=(), verbose_name="Days overdue", order_by=("next_due_date",))
    last_condition = tables.Column(verbose_name="Last found", default="never done")

    def render_days_overdue(self, record):
        return (record.device.today() - record.next_due_date).days  # days at the position's site

    def value_days_overdue(self, record):
        return self.render_days_overdue(record)

    def render_last_condition(self, value):
        return value.replace("_", " ")

    def value_last_condition(self, value):
        return (value or "never done").replace("_", " ")


class MaintenanceDueTable(MaintenanceTaskColumns):
    frequency_days = tables.Column(verbose_name="Every (days)")
    last_done = IsoDateColumn(verbose_name="Last done", default="never")

    def value_last_done(self, value):
        return value if value is not None else "never"
