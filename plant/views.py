from django.contrib import messages
from django.contrib.auth.decorators import permission_required
from django.db import transaction
from django.shortcuts import get_object_or_404, redirect, render
from django_tables2 import RequestConfig

from calibration.trend import meter_drift_chart
from maintenance.views import meter_section
from plant.filters import MeterFilter
from plant.forms import FluidForm, MeterForm
from plant import risk
from plant.models import Fluid, Meter
from plant.tables import MeterTable


@permission_required("plant.view_meter", raise_exception=True)
def meter_list(request):
    queryset = Meter.objects.select_related("area__site", "fluid")
    meter_filter = MeterFilter(request.GET, queryset=queryset)
    can_calibrate = request.user.has_perm("calibration.add_calibrationevent")
    table = MeterTable(meter_filter.qs, exclude=() if can_calibrate else ("calibrate",))
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
        "recommendation": risk.recommendation(findings),
        "duties": meter.duties.select_related("area__site", "fluid"),
        "due": meter.due_rationale or {},
        "drift_chart": meter_drift_chart(meter),
        "calibrations": meter.calibrations.all()[:20],
        "audit": _audit_rows(meter),
        "maintenance": meter_section(meter),
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


def _edit(request, instance, form_class, template, title):
    """Change one register record: all fields checked by the model, saved whole or not at all."""
    form = form_class(request.POST or None, instance=instance)
    if request.method == "POST" and form.is_valid():
        with transaction.atomic():
            saved = form.save()
        messages.success(request, f"{title} saved.")
        return redirect(saved.get_absolute_url())
    status = 400 if request.method == "POST" else 200
    return render(request, template, {"form": form, "title": title, "instance": instance}, status=status)


@permission_required("plant.change_meter", raise_exception=True)
def meter_edit(request, tag):
    meter = get_object_or_404(Meter, tag=tag)
    return _edit(request, meter, MeterForm, "plant/record_form.html", f"Meter {meter.tag}")


@permission_required("plant.change_fluid", raise_exception=True)
def fluid_edit(request, pk):
    fluid = get_object_or_404(Fluid, pk=pk)
    return _edit(request, fluid, FluidForm, "plant/record_form.html", f"Fluid {fluid.name}")
