import django_tables2 as tables
from django.db.models import F
from django.utils.html import format_html

from calibration.templatetags.risk_format import percent
from plant import risk
from plant.columns import IsoDateColumn


class DeviceColumns(tables.Table):
    tag = tables.Column(accessor="position__tag", verbose_name="Tag", order_by=("position__tag",),
                        linkify=lambda record: record.get_absolute_url())
    serial = tables.Column(verbose_name="Device S/N", default="—")
    principle = tables.Column()
    site = tables.Column(accessor="position__area__site__name", verbose_name="Site",
                         order_by=("position__area__site__name",))
    area = tables.Column(accessor="position__area__name", verbose_name="Area", order_by=("position__area__name",))
    fluid = tables.Column(accessor="position__fluid__name", verbose_name="Fluid", order_by=("position__fluid__name",))

    class Meta:
        attrs = {"class": "grid"}
        orderable = True

    def render_principle(self, record):
        return record.get_principle_display()

    def value_principle(self, record):
        return record.get_principle_display()


class OverdueTable(DeviceColumns):
    next_due_date = IsoDateColumn(verbose_name="Due date", default="never calibrated")
    days_overdue = tables.Column(empty_values=(), verbose_name="Days overdue")

    def value_next_due_date(self, record, value):
        return value if value is not None else "never calibrated"

    def render_days_overdue(self, record):
        if record.next_due_date is None:
            return "—"
        return (record.today() - record.next_due_date).days  # the date at the position's own site

    def value_days_overdue(self, record):
        return self.render_days_overdue(record)

    def order_days_overdue(self, queryset, is_descending):
        """More days overdue is an earlier due date; never calibrated counts as the most overdue (on SQLite and
        PostgreSQL alike, whose NULLs sort at opposite ends)."""
        due = F("next_due_date")
        key = due.asc(nulls_first=True) if is_descending else due.desc(nulls_last=True)
        return queryset.order_by(key, "position__tag"), True


class DueTable(DeviceColumns):
    next_due_date = IsoDateColumn(verbose_name="Due date")
    last_calibrated = IsoDateColumn(verbose_name="Last calibrated")


class DriftingTable(DeviceColumns):
    #: left out on the page (kept in the CSV): the drift's four columns and the meter's need more than 820 px
    page_exclude = ("principle",)

    drift_status = tables.Column(verbose_name="Drift status")
    drift_rate_per_year = tables.Column(verbose_name="Drift / year (the crossing's slope)")
    predicted_crossing = IsoDateColumn(verbose_name="Predicted crossing")
    next_due_date = IsoDateColumn(verbose_name="Due date")

    def render_drift_status(self, value, record):
        return record.get_drift_status_display()

    def render_drift_rate_per_year(self, value, record):
        u = (record.due_rationale or {}).get("drift_rate_u_per_year")
        return f"{value:+.3f}{f' ± {u:.3f}' if u is not None else ''} {record.get_mpe_basis_display()}"


class FailedTable(DeviceColumns):
    last_calibrated = IsoDateColumn(verbose_name="Last calibrated")
    next_due_date = IsoDateColumn(verbose_name="Due date")


class ConformityRiskTable(DeviceColumns):
    """The last calibration's conformity risk (JCGM 106): the PFA of the rule applied and the lowest p_c of a point
    inside the MPE. A low p_c asks for a calibration with a better reference, not a shorter interval."""

    conformity_pfa = tables.Column(verbose_name="PFA of the rule", attrs={"td": {"class": "nowrap"}})
    conformity_min_pc = tables.Column(verbose_name="Lowest p_c inside MPE", attrs={"td": {"class": "nowrap"}})
    last_calibrated = IsoDateColumn(verbose_name="Last calibrated")

    class Meta(DeviceColumns.Meta):
        sequence = ("tag", "conformity_pfa", "conformity_min_pc", "last_calibrated", "serial", "principle", "fluid",
                    "area", "site")

    @staticmethod
    def render_conformity_pfa(value):
        return percent(value)

    @staticmethod
    def render_conformity_min_pc(value):
        return percent(value)


