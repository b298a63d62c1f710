"""What the plant finds: conditions found on maintenance visits by principle × fluid.

`findings_frame` reads the signed records (one query); `condition_table` is pure pandas; `condition_chart_svg` a
hand-written stacked bar chart. The shares are plain proportions of the signed records of each group.
"""
from __future__ import annotations

from html import escape

import pandas as pd

from maintenance import loop

CONDITION_CODES = [code for code, _ in loop.CONDITIONS]
COLUMNS = ["principle", "fluid", "inspections", *CONDITION_CODES, "fouled_pct"]
LABELS = {"principle": "Principle", "fluid": "Fluid", "inspections": "Records",
          **dict(loop.CONDITIONS), "fouled_pct": "Heavy deposit or blocked (%)"}
COLOURS = {"clean": "#0b6e69", "light_deposit": "#8fc7c1", "heavy_deposit": "#b45309", "blocked": "#7c2d12",
           "corroded": "#b91c1c", "worn": "#d4a017", "damaged": "#6b7280", "leaking": "#1d4ed8"}


def findings_frame(site=None) -> pd.DataFrame:
    """principle (display name), fluid, condition of every signed record (optionally of one site): one query."""
    from maintenance.models import MaintenanceRecord
    from plant.models import Device

    records = MaintenanceRecord.objects.filter(state=MaintenanceRecord.State.SIGNED)
    if site is not None:
        records = records.filter(device__position__area__site=site)
    frame = pd.DataFrame.from_records(
        list(records.order_by().values_list("device__principle", "device__position__fluid__name", "condition")),
        columns=["principle", "fluid", "condition"])
    names = dict(Device.Principle.choices)
    frame["principle"] = frame["principle"].map(lambda p: names.get(p, p))
    return frame


def condition_table(frame: pd.DataFrame) -> pd.DataFrame:
    """One row per (principle, fluid) with records, the count of each condition and the share fouled
    (heavy deposit or blocked, %), sorted by principle then fluid."""
    if frame.empty:
        return pd.DataFrame(columns=COLUMNS)
    counts = pd.crosstab([frame["principle"], frame["fluid"]], frame["condition"])
    counts = counts.reindex(columns=CONDITION_CODES, fill_value=0)
    table = counts.copy()
    table.insert(0, "inspections", counts.sum(axis=1))
    fouled = counts[sorted(loop.FOULED)].sum(axis=1)
    table["fouled_pct"] = (fouled / table["inspections"] * 100.0).round(1)
    table = table.reset_index().sort_values(["principle", "fluid"], kind="stable").reset_index(drop=True)
    for column in ["inspections", *CONDITION_CODES]:
        table[column] = table[column].astype(int)
    return table[COLUMNS]


def condition_chart_svg(table: pd.DataFrame, width: int = 760) -> str:
    """Horizontal bars, one per principle × fluid, split by the share of each condition found."""
    left, right, top, row_h, bar_h = 260, 20, 44, 26, 16
    plot_w = width - left - right
    height = top + max(1, len(table)) * row_h + 30
    out = [f'<svg xmlns="http://www.w3.org/2000/svg" width="{width}" height="{height}" viewBox="0 0 {width} {height}" '
           f'font-family="DejaVu Sans, sans-serif" font-size="11" role="img" '
           f'aria-label="Share of each condition found, by principle and fluid">']
    x = left
    for code, label in loop.CONDITIONS:  # legend, in two rows
        i = CONDITION_CODES.index(code)
        lx, ly = left + (i % 4) * (plot_w / 4), 12 + (i // 4) * 14
        out.append(f'<rect x="{lx:.1f}" y="{ly - 9}" width="10" height="10" fill="{COLOURS[code]}"/>'
                   f'<text x="{lx + 14:.1f}" y="{ly}">{escape(label)}</text>')
    if table.empty:
        out.append(f'<text x="{left + plot_w / 2:.1f}" y="{top + 16}" text-anchor="middle">No signed maintenance '
                   f'records</text>')
    for row_index, row in enumerate(table.itertuples(index=False)):
        y = top + row_index * row_h
        total = row.inspections
        out.append(f'<text x="{left - 6}" y="{y + bar_h - 4}" text-anchor="end">'
                   f'{escape(str(row.principle))} · {escape(str(row.fluid))}</text>')
        x = left
        for code in CONDITION_CODES:
            n = getattr(row, code)
            if not n:
                continue
            w = plot_w * n / total
            out.append(f'<rect x="{x:.1f}" y="{y}" width="{w:.1f}" height="{bar_h}" fill="{COLOURS[code]}">'
                       f'<title>{escape(loop.LABELS[code])}: {n} of {total}</title></rect>')
            x += w
        out.append(f'<text x="{left + plot_w + 2}" y="{y + bar_h - 4}" font-size="9">{total}</text>')
    axis_y = top + max(1, len(table)) * row_h + 4
    for pct in (0, 25, 50, 75, 100):
        xx = left + plot_w * pct / 100
        out.append(f'<text x="{xx:.1f}" y="{axis_y + 12}" text-anchor="middle" font-size="9">{pct} %</text>')
    out.append("</svg>")
    return "".join(out)
