"""Hand-written SVG charts for printed reports (pure Python, no Django, no plotting library)."""
from __future__ import annotations

import datetime as dt
import math
from html import escape
from typing import Optional, Sequence, Tuple

DriftPoint = Tuple[dt.date, Optional[float], Optional[float]]

FOUND_COLOUR = "#b45309"
LEFT_COLOUR = "#0b6e69"
BAND_COLOUR = "#e6f2ea"
TREND_COLOUR = "#444"
BOUND_COLOUR = "#c0392b"
LIMIT_COLOUR = "#7a4a9a"
CROSSING_COLOUR = "#c0392b"

Curve = Sequence[Tuple[dt.date, float]]


def _clean(curve: Optional[Curve]) -> list:
    """Sorted (date, value) pairs of a curve, dropping None / non-finite values."""
    if not curve:
        return []
    return sorted(((d, float(v)) for d, v in curve if v is not None and math.isfinite(float(v))),
                  key=lambda p: p[0])


def _fmt(v: float) -> str:
    v = round(v, 6)
    return f"{v + 0.0:g}" if v else "0"


def _nice_step(span: float, target: int = 4) -> float:
    raw = span / target
    magnitude = 10 ** math.floor(math.log10(raw))
    for m in (1, 2, 2.5, 5, 10):
        if m * magnitude >= raw:
            return m * magnitude
    return 10 * magnitude


