"""Fleet statistics page (/stats/) and its CSV / XLSX exports."""
import pandas as pd
from django.contrib.auth.decorators import permission_required
from django.http import HttpResponse
from django.shortcuts import render

from plant import spreadsheet
from plant.forms import SiteFilterForm
from plant.spreadsheet import XLSX_TYPE
from reports import stats

SHEETS = {"principle": "by principle", "fluid": "by fluid"}


def _statistics(request):
    """(form, by_principle, by_fluid, today); the form is invalid (and the tables empty) for a bad site."""
    form = SiteFilterForm(request.GET or None)
    site = form.cleaned_data.get("site") if form.is_bound and form.is_valid() else None
    today = form.today()
    if form.is_bound and not form.is_valid():
        empty = pd.DataFrame(columns=stats.COLUMNS)
        return form, empty, empty.copy(), today
    events, devices = stats.fleet_frame(today, site=site)
    by_principle, by_fluid = stats.fleet_statistics(events, devices, today)
    return form, by_principle, by_fluid, today


def _bad_filter(form):
    messages = "; ".join(f"{field}: {' '.join(errs)}" for field, errs in form.errors.items())
    return HttpResponse(f"Bad filter: {messages}", status=400, content_type="text/plain; charset=utf-8")


def _rows(table):
    """Template-friendly rows: None for NaN so the page shows a dash."""
    return [{k: (None if isinstance(v, float) and v != v else v) for k, v in row.items()}
            for row in table.to_dict("records")]


@permission_required("calibration.view_review", raise_exception=True)
def fleet_stats(request):
    form, by_principle, by_fluid, today = _statistics(request)
    query = request.GET.urlencode()
    return render(request, "reports/stats.html", {
        "form": form,
        "today": today,
        "query": query,
        "labels": stats.COLUMN_LABELS,
        "tables": [
            ("By principle", "principle", _rows(by_principle)),
            ("By fluid", "fluid", _rows(by_fluid)),
        ],
        "chart": stats.in_tolerance_chart_svg(by_principle),
        "window_days": stats.WINDOW_DAYS,
    }, status=400 if form.is_bound and not form.is_valid() else 200)


@permission_required("calibration.view_review", raise_exception=True)
def fleet_stats_csv(request):
    by = request.GET.get("by", "principle") or "principle"
    if by not in SHEETS:
        return HttpResponse(f"Unknown grouping {by!r}; use by=principle or by=fluid.", status=400,
                            content_type="text/plain; charset=utf-8")
    form, by_principle, by_fluid, today = _statistics(request)
    if form.is_bound and not form.is_valid():
        return _bad_filter(form)
    table = by_principle if by == "principle" else by_fluid
    response = HttpResponse(spreadsheet.frame_csv_text(table, lineterminator="\n"), content_type="text/csv; charset=utf-8")
    response["Content-Disposition"] = f'attachment; filename="fleet_stats_by_{by}_{today}.csv"'
    return response


@permission_required("calibration.view_review", raise_exception=True)
def fleet_stats_xlsx(request):
    form, by_principle, by_fluid, today = _statistics(request)
    if form.is_bound and not form.is_valid():
        return _bad_filter(form)
    workbook = spreadsheet.frames_xlsx_bytes({SHEETS["principle"]: by_principle, SHEETS["fluid"]: by_fluid})
    response = HttpResponse(workbook, content_type=XLSX_TYPE)
    response["Content-Disposition"] = f'attachment; filename="fleet_stats_{today}.xlsx"'
    return response
