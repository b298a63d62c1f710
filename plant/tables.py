"""The register table: what a technician looks for first, all from fields stored on the meter (no per-row query)."""
import django_tables2 as tables
from django.db.models import Case, F, IntegerField, Value, When
from django.utils.html import format_html

from plant.models import Device

# most urgent first when a column is sorted ascending
DRIFT_ORDER = ("out_of_tolerance", "drifting", "improving", "insufficient", "flat")
VERDICT_WORDS = {True: "in tolerance", False: "out of tolerance", None: "—"}


def _overdue(record):
    """Past its due date at its own site's date (or never calibrated); the site is read with the row."""
    return record.next_due_date is None or record.next_due_date < record.today()


def _nulls_first(queryset, field, is_descending):
    """Never calibrated (no date) counts as the most urgent: first when ascending, last when descending."""
    expression = F(field).desc(nulls_last=True) if is_descending else F(field).asc(nulls_first=True)
    return queryset.order_by(expression, "position__tag"), True


class DeviceTable(tables.Table):
    tag = tables.Column(accessor="position__tag", verbose_name="Tag", linkify=lambda record: record.get_absolute_url(),
                        order_by=("position__tag",), attrs={"td": {"class": "nowrap"}})
    serial = tables.Column(verbose_name="Device S/N", default="—")
    # plain columns with ISO dates: a DateColumn renders a template per cell, twice the page's time
    next_due_date = tables.Column(verbose_name="Due date", default="now (never calibrated)",
                                  attrs={"td": {"class": lambda record: "nowrap overdue" if _overdue(record)
                                                    else "nowrap"}})
    last_calibrated = tables.Column(verbose_name="Last calibrated", default="—", attrs={"td": {"class": "nowrap"}})
    last_in_tolerance = tables.Column(
        verbose_name="Last verdict", empty_values=(),
        attrs={"td": {"class": lambda record: "nowrap verdict-out" if record.last_in_tolerance is False else "nowrap"}})
    drift_status = tables.Column(verbose_name="Drift", default="—")
    principle = tables.Column()
    fluid = tables.Column(accessor="position__fluid__name", verbose_name="Fluid", order_by=("position__fluid__name",))
    area = tables.Column(accessor="position__area__name", verbose_name="Area", order_by=("position__area__name",))
    site = tables.Column(accessor="position__area__site__name", verbose_name="Site", order_by=("position__area__site__name",))
    calibrate = tables.Column(empty_values=(), verbose_name="", orderable=False, exclude_from_export=True)

    class Meta:
        model = Device
        # the quick action stays within an 820 px tablet's view; the wider columns scroll after it
        fields = ("tag", "next_due_date", "last_calibrated", "last_in_tolerance", "drift_status", "calibrate",
                  "serial", "principle", "fluid", "area", "site")
        attrs = {"class": "grid"}

    def render_next_due_date(self, value):
        return value.isoformat()

    def render_last_calibrated(self, value):
        return value.isoformat()

    def render_last_in_tolerance(self, value):
        return VERDICT_WORDS[value]

    def render_drift_status(self, record):
        return record.get_drift_status_display()

    def render_calibrate(self, record):
        return format_html('<a class="button small" href="{}">Calibrate</a>',
                           record.calibrate_url())

    def order_next_due_date(self, queryset, is_descending):
        return _nulls_first(queryset, "next_due_date", is_descending)

    def order_last_calibrated(self, queryset, is_descending):
        return _nulls_first(queryset, "last_calibrated", is_descending)

    def order_last_in_tolerance(self, queryset, is_descending):
        # out of tolerance, then never judged, then in tolerance
        rank = Case(When(last_in_tolerance=False, then=Value(0)), When(last_in_tolerance__isnull=True, then=Value(1)),
                    default=Value(2), output_field=IntegerField())
        queryset = queryset.annotate(verdict_rank=rank)
        return queryset.order_by(F("verdict_rank").desc() if is_descending else "verdict_rank", "position__tag"), True

    def order_drift_status(self, queryset, is_descending):
        rank = Case(*(When(drift_status=s, then=Value(i)) for i, s in enumerate(DRIFT_ORDER)),
                    default=Value(len(DRIFT_ORDER)), output_field=IntegerField())
        queryset = queryset.annotate(drift_rank=rank)
        return queryset.order_by(F("drift_rank").desc() if is_descending else "drift_rank", "position__tag"), True
