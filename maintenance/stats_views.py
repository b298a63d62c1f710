"""Maintenance findings by principle × fluid (/maintenance/stats/) and its CSV / XLSX exports."""
import pandas as pd
from django.contrib.auth.decorators import permission_required
from django.http import HttpResponse
from django.shortcuts import render

from maintenance import stats
from plant import spreadsheet
from plant.forms import SiteFilterForm
from plant.spreadsheet import XLSX_TYPE


def _table(request):
    form = SiteFilterForm(request.GET or None)
    if form.is_bound and not form.is_valid():
        return form, None
    site = form.cleaned_data.get("site") if form.is_bound else None
    return form, stats.condition_table(stats.findings_frame(site=site))


def _bad(form):
    text = "; ".join(f"{field}: {' '.join(errors)}" for field, errors in form.errors.items())
    return HttpResponse(f"Bad filter: {text}", status=400, content_type="text/plain; charset=utf-8")


@permission_required("calibration.view_review", raise_exception=True)
def maintenance_stats(request):
    form, table = _table(request)
    if table is None:
        table = pd.DataFrame(columns=stats.COLUMNS)
    return render(request, "maintenance/stats.html", {
        "form": form, "query": request.GET.urlencode(), "labels": [stats.LABELS[c] for c in stats.COLUMNS],
        "rows": table.values.tolist(), "chart": stats.condition_chart_svg(table),
    }, status=400 if form.is_bound and not form.is_valid() else 200)


@permission_required("calibration.view_review", raise_exception=True)
def maintenance_stats_csv(request):
    form, table = _table(request)
    if table is None:
        return _bad(form)
    response = HttpResponse(spreadsheet.frame_csv_text(table, lineterminator="\n"), content_type="text/csv; charset=utf-8")
    response["Content-Disposition"] = f'attachment; filename="maintenance_findings_{form.today()}.csv"'
    return response


@permission_required("calibration.view_review", raise_exception=True)
def maintenance_stats_xlsx(request):
    form, table = _table(request)
    if table is None:
        return _bad(form)
    workbook = spreadsheet.frames_xlsx_bytes({"findings": table.rename(columns=stats.LABELS)})
    response = HttpResponse(workbook, content_type=XLSX_TYPE)
    response["Content-Disposition"] = f'attachment; filename="maintenance_findings_{form.today()}.xlsx"'
    return response