def drift_chart_svg(points: Sequence[DriftPoint], mpe: float, width: int = 640, height: int = 260,
                    unit: str = "", *, trend: Optional[Curve] = None, bound: Optional[Curve] = None,
                    crossing: Optional[dt.date] = None, limit: Optional[float] = None,
                    bound_label: str = "one-sided 95 % prediction bound",
                    point_label: str = "worst point") -> str:
    """SVG of as-found and as-left worst error against date, over a shaded ±MPE band.

    `points` are (date, as_found_worst, as_left_worst); a None value is left out of its series.
    Errors and `mpe` share one basis (e.g. % of reading); `unit` only labels the y axis.

    Optional forecast overlays (all keyword-only; when none is given the output is unchanged):
    `trend` – the fitted drift line, (date, value) pairs, drawn solid dark grey;
    `bound` – the one-sided 95 % prediction bound on the side the trend heads to (signed), drawn dotted red
    and named by `bound_label` in the legend (e.g. "one-sided 95 % upper prediction bound");
    `point_label` – which point the series show (e.g. "50 % of range", the point the trend was fitted on);
    `crossing` – predicted date the bound reaches the limit, a dashed vertical line labelled
    "predicted crossing YYYY-MM-DD";
    `limit` – a guard-banded acceptance limit, drawn as thin dashed ±lines labelled "limit"
    (only when it differs from `mpe`).
    The date axis is extended to cover trend/bound/crossing dates and the y range their values.
    """
    if mpe is None or mpe <= 0:
        raise ValueError("mpe must be > 0")
    pts = sorted(points, key=lambda p: p[0])
    trend_pts, bound_pts = _clean(trend), _clean(bound)
    show_limit = limit is not None and math.isfinite(limit) and limit > 0 and not math.isclose(limit, mpe)
    extras = bool(trend_pts or bound_pts or crossing is not None or show_limit)
    left, right, top, bottom = 62, 16, 28, 40
    if extras:
        top = 40  # room for a second legend row
    plot_w, plot_h = width - left - right, height - top - bottom
    values = [abs(v) for _, f, l in pts for v in (f, l) if v is not None]
    values += [abs(v) for _, v in trend_pts + bound_pts]
    if show_limit:
        values.append(abs(limit))
    y_max = max([mpe] + values) * 1.25
    step = _nice_step(2 * y_max)
    y_max = step * -(-y_max // step)  # round up to a whole step

    def y(v: float) -> float:
        return top + plot_h * (y_max - v) / (2 * y_max)

    all_dates = [p[0] for p in pts] + [d for d, _ in trend_pts + bound_pts]
    if crossing is not None:
        all_dates.append(crossing)
    if all_dates:
        d0, d1 = min(all_dates), max(all_dates)
        days = (d1 - d0).days
    else:
        d0 = d1 = None
        days = 0

    def x(d: dt.date) -> float:
        if not days:
            return left + plot_w / 2
        return left + 12 + (plot_w - 24) * (d - d0).days / days

    out = [
        f'<svg xmlns="http://www.w3.org/2000/svg" width="{width}" height="{height}" '
        f'viewBox="0 0 {width} {height}" font-family="DejaVu Sans, sans-serif" font-size="10" role="img" '
        f'aria-label="Drift chart: worst as-found and as-left error against date, with the MPE band">',
        f'<rect x="{left}" y="{y(mpe):.1f}" width="{plot_w}" height="{y(-mpe) - y(mpe):.1f}" fill="{BAND_COLOUR}"/>',
    ]
    # y grid and labels
    n_steps = round(y_max / step)
    for i in range(-n_steps, n_steps + 1):
        tick = i * step
        yy = y(tick)
        colour = "#888" if i == 0 else "#ddd"
        out.append(f'<line x1="{left}" y1="{yy:.1f}" x2="{left + plot_w}" y2="{yy:.1f}" stroke="{colour}" stroke-width="0.6"/>')
        out.append(f'<text x="{left - 6}" y="{yy + 3:.1f}" text-anchor="end">{_fmt(tick)}</text>')
    for sign in (1, -1):
        out.append(f'<line x1="{left}" y1="{y(sign * mpe):.1f}" x2="{left + plot_w}" y2="{y(sign * mpe):.1f}" '
                   f'stroke="#5a8f6a" stroke-width="1" stroke-dasharray="4 3"/>')
    out.append(f'<text x="{left + plot_w - 4}" y="{y(mpe) - 4:.1f}" text-anchor="end" fill="#3d6b4b">+MPE {_fmt(mpe)}</text>')
    out.append(f'<text x="{left + plot_w - 4}" y="{y(-mpe) + 12:.1f}" text-anchor="end" fill="#3d6b4b">−MPE</text>')
    out.append(f'<rect x="{left}" y="{top}" width="{plot_w}" height="{plot_h}" fill="none" stroke="#555" stroke-width="0.8"/>')
    label = escape(f"Error ({unit})" if unit else "Error")
    out.append(f'<text transform="translate(14 {top + plot_h / 2:.1f}) rotate(-90)" text-anchor="middle">{label}</text>')
    # x labels: every date when few, else first, last and a few between
    if pts:
        dates = sorted({p[0] for p in pts})
        if len(dates) > 6:
            keep = {dates[round(i * (len(dates) - 1) / 5)] for i in range(6)}
            dates = [d for d in dates if d in keep]
        for d in dates:
            out.append(f'<text x="{x(d):.1f}" y="{top + plot_h + 14}" text-anchor="middle">{d.isoformat()}</text>')
    else:
        out.append(f'<text x="{left + plot_w / 2}" y="{top + plot_h / 2}" text-anchor="middle">No signed calibrations</text>')
    # series
    for index, colour, dash in ((1, FOUND_COLOUR, ""), (2, LEFT_COLOUR, ' stroke-dasharray="5 3"')):
        series = [(x(p[0]), y(p[index])) for p in pts if p[index] is not None]
        if len(series) > 1:
            path = " ".join(f"{px:.1f},{py:.1f}" for px, py in series)
            out.append(f'<polyline points="{path}" fill="none" stroke="{colour}" stroke-width="1.4"{dash}/>')
        for px, py in series:
            if index == 1:
                out.append(f'<circle cx="{px:.1f}" cy="{py:.1f}" r="3.2" fill="{colour}"/>')
            else:
                out.append(f'<rect x="{px - 3:.1f}" y="{py - 3:.1f}" width="6" height="6" fill="#fff" stroke="{colour}" stroke-width="1.4"/>')
    # forecast overlays
    if show_limit:
        for sign in (1, -1):
            out.append(f'<line x1="{left}" y1="{y(sign * limit):.1f}" x2="{left + plot_w}" y2="{y(sign * limit):.1f}" '
                       f'stroke="{LIMIT_COLOUR}" stroke-width="0.7" stroke-dasharray="2 2"/>')
        out.append(f'<text x="{left + 4}" y="{y(limit) - 3:.1f}" fill="{LIMIT_COLOUR}">limit {_fmt(limit)}</text>')
    for curve, colour, style in ((trend_pts, TREND_COLOUR, ' stroke-width="1.4"'),
                                 (bound_pts, BOUND_COLOUR, ' stroke-width="1.4" stroke-dasharray="1.5 2.5"')):
        if not curve:
            continue
        if len(curve) == 1:  # a single point still gets a (zero-length) polyline, drawn as a dot
            curve = curve * 2
            style += ' stroke-linecap="round"'
        path = " ".join(f"{x(d):.1f},{y(v):.1f}" for d, v in curve)
        out.append(f'<polyline points="{path}" fill="none" stroke="{colour}"{style}/>')
    if crossing is not None:
        cx = x(crossing)
        out.append(f'<line class="crossing" x1="{cx:.1f}" y1="{top}" x2="{cx:.1f}" y2="{top + plot_h}" '
                   f'stroke="{CROSSING_COLOUR}" stroke-width="1" stroke-dasharray="5 3"/>')
        anchor, tx = ("end", cx - 4) if cx > left + plot_w / 2 else ("start", cx + 4)
        out.append(f'<line x1="{cx:.1f}" y1="{top + plot_h}" x2="{cx:.1f}" y2="{top + plot_h + 19}" '
                   f'stroke="{CROSSING_COLOUR}" stroke-width="0.6"/>')
        # label in the free row below the date labels, clear of the ±MPE labels inside the plot
        out.append(f'<text x="{tx:.1f}" y="{top + plot_h + 28}" text-anchor="{anchor}" fill="{CROSSING_COLOUR}">'
                   f'predicted crossing {crossing.isoformat()}</text>')
    # legend
    ly = 14
    out.append(f'<circle cx="{left + 6}" cy="{ly - 3}" r="3.2" fill="{FOUND_COLOUR}"/>')
    out.append(f'<text x="{left + 14}" y="{ly}">{escape(f"as found ({point_label})")}</text>')
    out.append(f'<rect x="{left + 150}" y="{ly - 6}" width="6" height="6" fill="#fff" stroke="{LEFT_COLOUR}" stroke-width="1.4"/>')
    out.append(f'<text x="{left + 162}" y="{ly}">{escape(f"as left ({point_label})")}</text>')
    out.append(f'<rect x="{left + 290}" y="{ly - 7}" width="12" height="8" fill="{BAND_COLOUR}" stroke="#5a8f6a" stroke-width="0.6"/>')
    out.append(f'<text x="{left + 308}" y="{ly}">±MPE</text>')
    if extras:
        ly2, lx = 28, left
        entries = []
        if trend_pts:
            entries.append((f'stroke="{TREND_COLOUR}" stroke-width="1.4"', "drift trend", 80))
        if bound_pts:
            entries.append((f'stroke="{BOUND_COLOUR}" stroke-width="1.4" stroke-dasharray="1.5 2.5"',
                            bound_label, 6 * len(bound_label) + 26))
        if show_limit:
            entries.append((f'stroke="{LIMIT_COLOUR}" stroke-width="0.7" stroke-dasharray="2 2"', "limit", 60))
        if crossing is not None:
            entries.append((f'stroke="{CROSSING_COLOUR}" stroke-width="1" stroke-dasharray="5 3"',
                            "predicted crossing", 120))
        for style, text, advance in entries:
            out.append(f'<line x1="{lx}" y1="{ly2 - 3}" x2="{lx + 14}" y2="{ly2 - 3}" {style}/>')
            out.append(f'<text x="{lx + 18}" y="{ly2}">{escape(text)}</text>')
            lx += advance
    out.append("</svg>")
    return "".join(out)
