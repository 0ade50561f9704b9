"""The comparison across cells: one panel per parameter, the conditions along x, one line per cell,
each group's mean with its standard error on top.

Every number drawn (each cell's value in each condition, each group's mean, SEM and n) is the
core's comparison (:func:`analysis.study.compare`), handed over as :class:`ComparisonPanel`; this
module only draws. The recording under review is drawn darker, so that a reviewer sees where the
cell shown sits among the others while the figure follows the review.
"""

from __future__ import annotations

import math
from collections.abc import Sequence
from dataclasses import dataclass, field

import numpy as np
import pyqtgraph as pg
from PySide6 import QtCore, QtWidgets

from analysis.columns import column

from .. import palette

__all__ = ["DEFAULT_PARAMETERS", "CellLine", "ComparisonFigure", "ComparisonPanel", "GroupMean"]

#: Parameters shown when the user has not chosen: rate, the diastolic ones, the upstroke, APD90.
DEFAULT_PARAMETERS = ("rate_bpm", "mdp_mV", "ddr_mV_per_s", "top_mV", "dvdt_max_V_per_s", "apd90_ms")

#: The cell under review: a hue no group takes.
CURRENT = palette.RATE

#: How far apart (in condition steps) the groups' means are drawn, so that error bars never overlap.
_GROUP_STEP = 0.08


@dataclass(frozen=True)
class CellLine:
    """One cell's value of a parameter in each condition (NaN where it has none)."""

    cell: str
    group: str
    values: tuple[float, ...]


@dataclass(frozen=True)
class GroupMean:
    """A group's mean, SEM and number of cells in each condition (NaN, 0 where none)."""

    group: str
    mean: tuple[float, ...]
    sem: tuple[float, ...]
    n: tuple[int, ...]


@dataclass(frozen=True)
class ComparisonPanel:
    """What one panel draws: a parameter (a beats column of the catalogue) across conditions."""

    parameter: str
    conditions: tuple[str, ...]
    cells: tuple[CellLine, ...] = ()
    groups: tuple[GroupMean, ...] = ()
    #: The cell whose line is drawn darker (the recording under review), or "".
    current_cell: str = ""
    #: Group colours by name; groups not named get the conditions' palette in order.
    colours: dict[str, str] = field(default_factory=dict)
    #: Lines of the comparison's numbers (change, paired tests) shown as the panel's tooltip.
    notes: tuple[str, ...] = ()

    def colour(self, group: str) -> str:
        if group in self.colours:
            return self.colours[group]
        names = [g.group for g in self.groups] or sorted({c.group for c in self.cells})
        if len(names) <= 1:
            return palette.TRACE
        return palette.condition_colour(names.index(group) if group in names else len(names))


def _axis_style(plot: pg.PlotItem, conditions: Sequence[str], label: str, unit: str) -> None:
    plot.showGrid(x=False, y=True, alpha=palette.GRID_ALPHA)
    plot.setMenuEnabled(False)
    plot.hideButtons()
    plot.setTitle(label, color=palette.INK, size="10pt")
    plot.setLabel("left", units=unit)
    for name in ("left", "bottom"):
        axis = plot.getAxis(name)
        axis.setPen(palette.INK)
        axis.setTextPen(palette.INK)
        axis.enableAutoSIPrefix(False)
    plot.getAxis("bottom").setTicks([[(i, c) for i, c in enumerate(conditions)], []])
    plot.setXRange(-0.4, len(conditions) - 0.6, padding=0.0)


