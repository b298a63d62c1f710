from django.contrib.auth.decorators import permission_required
from django.shortcuts import get_object_or_404, render
from django_tables2 import RequestConfig

from calibration.due import rationale_text
from calibration.trend import meter_drift_chart
from plant.filters import MeterFilter
from plant.models import Meter
from plant.tables import MeterTable


@permission_required("plant.view_meter", raise_exception=True)
def meter_list(request):
    queryset = Meter.objects.select_related("area__site", "fluid")
    meter_filter = MeterFilter(request.GET, queryset=queryset)
    table = MeterTable(meter_filter.qs)
    RequestConfig(request, paginate={"per_page": 50}).configure(table)
    return render(request, "plant/meter_list.html", {"filter": meter_filter, "table": table})


@permission_required("plant.view_meter", raise_exception=True)
def meter_detail(request, tag):
    meter = get_object_or_404(Meter.objects.select_related("area__site", "fluid"), tag=tag)
    findings = meter.findings()
    factor = min((f.interval_factor for f in findings), default=1.0)
    deciding = [f for f in findings if f.interval_factor == factor and factor < 1.0]
    return render(request, "plant/meter_detail.html", {
        "meter": meter,
        "findings": findings,
        "factor": factor,
        "deciding": deciding,
        "effective_interval": meter.effective_interval_days(),
        "duties": meter.duties.select_related("area__site", "fluid"),
        "rationale": rationale_text(meter.due_rationale).splitlines(),
        "drift_chart": meter_drift_chart(meter),
        "calibrations": meter.calibrations.all()[:20],
        "audit": _audit_rows(meter),
    })


def _audit_rows(meter, limit=30):
    """Who changed what on this meter and its current fluid, newest first, with old and new values."""
    rows = []
    for label, records in (("meter", meter.history.select_related("history_user")[:limit]),
                           (f"fluid {meter.fluid.name}", meter.fluid.history.select_related("history_user")[:limit])):
        records = list(records)
        for newer, older in zip(records, records[1:] + [None]):
            changes = []
            if older is not None:
                changes = [(c.field, c.old, c.new) for c in newer.diff_against(older).changes]
            rows.append({"what": label, "when": newer.history_date, "who": newer.history_user or "system",
                         "kind": newer.get_history_type_display(), "changes": changes})
    return sorted(rows, key=lambda r: r["when"], reverse=True)[:limit]
