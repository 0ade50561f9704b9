"""The whole-recording strip: the envelope of every sweep, the beat-by-beat rate, conditions.

It always shows the whole recording (time from its start). A shaded window marks what the trace
view shows; dragging the window (or its edges) moves (or widens) the trace view, and a click
centres the window where it lands. Dragging with Shift held, or in condition-marking mode, marks
a new condition over the span dragged.
"""

from __future__ import annotations

import numpy as np
import pyqtgraph as pg
from PySide6 import QtCore, QtWidgets

from analysis.columns import column

from .. import palette
from .bands import BandLabels, SpanBands

__all__ = ["OverviewStrip", "MarkingViewBox"]


class MarkingViewBox(pg.ViewBox):
    """A fixed view box where a click navigates and a Shift-drag (or any drag while marking)
    draws the span of a new condition."""

    clicked_at = QtCore.Signal(float)
    span_marked = QtCore.Signal(float, float)

    def __init__(self) -> None:
        super().__init__(enableMenu=False)
        self.setMouseEnabled(x=False, y=False)
        self.marking = False
        self._preview = pg.LinearRegionItem(movable=False, brush=(239, 71, 111, 60), pen=pg.mkPen("#ef476f"))
        self._preview.setZValue(30)
        self._preview.setVisible(False)
        self.addItem(self._preview, ignoreBounds=True)

    def mouseClickEvent(self, ev) -> None:  # noqa: N802 (Qt API)
        if ev.button() == QtCore.Qt.LeftButton:
            ev.accept()
            self.clicked_at.emit(float(self.mapSceneToView(ev.scenePos()).x()))
        else:
            ev.ignore()

    def mouseDragEvent(self, ev, axis=None) -> None:  # noqa: N802
        if ev.button() != QtCore.Qt.LeftButton or not (self.marking or ev.modifiers() & QtCore.Qt.ShiftModifier):
            ev.ignore()
            return
        ev.accept()
        a = float(self.mapSceneToView(ev.buttonDownScenePos()).x())
        b = float(self.mapSceneToView(ev.scenePos()).x())
        lo, hi = sorted((a, b))
        self._preview.setRegion((lo, hi))
        self._preview.setVisible(True)
        if ev.isFinish():
            self._preview.setVisible(False)
            if hi > lo:
                self.span_marked.emit(lo, hi)