class ComparisonFigure(pg.GraphicsLayoutWidget):
    """The comparison across cells, one panel per parameter in a grid of ``columns``.

    After :meth:`draw`, :attr:`drawn` holds for each parameter the lines and error bars as
    drawn (``{parameter: {"cells": {cell: y}, "means": {group: (x, mean, sem, n)}}}``), for
    tests and for the panel's readout.
    """

    title = "Comparison across cells"

    def __init__(self, parent: QtWidgets.QWidget | None = None, *, columns: int = 3) -> None:
        super().__init__(parent)
        self.setBackground(palette.PAPER)
        self.columns = max(1, int(columns))
        self.plots: dict[str, pg.PlotItem] = {}
        self.drawn: dict[str, dict] = {}
        self.legend: pg.LegendItem | None = None
        self._panels: tuple[ComparisonPanel, ...] = ()

    def export_item(self):
        return self.ci

    def blank(self) -> None:
        """Nothing drawn (no study open)."""
        self.ci.clear()
        self.plots = {}
        self.drawn = {}
        self.legend = None
        self._panels = ()

    def set_columns(self, columns: int) -> None:
        """Lay the panels out in this many columns (redrawn when it changes)."""
        columns = max(1, int(columns))
        if columns != self.columns:
            self.columns = columns
            if self._panels:
                self.draw(self._panels)

    def draw(self, panels: Sequence[ComparisonPanel]) -> None:
        """Draw one panel per :class:`ComparisonPanel`, in the order given."""
        self.blank()
        self._panels = tuple(panels)
        if not self._panels:
            return
        # The legend in a row of its own above the panels: over a panel it would hide cells.
        self.legend = pg.LegendItem(offset=None, labelTextColor=palette.INK, brush=palette.rgba(palette.PAPER, 0),
                                    pen=None, horSpacing=18)
        self.ci.addItem(self.legend, row=0, col=0, colspan=min(self.columns, len(self._panels)))
        for i, panel in enumerate(self._panels):
            plot = self.addPlot(row=1 + i // self.columns, col=i % self.columns)
            col = column(panel.parameter)
            _axis_style(plot, panel.conditions, col.label, col.unit)
            self.plots[panel.parameter] = plot
            if panel.notes:
                plot.setToolTip("\n".join(panel.notes))
            self.drawn[panel.parameter] = self._draw_panel(plot, panel, with_legend=(i == 0))

    def _draw_panel(self, plot: pg.PlotItem, panel: ComparisonPanel, *, with_legend: bool) -> dict:
        k = len(panel.conditions)
        x = np.arange(k, dtype=float)
        cells: dict[str, np.ndarray] = {}
        current = None
        for line in panel.cells:
            y = np.asarray(line.values, dtype=float)
            cells[line.cell] = y
            if not np.isfinite(y).any():
                continue  # a cell with no value here (no beats under any condition) draws nothing
            if line.cell == panel.current_cell:
                current = (line, y)
                continue
            pen = pg.mkPen(palette.rgba(panel.colour(line.group), 80), width=1)
            # A cell missing a condition keeps the segments it has: NaN breaks the line there.
            plot.plot(x, y, pen=pen, connect="finite", symbol="o", symbolSize=4, symbolPen=None,
                      symbolBrush=palette.rgba(panel.colour(line.group), 110))
        means: dict[str, tuple] = {}
        n_groups = len(panel.groups)
        for j, g in enumerate(panel.groups):
            shift = (j - (n_groups - 1) / 2) * _GROUP_STEP
            gx = x + shift
            mean = np.asarray(g.mean, dtype=float)
            sem = np.asarray(g.sem, dtype=float)
            colour = panel.colour(g.group)
            means[g.group] = (gx, mean, sem, tuple(int(n) for n in g.n))
            if not np.isfinite(mean).any():
                continue
            self._error_bars(plot, gx, mean, sem, colour)
            name = None
            if with_legend:
                who = f"{g.group}: " if g.group and n_groups > 1 else ""
                name = f"{who}mean ± SEM (n = {_n_text(g.n)} cells)"
            item = plot.plot(gx, mean, pen=pg.mkPen(colour, width=2.6), connect="finite", symbol="s", symbolSize=8,
                             symbolPen=pg.mkPen(colour), symbolBrush=colour)
            if name:
                self.legend.addItem(item, name)
        if current is not None:
            line, y = current
            item = plot.plot(x, y, pen=pg.mkPen(CURRENT, width=1.8, style=QtCore.Qt.DashLine), connect="finite",
                             symbol="o", symbolSize=6, symbolPen=None, symbolBrush=CURRENT)
            if with_legend:
                self.legend.addItem(item, f"{line.cell} (under review)")
        self._honest_range(plot, [*cells.values(), *(m[1] - m[2] for m in means.values()), *(m[1] + m[2] for m in means.values())])
        if with_legend and panel.cells:
            self.legend.addItem(pg.PlotDataItem([], [], pen=pg.mkPen(palette.rgba(panel.colour(panel.cells[0].group), 120))),
                                "one line per cell")
            # As many entries side by side as the figure's width holds (about 270 px each).
            self.legend.setColumnCount(max(1, min(len(self.legend.items), self.width() // 270)))
        return {"cells": cells, "means": means}

    @staticmethod
    def _honest_range(plot: pg.PlotItem, arrays) -> None:
        """A y range at least a tenth of the values' size wide, so that a change of a few tenths
        of a per cent does not fill the panel as if it were large (common practice, no source)."""
        values = np.concatenate([np.ravel(np.asarray(a, dtype=float)) for a in arrays]) if arrays else np.empty(0)
        values = values[np.isfinite(values)]
        if not values.size:
            return
        lo, hi = float(values.min()), float(values.max())
        least = 0.1 * max(abs(lo), abs(hi))
        if hi - lo < least:
            mid = (hi + lo) / 2
            lo, hi = mid - least / 2, mid + least / 2
        pad = 0.08 * (hi - lo) if hi > lo else 1.0
        plot.setYRange(lo - pad, hi + pad, padding=0.0)

    @staticmethod
    def _error_bars(plot: pg.PlotItem, x: np.ndarray, mean: np.ndarray, sem: np.ndarray, colour: str) -> None:
        """mean ± SEM as a vertical bar with caps, drawn as line pairs (the SVG writer knows them)."""
        ok = np.isfinite(mean) & np.isfinite(sem)
        if not ok.any():
            return
        cap = 0.06
        xs, ys = [], []
        for xi, m, s in zip(x[ok], mean[ok], sem[ok]):
            xs += [xi, xi, xi - cap, xi + cap, xi - cap, xi + cap]
            ys += [m - s, m + s, m - s, m - s, m + s, m + s]
        plot.addItem(pg.PlotCurveItem(np.asarray(xs), np.asarray(ys), pen=pg.mkPen(colour, width=1.6), connect="pairs"))

    def legend_texts(self) -> list[str]:
        """The legend's entries, top to bottom."""
        return [] if self.legend is None else [label.text for _sample, label in self.legend.items]


def _n_text(ns: Sequence[int]) -> str:
    """The cells counted, as one number or a range when conditions differ."""
    ns = [int(n) for n in ns if n]
    if not ns:
        return "0"
    lo, hi = min(ns), max(ns)
    return str(lo) if lo == hi else f"{lo}–{hi}"


def columns_for(width_px: int, n_panels: int) -> int:
    """Panels per row for a figure this wide: about 260 px each, at most three."""
    if n_panels <= 1:
        return 1
    return int(max(1, min(3, n_panels, math.floor(width_px / 260))))
