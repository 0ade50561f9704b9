"""Per-beat time courses as small, dependency-free SVG figures (for ``upstroke export --figures``).

The command line has no plotting library to rely on (matplotlib is not a dependency, and Qt is
not loaded by the CLI), so the figures are written as plain SVG text: one column of panels
(rate, APD90, DDR, MDP against time from the start of the recording), accepted beats as filled
dots, rejected beats as hollow grey rings, conditions as shaded bands with their names. The same
table gives the same bytes. They are meant for a quick look and for notes; the desktop app has
the interactive plots.
"""

from __future__ import annotations

import math
from typing import Sequence

import numpy as np

from analysis.columns import column
from analysis.table import BeatTable

from .elements import document, escape, num

__all__ = ["PANELS", "nice_ticks", "time_course_svg"]

#: (column, axis label, smallest axis span) of each panel, top to bottom. The smallest span keeps
#: beat-to-beat noise from filling a panel as if it were a change.
PANELS: tuple[tuple[str, str, float], ...] = tuple(
    (name, column(name).axis_label, span)
    for name, span in (("rate_bpm", 10.0), ("apd90_ms", 20.0), ("ddr_mV_per_s", 10.0), ("mdp_mV", 4.0))
)
_W, _PANEL_H, _LEFT, _RIGHT, _TOP, _GAP, _BOTTOM = 860, 150, 80, 20, 46, 26, 44
_BANDS = ("#dfe9f5", "#f6e6d5", "#e0f0df", "#efe0f0", "#f3f0d6")


def nice_ticks(lo: float, hi: float, n: int = 5) -> list[float]:
    """Round tick values from at or below ``lo`` to at or above ``hi``, 1, 2 or 5 x 10^k apart.

    Examples
    --------
    >>> nice_ticks(163.2, 171.9, 4)
    [160.0, 165.0, 170.0, 175.0]
    """
    if not (math.isfinite(lo) and math.isfinite(hi)):
        return []
    if hi <= lo:
        hi = lo + 1.0
    raw = (hi - lo) / max(n, 1)
    mag = 10 ** math.floor(math.log10(raw))
    step = next(m * mag for m in (1, 2, 5, 10) if m * mag >= raw)
    first = math.floor(lo / step + 1e-9)
    last = math.ceil(hi / step - 1e-9)
    return [float(round(k * step, 10)) for k in range(first, last + 1)]


def _fmt(x: float) -> str:
    return num(x, 1)


def _label(x: float) -> str:
    return f"{x:g}"