class OverviewStrip(pg.GraphicsLayoutWidget):
    """Envelope and rate of the whole recording with a navigation window and condition bands.

    Signals
    -------
    navigated(float, float)
        The window's span, seconds from the start of the recording, while it is dragged.
    clicked_at(float)
        A click at that time (seconds from the start of the recording).
    condition_marked(float, float)
        A span dragged for a new condition.
    """

    navigated = QtCore.Signal(float, float)
    clicked_at = QtCore.Signal(float)
    condition_marked = QtCore.Signal(float, float)

    def __init__(self, parent: QtWidgets.QWidget | None = None) -> None:
        super().__init__(parent)
        self.setObjectName("overview")
        self.setBackground(palette.PAPER)
        self.ci.setContentsMargins(4, 2, 8, 2)
        self.ci.setSpacing(0)
        self.trace_box = MarkingViewBox()
        self.rate_box = MarkingViewBox()
        self.trace_plot = self.addPlot(row=0, col=0, viewBox=self.trace_box)
        self.rate_plot = self.addPlot(row=1, col=0, viewBox=self.rate_box)
        self.rate_plot.setXLink(self.trace_plot)
        self.ci.layout.setRowStretchFactor(0, 3)
        self.ci.layout.setRowStretchFactor(1, 2)
        rate = column("rate_bpm")
        for plot, label, units in ((self.trace_plot, "V", "mV"), (self.rate_plot, rate.label, rate.unit)):
            plot.setMenuEnabled(False)
            plot.hideButtons()
            plot.setLabel("left", f"{label} ({units})", **{"font-size": "8pt"})
            plot.getAxis("left").setWidth(58)
            for axis in ("left", "bottom"):
                plot.getAxis(axis).setPen(palette.INK)
                plot.getAxis(axis).setTextPen(palette.INK)
        self.trace_plot.getAxis("bottom").setStyle(showValues=False)
        self.rate_plot.setLabel("bottom", "time in recording (s)", **{"font-size": "8pt"})

        self.envelope = pg.PlotDataItem(pen=pg.mkPen(palette.ENVELOPE, width=1), connect="finite")
        self.trace_plot.addItem(self.envelope)
        self.rate = pg.ScatterPlotItem(size=3.5, pen=None, brush=pg.mkBrush(palette.RATE))
        self.rate_rejected = pg.ScatterPlotItem(size=4, symbol="x", pen=pg.mkPen(palette.REJECTED_MARKER), brush=None)
        self.rate_plot.addItem(self.rate)
        self.rate_plot.addItem(self.rate_rejected)

        self.condition_bands = [SpanBands(z=-20), SpanBands(z=-20)]
        #: One label per condition, on a paper ground so that it reads over the envelope.
        self.condition_names = BandLabels(self.trace_plot, z=25)  # above the navigation window
        self.steady_bands = [SpanBands(hatch=True, z=-19), SpanBands(hatch=True, z=-19)]
        for plot, bands, steady in zip((self.trace_plot, self.rate_plot), self.condition_bands, self.steady_bands):
            plot.addItem(bands, ignoreBounds=True)
            plot.addItem(steady, ignoreBounds=True)

        self.window = pg.LinearRegionItem(
            brush=pg.mkBrush(29, 53, 87, 38), hoverBrush=pg.mkBrush(29, 53, 87, 60),
            pen=pg.mkPen(palette.TRACE, width=1.5), swapMode="block",
        )
        self.window.setZValue(20)
        self.trace_plot.addItem(self.window, ignoreBounds=True)
        self.window.sigRegionChanged.connect(self._on_window)
        self._duration_s = 1.0
        self._sweep_spans: list[tuple[float, float]] = []

        for box in (self.trace_box, self.rate_box):
            box.clicked_at.connect(self.clicked_at)
            box.span_marked.connect(self.condition_marked)

    # -- content -------------------------------------------------------------------------------
    def set_recording_geometry(self, sweep_starts_s, sweep_durations_s) -> None:
        """The recording's sweeps (their starts and durations); resets the view to all of it."""
        self._sweep_spans = [(float(a), float(a) + float(d)) for a, d in zip(sweep_starts_s, sweep_durations_s)]
        self._duration_s = max(b for _, b in self._sweep_spans) if self._sweep_spans else 1.0
        for plot in (self.trace_plot, self.rate_plot):
            plot.setXRange(0.0, self._duration_s, padding=0.01)
        self.window.setBounds((0.0, self._duration_s))

    def set_envelope(self, x_s: np.ndarray, y: np.ndarray) -> None:
        """The recording's min/max envelope (NaN separates sweeps)."""
        self.envelope.setData(x_s, y)
        finite = y[np.isfinite(y)]
        if len(finite):
            lo, hi = float(finite.min()), float(finite.max())
            pad = 0.05 * max(hi - lo, 1.0)
            self.trace_plot.setYRange(lo - pad, hi + pad, padding=0.0)
        self.trace_plot.setXRange(0.0, self._duration_s, padding=0.01)

    def set_rate(self, t_s: np.ndarray, rate_bpm: np.ndarray, accepted: np.ndarray) -> None:
        """Beat-by-beat rate at each upstroke (seconds from the start of the recording)."""
        ok = np.isfinite(rate_bpm) & np.isfinite(t_s)
        acc = ok & (accepted != 0)
        self.rate.setData(t_s[acc], rate_bpm[acc])
        self.rate_rejected.setData(t_s[ok & ~acc], rate_bpm[ok & ~acc])
        if acc.any():
            lo, hi = np.percentile(rate_bpm[acc], [1, 99])
            pad = max(0.15 * (hi - lo), 2.0)
            self.rate_plot.setYRange(lo - pad, hi + pad, padding=0.0)
        self.rate_plot.setXRange(0.0, self._duration_s, padding=0.01)

    def set_conditions(self, spans: list[tuple[str, float, float, str]],
                       steady: list[tuple[float, float, str]] | None = None) -> None:
        """Condition bands ``(name, start_s, end_s, colour)`` and their steady-state windows
        ``(start_s, end_s, colour)``."""
        t0 = [min(a, self._duration_s) for _, a, _, _ in spans]
        t1 = [min(b, self._duration_s) for _, _, b, _ in spans]
        colours = [palette.rgba(c, 52) for *_, c in spans]
        names = [n for n, *_ in spans]
        self.condition_bands[0].set_bands(t0, t1, colours)
        self.condition_bands[1].set_bands(t0, t1, colours)
        self.condition_names.set_labels(names, [c for *_, c in spans], list(zip(t0, t1)))
        steady = steady or []
        s0 = [a for a, _, _ in steady]
        s1 = [min(b, self._duration_s) for _, b, _ in steady]
        scol = [palette.rgba(c, 40) for *_, c in steady]
        for bands in self.steady_bands:
            bands.set_bands(s0, s1, scol)

    @property
    def condition_labels(self) -> list[pg.TextItem]:
        """The conditions' labels, in the order of :meth:`set_conditions`."""
        return self.condition_names.items

    def set_marking(self, on: bool) -> None:
        """Condition-marking mode: any drag on the strip marks a span."""
        self.trace_box.marking = self.rate_box.marking = bool(on)

    # -- navigation window ---------------------------------------------------------------------
    def set_window(self, t0_s: float, t1_s: float) -> None:
        """Place the window (seconds from the start of the recording) without emitting."""
        self.window.blockSignals(True)
        self.window.setRegion((t0_s, t1_s))
        self.window.blockSignals(False)

    def window_span(self) -> tuple[float, float]:
        a, b = self.window.getRegion()
        return float(a), float(b)

    def _on_window(self) -> None:
        self.navigated.emit(*self.window_span())
