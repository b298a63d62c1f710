import django_tables2 as tables
from django.utils import timezone


class IsoDateColumn(tables.DateColumn):
    """Dates as YYYY-MM-DD on the page, as in the CSV export: unambiguous on any locale."""

    def __init__(self, *args, **kwargs):
        kwargs.setdefault("format", "Y-m-d")
        kwargs.setdefault("attrs", {"td": {"class": "nowrap"}, "th": {"class": "nowrap"}})
        super().__init__(*args, **kwargs)


class MeterColumns(tables.Table):
    tag = tables.Column(linkify=lambda record: record.get_absolute_url())
    principle = tables.Column()
    site = tables.Column(accessor="area__site__name", verbose_name="Site", order_by=("area__site__name",))
    area = tables.Column(accessor="area__name", verbose_name="Area", order_by=("area__name",))
    fluid = tables.Column(accessor="fluid__name", verbose_name="Fluid", order_by=("fluid__name",))

    class Meta:
        attrs = {"class": "grid"}
        orderable = True

    def render_principle(self, record):
        return record.get_principle_display()

    def value_principle(self, record):
        return record.get_principle_display()


class OverdueTable(MeterColumns):
    next_due_date = IsoDateColumn(verbose_name="Due date", default="never calibrated")
    days_overdue = tables.Column(empty_values=(), verbose_name="Days overdue", order_by=("next_due_date",))

    def value_next_due_date(self, record, value):
        return value if value is not None else "never calibrated"

    def render_days_overdue(self, record):
        if record.next_due_date is None:
            return "—"
        return (timezone.localdate() - record.next_due_date).days

    def value_days_overdue(self, record):
        return self.render_days_overdue(record)


class DueTable(MeterColumns):
    next_due_date = IsoDateColumn(verbose_name="Due date")
    last_calibrated = IsoDateColumn(verbose_name="Last calibrated")


class DriftingTable(MeterColumns):
    drift_rate_per_year = tables.Column(verbose_name="Worst drift / year")
    predicted_crossing = IsoDateColumn(verbose_name="Predicted crossing")
    next_due_date = IsoDateColumn(verbose_name="Due date")

    def render_drift_rate_per_year(self, value, record):
        return f"{value:+.3f} {record.get_mpe_basis_display()}"


class FailedTable(MeterColumns):
    last_calibrated = IsoDateColumn(verbose_name="Last calibrated")
    next_due_date = IsoDateColumn(verbose_name="Due date")


class RiskTable(MeterColumns):
    severity = tables.Column(accessor="risk_severity", verbose_name="Severity")
    codes = tables.Column(empty_values=(), verbose_name="Findings", orderable=False)
    reasons = tables.Column(empty_values=(), verbose_name="Why", orderable=False, attrs={"td": {"class": "prose"}})

    @staticmethod
    def _serious(record):
        # only the rows shown (a page, or the export) are judged again in full, for their codes and reasons
        return [f for f in record.findings() if f.severity in ("misapplied", "high")]

    def render_codes(self, record):
        return ", ".join(f.code for f in self._serious(record))

    def render_reasons(self, record):
        return " ".join(f.reason for f in self._serious(record))

    def value_codes(self, record):
        return self.render_codes(record)

    def value_reasons(self, record):
        return self.render_reasons(record)


class StandardTable(tables.Table):
    identification = tables.Column()
    description = tables.Column()
    certificate_number = tables.Column()
    due_date = IsoDateColumn()

    class Meta:
        attrs = {"class": "grid"}


class DraftTable(tables.Table):
    meter = tables.Column(accessor="meter__tag", verbose_name="Tag", order_by=("meter__tag",))
    performed_on = IsoDateColumn(linkify=lambda record: record.get_absolute_url(), verbose_name="Date")
    technician = tables.Column()

    class Meta:
        attrs = {"class": "grid"}
