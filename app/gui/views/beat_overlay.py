"""The beat under review drawn over its condition's mean beat, aligned at the upstroke.

A small plot for the beat card: the condition's ensemble-averaged beat (from its summary, made
by the core) as a thick pale line, the beat under review as a thin dark one on the same time
base, so that a beat that differs from its neighbours shows at a glance.
"""

from __future__ import annotations

import numpy as np
import pyqtgraph as pg
from PySide6 import QtCore

from .. import palette

__all__ = ["BeatOverlay", "Y_STEP_MV"]

#: The overlay's potential axis runs between whole multiples of this (mV).
Y_STEP_MV = 5.0


class BeatOverlay(pg.PlotWidget):
    """One beat over a mean beat, both in mV against ms from the upstroke."""

    def __init__(self, parent=None) -> None:
        super().__init__(parent, background=palette.PAPER)
        self.setObjectName("beat_overlay")
        self.setMinimumSize(150, 110)
        plot = self.getPlotItem()
        plot.setMenuEnabled(False)
        plot.hideButtons()
        plot.setMouseEnabled(x=False, y=False)
        for axis in ("left", "bottom"):
            plot.getAxis(axis).setPen(palette.INK)
            plot.getAxis(axis).setTextPen(palette.INK)
            plot.getAxis(axis).setStyle(tickFont=self.font(), tickTextOffset=2)
        plot.getAxis("left").setWidth(30)
        plot.getAxis("bottom").setHeight(18)
        # A few hundred pixels wide: the beats' thousands of samples are drawn peak-decimated,
        # and the mean with a two-pixel pen (wider pens cost the raster engine a stroke each).
        plot.setDownsampling(auto=True, mode="peak")
        plot.setClipToView(True)
        self.mean = pg.PlotDataItem(pen=pg.mkPen(palette.rgba(palette.RATE, 170), width=2.5), skipFiniteCheck=True)
        self.beat = pg.PlotDataItem(pen=pg.mkPen(palette.TRACE, width=1), skipFiniteCheck=True)
        plot.addItem(self.mean)
        plot.addItem(self.beat)
        self.note = pg.TextItem("", color=palette.INK, anchor=(0, 0))
        self.note.setParentItem(plot.getViewBox())
        self.note.setPos(QtCore.QPointF(2, 0))
        self.setToolTip("The beat under review (thin) over its condition's mean beat (thick), aligned at the upstroke")

    def draw(self, beat: tuple[np.ndarray, np.ndarray] | None, mean: tuple[np.ndarray, np.ndarray] | None,
             note: str = "") -> None:
        """Draw ``(t_ms, v_mV)`` of the beat and of the mean (either may be None)."""
        self.beat.setData(*(beat if beat is not None else ([], [])))
        self.mean.setData(*(mean if mean is not None else ([], [])))
        self.note.setText(note)
        parts = [p for p in (beat, mean) if p is not None and len(p[0])]
        if parts:
            x = np.concatenate([np.asarray(p[0], float) for p in parts])
            y = np.concatenate([np.asarray(p[1], float) for p in parts])
            ok = np.isfinite(x) & np.isfinite(y)
            if ok.any():
                self._fit(x[ok], y[ok])

    def _fit(self, x: np.ndarray, y: np.ndarray) -> None:
        """Fit the plot to the points: time with a 2 % margin, potential with 6 % rounded out
        to whole :data:`Y_STEP_MV` steps, so that the scale stays still from one beat of a
        condition to the next (a beat reads against the same scale as its neighbours, and the
        axes are not laid out again)."""
        x0, x1 = float(x.min()), float(x.max())
        y0, y1 = float(y.min()), float(y.max())
        px, py = 0.02 * (x1 - x0), 0.06 * (y1 - y0)
        y0, y1 = Y_STEP_MV * np.floor((y0 - py) / Y_STEP_MV), Y_STEP_MV * np.ceil((y1 + py) / Y_STEP_MV)
        if y1 <= y0:
            y1 = y0 + Y_STEP_MV
        box = self.getPlotItem().getViewBox()
        box.setRange(xRange=(x0 - px, x1 + px), yRange=(float(y0), float(y1)), padding=0.0)
        # The new range reaches the items now: left to the paint, it would move them while
        # painting and so have the plot painted twice.
        box.updateMatrix()

    def blank(self) -> None:
        """Nothing drawn (no beat under review). Not ``clear``: a plot widget's ``clear``
        removes its items."""
        self.draw(None, None, "")

    def drawn(self) -> dict[str, tuple[np.ndarray, np.ndarray]]:
        """What is drawn: ``{"beat": (t_ms, v_mV), "mean": (t_ms, v_mV)}``."""
        return {name: (np.asarray(item.xData if item.xData is not None else []),
                       np.asarray(item.yData if item.yData is not None else []))
                for name, item in (("beat", self.beat), ("mean", self.mean))}
