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
                    unit: str = "") -> str:
    """SVG of as-found and as-left worst error against date, over a shaded ±MPE band.

    `points` are (date, as_found_worst, as_left_worst); a None value is left out of its series.
    Errors and `mpe` share one basis (e.g. % of reading); `unit` only labels the y axis.
    """
    if mpe is None or mpe <= 0:
        raise ValueError("mpe must be > 0")
    pts = sorted(points, key=lambda p: p[0])
    left, right, top, bottom = 62, 16, 28, 40
    plot_w, plot_h = width - left - right, height - top - bottom
    values = [abs(v) for _, f, l in pts for v in (f, l) if v is not None]
    y_max = max([mpe] + values) * 1.25
    step = _nice_step(2 * y_max)
    y_max = step * -(-y_max // step)  # round up to a whole step

    def y(v: float) -> float:
        return top + plot_h * (y_max - v) / (2 * y_max)

    if pts:
        d0, d1 = pts[0][0], pts[-1][0]
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
    # legend
    ly = 14
    out.append(f'<circle cx="{left + 6}" cy="{ly - 3}" r="3.2" fill="{FOUND_COLOUR}"/>')
    out.append(f'<text x="{left + 14}" y="{ly}">as found (worst point)</text>')
    out.append(f'<rect x="{left + 150}" y="{ly - 6}" width="6" height="6" fill="#fff" stroke="{LEFT_COLOUR}" stroke-width="1.4"/>')
    out.append(f'<text x="{left + 162}" y="{ly}">as left (worst point)</text>')
    out.append(f'<rect x="{left + 290}" y="{ly - 7}" width="12" height="8" fill="{BAND_COLOUR}" stroke="#5a8f6a" stroke-width="0.6"/>')
    out.append(f'<text x="{left + 308}" y="{ly}">±MPE</text>')
    out.append("</svg>")
    return "".join(out)