class RiskTable(DeviceColumns):
    """Misapplied meters and high-risk duties: findings in plain words on the page, their codes in the export."""

    severity = tables.Column(accessor="risk_severity", verbose_name="Severity")
    codes = tables.Column(empty_values=(), verbose_name="Findings", orderable=False)
    reasons = tables.Column(empty_values=(), verbose_name="Why", orderable=False, attrs={"td": {"class": "prose"}})
    interval = tables.Column(empty_values=(), verbose_name="Risk interval", orderable=False)
    recommendation = tables.Column(empty_values=(), verbose_name="Recommendation", orderable=False)

    #: left out on the page (kept in the CSV), so the list fits a tablet's 820 px: the device page names the serial
    #: and principle; the prose "Why" folds under each finding (render_codes)
    page_exclude = ("serial", "principle", "area", "reasons")

    class Meta(DeviceColumns.Meta):
        # what to do and the interval meanwhile come first, within an 820 px tablet's view; the long prose last
        sequence = ("tag", "severity", "interval", "recommendation", "codes", "serial", "principle", "fluid", "area",
                    "site", "reasons")

    @staticmethod
    def _findings(record):
        # only the rows shown (a page, or the export) are judged again in full, for their codes and reasons
        cached = getattr(record, "_review_findings", None)
        if cached is None:
            cached = record._review_findings = record.findings()
        return cached

    def _serious(self, record):
        return [f for f in self._findings(record) if f.severity in ("misapplied", "high")]

    def render_severity(self, value):
        return risk.SEVERITY_WORDS.get(value, value)

    def value_severity(self, value):
        return value

    def render_codes(self, record):
        titles = "; ".join(dict.fromkeys(f.title for f in self._serious(record)))
        if "reasons" not in (self.exclude or ()):
            return titles
        # the reasons column left out on the page: each row's reasons fold under its findings
        return format_html('{}<details class="why"><summary>Why</summary>{}</details>', titles,
                           self.render_reasons(record))

    def render_reasons(self, record):
        return " ".join(f.reason for f in self._serious(record))

    def value_codes(self, record):
        return ", ".join(f.code for f in self._serious(record))

    def value_reasons(self, record):
        return self.render_reasons(record)

    def render_interval(self, record):
        factor = risk.interval_factor(self._findings(record))
        days = max(1, round(record.base_interval_days * factor))
        return f"{days} d ({record.base_interval_days} d × {factor:g})"

    def value_interval(self, record):
        return self.render_interval(record)

    def render_recommendation(self, record):
        return risk.recommendation(self._findings(record)) or "—"

    def value_recommendation(self, record):
        return risk.recommendation(self._findings(record))


class StandardTable(tables.Table):
    identification = tables.Column()
    description = tables.Column()
    certificate_number = tables.Column()
    due_date = IsoDateColumn()

    class Meta:
        attrs = {"class": "grid"}


class SpareTable(tables.Table):
    """Spares on the shelf that may not be installed until calibrated on the bench."""

    device = tables.Column(accessor="serial", verbose_name="Device", linkify=lambda record: record.get_absolute_url(),
                           order_by=("serial",))
    principle = tables.Column()
    next_due_date = IsoDateColumn(verbose_name="Due date", default="never calibrated")
    calibrate = tables.Column(empty_values=(), verbose_name="", orderable=False, exclude_from_export=True)

    class Meta:
        attrs = {"class": "grid"}

    def render_device(self, record):
        return record.device_label

    def render_principle(self, record):
        return record.get_principle_display()

    def value_next_due_date(self, record, value):
        return value if value is not None else "never calibrated"

    def render_calibrate(self, record):
        return format_html('<a class="button small" href="{}">Calibrate (bench)</a>', record.calibrate_url())


class VacantTable(tables.Table):
    tag = tables.Column(linkify=lambda record: record.get_absolute_url())
    site = tables.Column(accessor="area__site__name", verbose_name="Site", order_by=("area__site__name",))
    area = tables.Column(accessor="area__name", verbose_name="Area", order_by=("area__name",))
    fluid = tables.Column(accessor="fluid__name", verbose_name="Fluid", order_by=("fluid__name",))

    class Meta:
        attrs = {"class": "grid"}


class DraftTable(tables.Table):
    device = tables.Column(empty_values=(), verbose_name="Tag or device", order_by=("device__position__tag",))
    performed_on = IsoDateColumn(linkify=lambda record: record.get_absolute_url(), verbose_name="Date")
    technician = tables.Column()

    class Meta:
        attrs = {"class": "grid"}

    def render_meter(self, record):
        return str(record.device)

    def value_meter(self, record):
        return str(record.device)
