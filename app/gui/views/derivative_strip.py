"""dV/dt under the voltage trace, on the same time axis.

The rate of change of the membrane potential, from the samples of the stretch around the view
by the core's Savitzky-Golay derivative (:func:`analysis.signal.savgol_derivative`, quadratic,
:data:`WINDOW_MS` wide: raw differences of a 20 kHz trace are mostly noise), in V/s. The
strip's time axis is linked to the trace view's, so both pan and zoom together. Past
:data:`MAX_SAMPLES` samples in view (minutes of a long recording) the strip says to zoom in
rather than read the whole sweep.
"""

from __future__ import annotations

import numpy as np
import pyqtgraph as pg

from analysis.signal import savgol_derivative

from .. import palette
from .trace_data import SweepLevels

__all__ = ["MAX_SAMPLES", "WINDOW_MS", "DerivativeStrip"]

#: The derivative's window (ms): narrow enough to keep a nodal upstroke's peak rate.
WINDOW_MS = 1.0
#: At most this many samples in view for the strip to draw (2 M: 100 s at 20 kHz).
MAX_SAMPLES = 2_000_000


class DerivativeStrip(pg.PlotWidget):
    """dV/dt of the sweep shown, x-linked to a trace view's plot."""

    def __init__(self, parent=None) -> None:
        super().__init__(parent, background=palette.PAPER)
        self.setObjectName("derivative_strip")
        plot = self.getPlotItem()
        plot.setMenuEnabled(False)
        plot.hideButtons()
        plot.setLabel("left", "dV/dt", units="V/s")
        plot.getAxis("left").enableAutoSIPrefix(False)
        plot.hideAxis("bottom")
        for axis in ("left", "bottom"):
            plot.getAxis(axis).setPen(palette.INK)
            plot.getAxis(axis).setTextPen(palette.INK)
        plot.setClipToView(True)
        plot.setDownsampling(auto=True, mode="peak")
        plot.setMouseEnabled(x=True, y=False)
        self.curve = pg.PlotDataItem(pen=pg.mkPen(palette.RATE, width=1), skipFiniteCheck=True)
        plot.addItem(self.curve)
        self.zero = pg.InfiniteLine(pos=0.0, angle=0, pen=pg.mkPen(palette.GRID, width=1))
        plot.addItem(self.zero, ignoreBounds=True)
        self.note = pg.TextItem("", color=palette.INK, anchor=(0, 0))
        self.note.setParentItem(plot.getViewBox())
        self._levels: SweepLevels | None = None
        self._to_mV = 1.0
        self._loaded = (0, 0)

    def link_to(self, plot: pg.PlotItem) -> None:
        """Share the time axis of another plot (the trace view's)."""
        self.getPlotItem().setXLink(plot)
        plot.getAxis("left").setWidth(60)
        self.getPlotItem().getAxis("left").setWidth(60)

    def set_sweep(self, levels: SweepLevels | None, *, units: str = "mV") -> None:
        """The sweep shown (its samples in ``units``, "mV" or "V"); drawn for the current view."""
        self._levels = levels
        self._to_mV = 1e3 if units == "V" else 1.0
        self._loaded = (0, 0)
        self.curve.setData([], [])
        self.follow(*self.getPlotItem().getViewBox().viewRange()[0])

    def follow(self, x0: float, x1: float) -> None:
        """The view shows ``x0``-``x1`` seconds of the sweep: load what it lacks."""
        lv = self._levels
        if lv is None:
            return
        i0, i1 = max(0, int(x0 * lv.fs_hz)), min(lv.n_samples, int(np.ceil(x1 * lv.fs_hz)) + 1)
        if i1 - i0 > MAX_SAMPLES:
            self.curve.setData([], [])
            self._loaded = (0, 0)
            self.note.setText(f"dV/dt: zoom in to {MAX_SAMPLES / lv.fs_hz:.0f} s or less")
            return
        self.note.setText("")
        if self._loaded[0] <= i0 and i1 <= self._loaded[1]:
            return
        span = i1 - i0
        a, z = max(0, i0 - span), min(lv.n_samples, i1 + span)
        v = lv.recording.sweep(lv.sweep, lv.channel, start=a, stop=z)
        dvdt_V_per_s = savgol_derivative(v * self._to_mV, lv.fs_hz, window_ms=WINDOW_MS) / 1e3  # mV/s to V/s
        self.curve.setData(np.arange(a, a + v.size) / lv.fs_hz, dvdt_V_per_s)
        self._loaded = (a, z)
        finite = dvdt_V_per_s[np.isfinite(dvdt_V_per_s)]
        if finite.size:
            # A robust range: a single electrical artefact must not flatten every upstroke.
            lo, hi = (float(x) for x in np.percentile(finite, [0.02, 99.98]))
            pad = 0.08 * (hi - lo) + 0.1
            self.getPlotItem().setYRange(lo - pad, hi + pad, padding=0.0)

    def drawn(self) -> tuple[np.ndarray, np.ndarray]:
        """``(t_s, dV/dt in V/s)`` as loaded."""
        return (np.asarray(self.curve.xData if self.curve.xData is not None else []),
                np.asarray(self.curve.yData if self.curve.yData is not None else []))
