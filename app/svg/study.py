"""A study's comparison figure as SVG: one panel per parameter, conditions along x, one line per cell.

Each cell's values under the study's conditions (its row of the per cell x condition table per
condition) are joined by a thin grey line; the group's mean over its cells is drawn on top as a
dark dot with an error bar of one SEM (SD / sqrt(n), n the cells with a value under that
condition). One figure per group, so that groups never share a mean. No plotting library, no Qt.
"""

from __future__ import annotations

import math
from collections.abc import Mapping, Sequence

import numpy as np

from analysis.columns import summarised_columns
from analysis.study import condition_means, group_values

from .elements import document, escape, num
from .figures import nice_ticks

__all__ = ["COMPARISON_PANELS", "comparison_svg", "group_values"]

#: (table column, axis label) of each panel, in catalogue order.
COMPARISON_PANELS: tuple[tuple[str, str], ...] = tuple(
    (f"{c.stem}_mean_{c.unit_in_name}", c.axis_label) for c in summarised_columns()
)
_PANEL_W, _PANEL_H, _COLS, _LEFT, _GAP_X, _TOP, _GAP_Y, _BOTTOM = 250, 170, 3, 62, 70, 52, 64, 30
_CELL_LINE, _MEAN = "#9aa5b1", "#1b2a41"


def comparison_svg(
    table: Mapping[str, Sequence],
    *,
    conditions: Sequence[str],
    group: str = "",
    title: str = "",
    panels: Sequence[tuple[str, str]] | None = None,
) -> str:
    """The comparison figure of one group as an SVG document.

    Parameters
    ----------
    table : mapping of str to sequence
        The per cell x condition table (:func:`analysis.study.cell_condition_table`).
    conditions : sequence of str
        The conditions along x, in order (baseline first).
    group : str
        The group drawn (``""`` for a study without groups).
    title : str
        Shown at the top.
    panels : sequence of (column, label) or None
        The parameters drawn; None draws every summarised parameter (:data:`COMPARISON_PANELS`).

    Returns
    -------
    str
        The SVG text; the same table gives the same bytes.
    """
    panels = [p for p in (panels or COMPARISON_PANELS) if p[0] in table]
    groups = [str(g) for g in table.get("group", [""] * len(table["cell"]))]
    present = {str(c) for c, g in zip(table["condition"], groups) if g == group}
    conditions = [c for c in conditions if c in present]  # a condition none of the group's cells had
    rows = max(1, math.ceil(len(panels) / _COLS))
    width = _LEFT + _COLS * _PANEL_W + (_COLS - 1) * _GAP_X + 20
    height = _TOP + rows * _PANEL_H + (rows - 1) * _GAP_Y + _BOTTOM
    n_cond = len(conditions)
    legend = "grey: each cell; dark: mean &#177; SEM over cells"
    out = [f'<text x="{_LEFT}" y="22" font-size="14">{escape(title)}</text>',
           f'<text x="{width - 20}" y="22" text-anchor="end" fill="#555">{legend}</text>']
    for p, (column, label) in enumerate(panels):
        left = _LEFT + (p % _COLS) * (_PANEL_W + _GAP_X)
        top = _TOP + (p // _COLS) * (_PANEL_H + _GAP_Y)
        out += _panel(table, column, label, conditions, group, left, top, n_cond)
    return document(width, height, out, title=title or None, font='font-family="sans-serif" font-size="11"')


def _panel(table, column, label, conditions, group, left, top, n_cond) -> list[str]:
    cells, values = group_values(table, column, conditions, group)
    finite = values[np.isfinite(values)]
    mean, sem, n = condition_means(values)
    ends = np.concatenate([finite, (mean - sem)[np.isfinite(sem)], (mean + sem)[np.isfinite(sem)]])
    lo, hi = (float(np.min(ends)), float(np.max(ends))) if ends.size else (0.0, 1.0)
    pad = 0.08 * (hi - lo) if hi > lo else max(abs(lo) * 0.05, 1.0)
    ticks = nice_ticks(lo - pad, hi + pad, 4)
    y_lo, y_hi = (ticks[0], ticks[-1]) if len(ticks) >= 2 else (lo - pad, hi + pad)
    bottom = top + _PANEL_H

    def px(k: float) -> float:
        return left + _PANEL_W * (k + 0.5) / max(n_cond, 1)

    def py(v: float) -> float:
        return bottom - _PANEL_H * (v - y_lo) / (y_hi - y_lo)

    out = [f'<rect x="{left}" y="{top}" width="{_PANEL_W}" height="{_PANEL_H}" fill="none" stroke="#444"/>',
           f'<text x="{left + _PANEL_W / 2:.1f}" y="{top - 8}" text-anchor="middle">{escape(label)}</text>']
    for v in ticks:
        yy = num(py(v), 1)
        out.append(f'<line x1="{left - 4}" y1="{yy}" x2="{left}" y2="{yy}" stroke="#444"/>')
        out.append(f'<text x="{left - 6}" y="{num(py(v) + 4, 1)}" text-anchor="end">{v:g}</text>')
    for k, name in enumerate(conditions):
        out.append(f'<text x="{num(px(k), 1)}" y="{bottom + 16}" text-anchor="middle">{escape(name)}</text>')
        out.append(f'<text x="{num(px(k), 1)}" y="{bottom + 30}" text-anchor="middle" fill="#666">n={int(n[k])}</text>')
    for i, cell in enumerate(cells):
        pts = [(px(k), py(values[i, k])) for k in range(n_cond) if np.isfinite(values[i, k])]
        if len(pts) >= 2:
            line = " ".join(f"{num(x, 1)},{num(y, 1)}" for x, y in pts)
            out.append(f'<polyline points="{line}" fill="none" stroke="{_CELL_LINE}" stroke-width="1.2">'
                       f'<title>{escape(cell)}</title></polyline>')
        for x, y in pts:
            out.append(f'<circle cx="{num(x, 1)}" cy="{num(y, 1)}" r="2.2" fill="{_CELL_LINE}"/>')
    mean_pts = [(px(k), py(mean[k])) for k in range(n_cond) if np.isfinite(mean[k])]
    if len(mean_pts) >= 2:
        line = " ".join(f"{num(x, 1)},{num(y, 1)}" for x, y in mean_pts)
        out.append(f'<polyline points="{line}" fill="none" stroke="{_MEAN}" stroke-width="2.2"/>')
    for k in range(n_cond):
        if not np.isfinite(mean[k]):
            continue
        x = num(px(k), 1)
        if np.isfinite(sem[k]):
            a, b = num(py(mean[k] - sem[k]), 1), num(py(mean[k] + sem[k]), 1)
            out.append(f'<line x1="{x}" y1="{a}" x2="{x}" y2="{b}" stroke="{_MEAN}" stroke-width="1.6"/>')
            for yy in (a, b):
                out.append(f'<line x1="{num(px(k) - 6, 1)}" y1="{yy}" x2="{num(px(k) + 6, 1)}" y2="{yy}" '
                           f'stroke="{_MEAN}" stroke-width="1.6"/>')
        out.append(f'<circle cx="{x}" cy="{num(py(mean[k]), 1)}" r="4" fill="{_MEAN}"/>')
    return out
