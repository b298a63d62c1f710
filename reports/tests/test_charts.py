"""Drift chart SVG (reports.charts): forecast overlays — trend, prediction bound, crossing, guard-banded limit."""
import datetime as dt
import xml.etree.ElementTree as ET

from reports.charts import drift_chart_svg

NS = "{http://www.w3.org/2000/svg}"
HISTORY = [
    (dt.date(2023, 3, 1), 0.10, 0.02),
    (dt.date(2024, 3, 4), 0.18, None),
    (dt.date(2025, 3, 3), 0.27, 0.05),
    (dt.date(2026, 3, 2), 0.33, 0.04),
]
TREND = [(dt.date(2023, 3, 1), 0.10), (dt.date(2026, 3, 2), 0.33), (dt.date(2028, 9, 1), 0.52)]
BOUND = [(dt.date(2026, 3, 2), 0.38), (dt.date(2027, 3, 1), 0.45), (dt.date(2028, 3, 1), 0.60),
         (dt.date(2028, 9, 1), 0.68)]
CROSSING = dt.date(2028, 3, 1)


def parse(svg):
    root = ET.fromstring(svg)
    assert root.tag == f"{NS}svg"
    return root


def find(root, tag):
    return root.findall(f".//{NS}{tag}")


def texts(root):
    return ["".join(t.itertext()) for t in find(root, "text")]


def test_plain_call_unchanged():
    root = parse(drift_chart_svg(HISTORY, 0.5, 640, 230, unit="% of reading"))
    polylines = find(root, "polyline")
    assert len(polylines) == 2  # as-found and as-left series
    assert len(find(root, "circle")) == len(HISTORY) + 1  # as-found points + legend marker
    assert not any("predicted crossing" in t for t in texts(root))
    assert not any(t.startswith("limit") for t in texts(root))
    # same call with the new arguments explicitly None is identical
    assert drift_chart_svg(HISTORY, 0.5, 640, 230, unit="% of reading") == drift_chart_svg(
        HISTORY, 0.5, 640, 230, unit="% of reading", trend=None, bound=None, crossing=None, limit=None)


def test_empty_history_still_renders():
    root = parse(drift_chart_svg([], 1.0, 300, 150))
    assert "No signed calibrations" in texts(root)


def test_forecast_overlays():
    plain = parse(drift_chart_svg(HISTORY, 0.5))
    root = parse(drift_chart_svg(HISTORY, 0.5, trend=TREND, bound=BOUND, crossing=CROSSING))
    polylines = find(root, "polyline")
    assert len(polylines) == len(find(plain, "polyline")) + 2
    strokes = [p.get("stroke") for p in polylines]
    trend_line, bound_line = polylines[-2], polylines[-1]
    assert trend_line.get("stroke-dasharray") is None  # solid
    assert bound_line.get("stroke-dasharray")  # dotted
    assert len(set(strokes)) == len(strokes)
    assert len(trend_line.get("points").split()) == len(TREND)
    assert len(bound_line.get("points").split()) == len(BOUND)
    assert any("predicted crossing 2028-03-01" in t for t in texts(root))
    legend = texts(root)
    assert "drift trend" in legend and "one-sided 95 % prediction bound" in legend
    # same number of data markers as without the overlays
    assert len(find(root, "circle")) == len(find(plain, "circle"))


def _last_data_x(root):
    as_found = find(root, "polyline")[0]
    return max(float(p.split(",")[0]) for p in as_found.get("points").split())


def test_axis_extends_to_future_and_crossing_is_right_of_data():
    root = parse(drift_chart_svg(HISTORY, 0.5, trend=TREND, bound=BOUND, crossing=CROSSING))
    crossing = [line for line in find(root, "line") if line.get("class") == "crossing"]
    assert len(crossing) == 1
    cx = float(crossing[0].get("x1"))
    assert cx == float(crossing[0].get("x2"))
    assert crossing[0].get("stroke-dasharray")
    last_x = _last_data_x(root)
    assert cx > last_x
    # every overlay point lies inside the plot frame (axis extended in x, range extended in y)
    frame = next(r for r in find(root, "rect") if r.get("fill") == "none")
    fx, fy, fw, fh = (float(frame.get(k)) for k in ("x", "y", "width", "height"))
    for line in find(root, "polyline")[-2:]:
        for pair in line.get("points").split():
            px, py = map(float, pair.split(","))
            assert fx <= px <= fx + fw and fy <= py <= fy + fh
    # without overlays, the last data point sits at the right edge of the date axis
    plain = parse(drift_chart_svg(HISTORY, 0.5))
    assert _last_data_x(plain) > last_x


def test_y_range_covers_large_bound():
    bound = [(dt.date(2026, 3, 2), 0.4), (dt.date(2029, 3, 1), 3.0)]
    root = parse(drift_chart_svg(HISTORY, 0.5, bound=bound))
    ticks = [float(t) for t in texts(root) if t.lstrip("-").replace(".", "", 1).isdigit()]
    assert max(ticks) >= 3.0


def test_guard_banded_limit():
    root = parse(drift_chart_svg(HISTORY, 0.5, limit=0.4))
    limit_lines = [line for line in find(root, "line") if line.get("stroke-dasharray") == "2 2"]
    assert len(limit_lines) >= 2  # ±limit (legend swatch may add one)
    assert any(t.startswith("limit") for t in texts(root))
    # a limit equal to the MPE is not drawn again
    same = drift_chart_svg(HISTORY, 0.5, limit=0.5)
    assert same == drift_chart_svg(HISTORY, 0.5)


def test_crossing_alone_and_single_point_curves():
    root = parse(drift_chart_svg(HISTORY, 0.5, trend=[(dt.date(2027, 1, 1), 0.4)], crossing=dt.date(2028, 1, 1)))
    assert any("predicted crossing 2028-01-01" in t for t in texts(root))
    root = parse(drift_chart_svg([], 1.0, bound=BOUND, crossing=CROSSING))
    assert any("predicted crossing 2028-03-01" in t for t in texts(root))