def time_course_svg(
    beats: BeatTable,
    *,
    title: str,
    sweep_starts_s: Sequence[float],
    condition_spans: Sequence[tuple[str, float, float]] = (),
) -> str:
    """An SVG document of one recording's per-beat time courses.

    Parameters
    ----------
    beats : BeatTable
        The reviewed table (``accepted`` after decisions) of one recording.
    title : str
        Shown at the top (the recording's label).
    sweep_starts_s : sequence of float
        Start of each sweep from the start of the recording, to place beats in time.
    condition_spans : sequence of (str, float, float)
        Name, start and end (seconds from the start of the recording) of each condition.

    Returns
    -------
    str
        The SVG text (UTF-8, ``\\n`` line ends).
    """
    n_panels = len(PANELS)
    height = _TOP + n_panels * _PANEL_H + (n_panels - 1) * _GAP + _BOTTOM
    plot_w = _W - _LEFT - _RIGHT
    sweep = np.asarray(beats["sweep"], dtype=np.int64) if len(beats) else np.empty(0, np.int64)
    t = np.asarray(sweep_starts_s, dtype=float)[sweep] + np.asarray(beats["t_upstroke_s"], float) if len(beats) else np.empty(0)
    accepted = np.asarray(beats["accepted"]) == 1 if len(beats) else np.empty(0, bool)
    t_hi = float(np.max(t)) if t.size else 1.0
    for _, _, end in condition_spans:
        if math.isfinite(end):
            t_hi = max(t_hi, end)
    x_ticks = nice_ticks(0.0, t_hi, 8)
    x_max = max(x_ticks[-1] if x_ticks else 1.0, t_hi, 1e-9)

    def px(x: float) -> float:
        return _LEFT + plot_w * x / x_max

    out = [
        f'<text x="{_LEFT}" y="20" font-size="14">{escape(title)}</text>',
        f'<text x="{_W - _RIGHT}" y="20" text-anchor="end" fill="#555">filled: accepted; open grey: rejected</text>',
    ]
    for p, (name, label, min_span) in enumerate(PANELS):
        top = _TOP + p * (_PANEL_H + _GAP)
        bottom = top + _PANEL_H
        y = np.asarray(beats[name], float) if len(beats) and name in beats else np.empty(0)
        finite = np.isfinite(y) & np.isfinite(t)
        use = finite & accepted if (finite & accepted).any() else finite
        lo, hi = (float(np.min(y[use])), float(np.max(y[use]))) if use.any() else (0.0, 1.0)
        if hi - lo < min_span:
            mid = 0.5 * (lo + hi)
            lo, hi = mid - min_span / 2, mid + min_span / 2
        pad = 0.08 * (hi - lo) if hi > lo else max(abs(lo) * 0.05, 1.0)
        y_ticks = nice_ticks(lo - pad, hi + pad, 4)
        y_lo, y_hi = (y_ticks[0], y_ticks[-1]) if len(y_ticks) >= 2 else (lo - pad, hi + pad)

        def py(v: float) -> float:
            return bottom - _PANEL_H * (v - y_lo) / (y_hi - y_lo)

        for k, (name, start, end) in enumerate(condition_spans):
            a, b = px(max(start, 0.0)), px(min(end, x_max) if math.isfinite(end) else x_max)
            out.append(f'<rect x="{_fmt(a)}" y="{top}" width="{_fmt(max(b - a, 0.0))}" height="{_PANEL_H}" fill="{_BANDS[k % len(_BANDS)]}"/>')
            if p == 0:
                out.append(f'<text x="{_fmt(a + 3)}" y="{top - 4}" fill="#333">{escape(name)}</text>')
        out.append(f'<rect x="{_LEFT}" y="{top}" width="{plot_w}" height="{_PANEL_H}" fill="none" stroke="#444"/>')
        for v in y_ticks:
            yy = py(v)
            if top - 0.5 <= yy <= bottom + 0.5:
                out.append(f'<line x1="{_LEFT - 4}" y1="{_fmt(yy)}" x2="{_LEFT}" y2="{_fmt(yy)}" stroke="#444"/>')
                out.append(f'<text x="{_LEFT - 6}" y="{_fmt(yy + 4)}" text-anchor="end">{_label(v)}</text>')
        out.append(
            f'<text transform="translate(16,{_fmt((top + bottom) / 2)}) rotate(-90)" text-anchor="middle">{escape(label)}</text>'
        )
        for v in x_ticks:
            xx = px(v)
            out.append(f'<line x1="{_fmt(xx)}" y1="{bottom}" x2="{_fmt(xx)}" y2="{bottom + 4}" stroke="#444"/>')
            if p == n_panels - 1:
                out.append(f'<text x="{_fmt(xx)}" y="{bottom + 16}" text-anchor="middle">{_label(v)}</text>')
        for i in np.flatnonzero(finite):
            cx, cy = _fmt(px(float(t[i]))), _fmt(min(max(py(float(y[i])), top), bottom))
            if accepted[i]:
                out.append(f'<circle cx="{cx}" cy="{cy}" r="2" fill="#1f4e8c"/>')
            else:
                out.append(f'<circle cx="{cx}" cy="{cy}" r="2.5" fill="none" stroke="#999"/>')
    last_bottom = _TOP + n_panels * _PANEL_H + (n_panels - 1) * _GAP
    out.append(f'<text x="{_LEFT + plot_w / 2:.1f}" y="{last_bottom + 34}" text-anchor="middle">time from the start of the recording (s)</text>')
    return document(_W, height, out, font='font-family="sans-serif" font-size="11"')
