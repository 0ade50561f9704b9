"""Figures of a recording's accepted beats, by condition, each exportable to PNG or SVG.

* aligned beats with each condition's ensemble beat (their sample-wise median), over the beats
  its summary used;
* the phase plane (dV/dt against V) of each condition's ensemble beat and of the selected beat,
  with the derivative dV/dt max was measured with (over the beats' own window);
* the time course of rate, APD90 and DDR per beat, with the conditions as bands;
* the Poincare plot of successive cycle lengths;
* DDR against CL per beat, coloured by condition, with each condition's fitted line.

Every number drawn comes from :mod:`analysis.readouts._plotdata` (and through it the core's variability
module); this module only draws.
"""

from __future__ import annotations

import math
import os
from dataclasses import replace

import numpy as np
import pyqtgraph as pg
from PySide6 import QtCore, QtGui, QtWidgets

from analysis.errors import InputError
from analysis.columns import column
from analysis import readouts
from analysis.table import BeatTable

from .. import palette
from ..views.bands import BandLabels, SpanBands
from .figure_export import export_figure
from .figure_input import _WHOLE_RULES, FigureInput, summary_beat_rows
from .tab_note import TabNote

__all__ = ["FigureInput", "FiguresPanel", "export_figure", "summary_beat_rows", "FIGURES"]


def _style(plot: pg.PlotItem, bottom: tuple[str, str | None], left: tuple[str, str | None]) -> None:
    plot.showGrid(x=True, y=True, alpha=palette.GRID_ALPHA)
    plot.setMenuEnabled(False)
    plot.setLabel("bottom", bottom[0], units=bottom[1])
    plot.setLabel("left", left[0], units=left[1])
    for axis in ("left", "bottom"):
        plot.getAxis(axis).setPen(palette.INK)
        plot.getAxis(axis).setTextPen(palette.INK)
        plot.getAxis(axis).enableAutoSIPrefix(False)


def _legend(plot: pg.PlotItem, offset: tuple[int, int]) -> pg.LegendItem:
    """A legend on a paper-coloured, nearly opaque ground, readable over the traces it covers."""
    return plot.addLegend(offset=offset, labelTextColor=palette.INK, brush=palette.rgba(palette.PAPER, 215),
                          pen=palette.rgba(palette.INK, 60))


def _accepted_rows(beats: BeatTable, group: str | None = None) -> np.ndarray:
    """Accepted beats (optionally of one condition), in time order."""
    n = len(beats)
    ok = np.ones(n, dtype=bool) if "accepted" not in beats else np.asarray(beats["accepted"]) != 0
    if group is not None and "condition" in beats:
        ok &= np.asarray(beats["condition"]) == group
    rows = np.flatnonzero(ok)
    order = np.lexsort((np.asarray(beats["t_upstroke_s"])[rows], np.asarray(beats["sweep"])[rows]))
    return rows[order]


def _group_label(name: str) -> str:
    return name or "outside conditions"


class _Figure(pg.GraphicsLayoutWidget):
    """A figure: one or more plots in a layout, redrawn from a :class:`FigureInput`."""

    title = ""

    def __init__(self, parent: QtWidgets.QWidget | None = None) -> None:
        super().__init__(parent)
        self.setBackground(palette.PAPER)

    def draw(self, data: FigureInput) -> None:  # pragma: no cover - overridden
        raise NotImplementedError

    def blank(self) -> None:
        """Nothing drawn: no recording, or the next one's analysis still running (so that a
        figure never shows the previous recording's beats under the new one's name)."""
        self.plot.clear()
        self.legend.clear()

    def export_item(self):
        return self.ci


class AlignedBeatsFigure(_Figure):
    """Each condition's beats aligned at their upstroke, with their ensemble average.

    The beats are those of the condition's summary (its steady-state window) when the input
    has them, so that the average and the count in the legend are the summary's; a faint line
    is drawn for at most :attr:`MAX_DRAWN` of them, the average is over up to
    :attr:`MAX_AVERAGED` (spread evenly when there are more).
    """

    title = "Aligned beats"
    MAX_DRAWN = 30
    #: Points per faint beat, at most.
    FAINT_POINTS = 700
    MAX_AVERAGED = 400

    def __init__(self, parent=None) -> None:
        super().__init__(parent)
        self.plot = self.addPlot()
        _style(self.plot, ("time from upstroke", "ms"), ("V", "mV"))
        # The averages are drawn peak-decimated to the plot's width: thick pens over thousands of
        # samples made every repaint (a menu closing over the figure) cost tens of ms.
        self.plot.setDownsampling(auto=True, mode="peak")
        self.plot.setClipToView(True)
        self.legend = _legend(self.plot, (-10, 10))
        self.averages: dict[str, readouts.AlignedBeats] = {}

    def blank(self) -> None:
        super().blank()
        self.averages = {}

    def draw(self, data: FigureInput) -> None:
        self.plot.clear()
        self.legend.clear()
        self.averages = {}
        # One time base for every condition, set by the shortest typical cycle, so that no
        # window reaches into the next beat.
        groups = [(name, colour, *self._rows(data, name)) for name, colour in data.groups]
        cls = [np.nanmedian(np.asarray(data.beats["cl_ms"], float)[rows]) for _n, _c, rows, _w in groups
               if rows.size and "cl_ms" in data.beats and np.isfinite(np.asarray(data.beats["cl_ms"], float)[rows]).any()]
        cl = float(min(cls)) if cls else 800.0
        for name, colour, rows, which in groups:
            if not rows.size:
                continue
            aligned = readouts.aligned_beats(
                data.recording, data.beats, rows, channel=data.channel, offset_mV=data.offset_mV,
                before_ms=0.3 * cl, after_ms=0.65 * cl, max_beats=self.MAX_AVERAGED,
            )
            self.averages[name] = aligned
            faint = pg.mkPen(palette.rgba(colour, 30), width=1)
            drawn = np.unique(np.linspace(0, aligned.rows.size - 1, min(aligned.rows.size, self.MAX_DRAWN)).round().astype(int))
            # The faint beats as one item, each ending where the next begins unjoined: one path
            # to draw (and to repaint when a window over the figure closes) instead of thirty.
            # Each faint beat is thinned to about a point per pixel (their average is not).
            step = max(1, aligned.t_ms.size // self.FAINT_POINTS)
            t_ms, traces = aligned.t_ms[::step], aligned.traces[drawn][:, ::step]
            x = np.tile(t_ms, len(traces))
            join = np.ones(x.size, dtype=np.int32)
            join[t_ms.size - 1::t_ms.size] = 0
            background = self.plot.plot(x, traces.reshape(-1), pen=faint, connect=join)
            background.setDownsampling(ds=1, auto=False)  # x runs back at each beat: thinned above
            background.setClipToView(False)
            label = f"{_group_label(name)}: n = {rows.size} ({which}"
            if aligned.rows.size < rows.size:
                label += f"; median of {aligned.rows.size} spread evenly"
            self.plot.plot(aligned.t_ms, aligned.mean, pen=pg.mkPen(colour, width=2.6), name=label + ")")

    @staticmethod
    def _rows(data: FigureInput, name: str) -> tuple[np.ndarray, str]:
        """A group's beats and what they are: its summary's, else every accepted one."""
        if data.summary_rows is None:
            return _accepted_rows(data.beats, name), "accepted beats"
        rows, rule = data.summary_rows.get(name, (np.empty(0, np.int64), ""))
        whole = "all beats" if not name else "whole condition"
        return rows, whole if rule in _WHOLE_RULES else "steady window"

    def legend_texts(self) -> list[str]:
        """The legend's entries, top to bottom."""
        return [label.text for _sample, label in self.legend.items]


class PhasePlaneFigure(_Figure):
    title = "Phase plane"

    def __init__(self, parent=None) -> None:
        super().__init__(parent)
        self.plot = self.addPlot()
        _style(self.plot, ("V", "mV"), ("dV/dt", "V/s"))
        self.legend = _legend(self.plot, (-10, 10))

    def draw(self, data: FigureInput, averages: dict[str, readouts.AlignedBeats] | None = None) -> None:
        self.plot.clear()
        self.legend.clear()
        fs = data.recording.sampling_rate_hz
        colours = dict(data.groups)
        for name, aligned in (averages or {}).items():
            v, dvdt = readouts.phase_plane(aligned.mean, fs, window_ms=readouts.dvdt_window_of(data.beats, aligned.rows))
            self.plot.plot(v, dvdt, pen=pg.mkPen(colours.get(name, palette.TRACE), width=2.2),
                           name=f"{_group_label(name)}: ensemble beat (median)")
        r = data.current_row
        if 0 <= r < len(data.beats):
            one = readouts.aligned_beats(data.recording, data.beats, np.array([r]), channel=data.channel,
                                         offset_mV=data.offset_mV, before_ms=250, after_ms=500)
            v, dvdt = readouts.phase_plane(one.traces[0], fs, window_ms=readouts.dvdt_window_of(data.beats, one.rows))
            self.plot.plot(v, dvdt, pen=pg.mkPen(palette.rgba(palette.INK, 150), width=1),
                           name=f"selected beat (sweep {int(data.beats['sweep'][r])}, beat {int(data.beats['beat'][r])})")


class TimeCourseFigure(_Figure):
    title = "Time course"
    #: (column, label, unit) of the three stacked plots.
    ROWS = tuple((name, column(name).label, column(name).unit) for name in ("rate_bpm", "apd90_ms", "ddr_mV_per_s"))

    #: Width of the plots' left axes, in pixels (the same for all, so their time axes align).
    AXIS_WIDTH_PX = 62

    def __init__(self, parent=None) -> None:
        super().__init__(parent)
        self.plots: list[pg.PlotItem] = []
        self.bands: list[SpanBands] = []
        self.header = self._header()
        for i, (_col, label, unit) in enumerate(self.ROWS):
            plot = self.addPlot(row=i + 1, col=0)
            _style(plot, ("time in recording", "s") if i == len(self.ROWS) - 1 else ("", None), (label, unit))
            plot.getAxis("left").setWidth(self.AXIS_WIDTH_PX)
            plot.setXLink(self.header)
            bands = SpanBands(z=-20)
            plot.addItem(bands, ignoreBounds=True)
            self.plots.append(plot)
            self.bands.append(bands)
        self.points: list[pg.ScatterPlotItem] = []

    def _header(self) -> pg.PlotItem:
        """A thin row above the plots with a bar per condition and its name on a paper label,
        so that the names never cover a beat's point."""
        header = self.addPlot(row=0, col=0)
        header.setMenuEnabled(False)
        header.hideButtons()
        header.setMouseEnabled(x=False, y=False)
        header.hideAxis("bottom")
        axis = header.getAxis("left")
        axis.setWidth(self.AXIS_WIDTH_PX)
        axis.setStyle(showValues=False)
        axis.setTicks([[], []])  # an empty axis: it only keeps the bars in line with the plots
        axis.setPen(pg.mkPen(None))
        header.getViewBox().disableAutoRange()
        header.setYRange(0.0, 1.0, padding=0.0)
        font = QtGui.QFont()
        font.setPointSizeF(8.5)
        height = QtGui.QFontMetricsF(font).height() + 9  # the label, its margins and border
        header.setMinimumHeight(height)
        header.setMaximumHeight(height)
        #: The conditions as bars above the plots (their washes run down the plots too).
        self.condition_bars = SpanBands(z=-20)
        header.addItem(self.condition_bars, ignoreBounds=True)
        #: The conditions' names.
        self.condition_names = BandLabels(header)
        return header

    def blank(self) -> None:
        for plot, bands in zip(self.plots, self.bands):
            for item in list(plot.listDataItems()):
                plot.removeItem(item)
            bands.set_bands([], [], [])
        self.condition_bars.set_bands([], [], [])
        self.condition_names.set_labels([], [], [])

    def draw(self, data: FigureInput) -> None:
        rows = _accepted_rows(data.beats)
        t = readouts.recording_times_s(data.beats, data.recording.sweep_starts_s)[rows] if rows.size else np.empty(0)
        names = np.asarray(data.beats["condition"])[rows] if "condition" in data.beats else np.full(rows.size, "", dtype=object)
        rec = data.recording
        rec_end = rec.sweep_starts_s[-1] + rec.n_samples(rec.n_sweeps - 1) / rec.sampling_rate_hz
        for plot, bands, (col, _label, _unit) in zip(self.plots, self.bands, self.ROWS):
            for item in list(plot.listDataItems()):
                plot.removeItem(item)
            y = np.asarray(data.beats[col], dtype=float)[rows] if col in data.beats else np.full(rows.size, np.nan)
            ok = np.isfinite(y)
            # One item per condition with one brush: per-point brushes cost pyqtgraph a lot.
            for name, colour in data.groups:
                sel = ok & (names == name)
                if sel.any():
                    plot.addItem(pg.ScatterPlotItem(t[sel], y[sel], size=4, pen=None, brush=pg.mkBrush(colour)))
            bands.set_bands([s[1] for s in data.spans], [min(s[2], rec_end) for s in data.spans],
                            [palette.rgba(s[3], 40) for s in data.spans])
            plot.enableAutoRange()
        spans = [(s[1], min(s[2], rec_end)) for s in data.spans]
        self.condition_bars.set_bands([a for a, _ in spans], [b for _, b in spans], [palette.rgba(s[3], 110) for s in data.spans])
        self.condition_names.set_labels([s[0] for s in data.spans], [s[3] for s in data.spans], spans)


class PoincareFigure(_Figure):
    title = "Poincaré"

    def __init__(self, parent=None) -> None:
        super().__init__(parent)
        self.plot = self.addPlot()
        _style(self.plot, *((f"{column('cl_ms').label} {n}", column("cl_ms").unit) for n in ("n", "n+1")))
        self.plot.setAspectLocked(True)
        self.legend = _legend(self.plot, (10, 10))
        self.pairs: dict[str, tuple[np.ndarray, np.ndarray]] = {}

    def draw(self, data: FigureInput) -> None:
        self.plot.clear()
        self.legend.clear()
        self.pairs = {}
        lo, hi = math.inf, -math.inf
        for name, colour in data.groups:
            x, y = readouts.poincare_pairs(data.beats, _accepted_rows(data.beats, name))
            if not x.size:
                continue
            self.pairs[name] = (x, y)
            lo, hi = min(lo, x.min(), y.min()), max(hi, x.max(), y.max())
            self.plot.plot(x, y, pen=None, symbol="o", symbolSize=5, symbolPen=None,
                           symbolBrush=palette.rgba(colour, 170), name=f"{_group_label(name)} ({x.size} pairs)")
        if math.isfinite(lo):
            pad = 0.05 * (hi - lo) + 1.0
            self.plot.plot([lo - pad, hi + pad], [lo - pad, hi + pad], pen=pg.mkPen(palette.INK, width=1, style=QtCore.Qt.DotLine))


class DdrClFigure(_Figure):
    title = f"{column('ddr_mV_per_s').label} vs {column('cl_ms').label}"

    def __init__(self, parent=None) -> None:
        super().__init__(parent)
        self.plot = self.addPlot()
        _style(self.plot, *((column(n).label, column(n).unit) for n in ("cl_ms", "ddr_mV_per_s")))
        self.legend = _legend(self.plot, (-10, 10))
        self.fits: dict[str, readouts.LineFit] = {}

    def draw(self, data: FigureInput) -> None:
        self.plot.clear()
        self.legend.clear()
        self.fits = {}
        if "ddr_mV_per_s" not in data.beats or "cl_ms" not in data.beats:
            return
        for name, colour in data.groups:
            rows = _accepted_rows(data.beats, name)
            x = np.asarray(data.beats["cl_ms"], dtype=float)[rows]
            y = np.asarray(data.beats["ddr_mV_per_s"], dtype=float)[rows]
            ok = np.isfinite(x) & np.isfinite(y)
            if not ok.any():
                continue
            self.plot.plot(x[ok], y[ok], pen=None, symbol="o", symbolSize=5, symbolPen=None,
                           symbolBrush=palette.rgba(colour, 160))
            fit = readouts.fit_line(x, y)
            self.fits[name] = fit
            label = f"{_group_label(name)}: n={fit.n}"
            if math.isfinite(fit.slope):
                xs = np.array([x[ok].min(), x[ok].max()])
                label += f", slope {fit.slope:.3g} {column('ddr_mV_per_s').unit} per {column('cl_ms').unit}, r={fit.r:.2f}"
                self.plot.plot(xs, fit.at(xs), pen=pg.mkPen(colour, width=2.2), name=label)
            else:
                self.plot.plot([], [], pen=pg.mkPen(colour, width=2.2), name=label + " (too few for a fit)")


#: The figures in tab order: (key, class).
FIGURES = (
    ("aligned", AlignedBeatsFigure),
    ("phase_plane", PhasePlaneFigure),
    ("time_course", TimeCourseFigure),
    ("poincare", PoincareFigure),
    ("ddr_cl", DdrClFigure),
)


class FiguresPanel(QtWidgets.QWidget):
    """The figures as tabs, each with an export button; redrawn only when shown."""

    #: After a verdict, the figures wait this long for the next key before they redraw (ms).
    SETTLE_MS = 900

    def __init__(self, parent: QtWidgets.QWidget | None = None) -> None:
        super().__init__(parent)
        self.setObjectName("figures")
        layout = QtWidgets.QVBoxLayout(self)
        layout.setContentsMargins(0, 0, 0, 0)
        self.tabs = QtWidgets.QTabWidget()
        self.tabs.setDocumentMode(True)
        # Every tab reachable without scroll arrows: narrow windows shorten the titles instead.
        self.tabs.setUsesScrollButtons(False)
        self.tabs.setElideMode(QtCore.Qt.ElideRight)
        self.figures: dict[str, _Figure] = {}
        for key, cls in FIGURES:
            fig = cls()
            fig.setObjectName(f"figure_{key}")
            self.figures[key] = fig
            self.tabs.addTab(fig, cls.title)
        export = QtWidgets.QToolButton()
        export.setText("Export…")
        export.setToolTip("Save the figure shown as PNG or SVG")
        export.clicked.connect(self._export_dialog)
        self.tabs.setCornerWidget(export, QtCore.Qt.TopRightCorner)
        layout.addWidget(self.tabs)
        self._input: FigureInput | None = None
        self._dirty: set[str] = set()
        # Said in the tab's title: a label over the figure would have it all repainted.
        self._updating = TabNote(self.tabs, [cls.title for _key, cls in FIGURES])
        self._later = QtCore.QTimer(self, singleShot=True, interval=self.SETTLE_MS, timeout=self._redraw_if_needed)
        self.tabs.currentChanged.connect(lambda _i: self._redraw_if_needed())

    def set_input(self, data: FigureInput | None, *, defer: bool = False) -> None:
        """New data: the figure shown is redrawn now, the others when their tab is opened;
        None blanks every figure.

        With ``defer`` (a verdict during a review), the figure shown says it is updating and
        redraws once the review pauses for :attr:`SETTLE_MS`: keys pressed in a row cost one
        redraw, not one each.
        """
        self._input = data
        if data is None:
            for figure in self.figures.values():
                figure.blank()
            self._dirty = set()
            self._later.stop()
            self._updating.hide()
            return
        self._dirty = {key for key, _cls in FIGURES}
        if defer:
            self._updating.show()
            self._later.start()
            return
        self._later.stop()
        self._redraw_if_needed()

    def mark_updating(self) -> None:
        """The data behind the figures is changing (new data follows): say so on the figure shown."""
        if self._input is not None:
            self._updating.show()

    def pending(self) -> bool:
        """Whether a deferred redraw is waiting."""
        return self._later.isActive()

    def flush(self) -> None:
        """Run a deferred redraw now."""
        if self._later.isActive():
            self._later.stop()
            self._redraw_if_needed()

    @property
    def input(self) -> FigureInput | None:
        """What the figures are drawn from (None: blank)."""
        return self._input

    def set_current_row(self, row: int) -> None:
        """Another beat under review: only the figures that draw it (the phase plane) redraw."""
        if self._input is None or self._input.current_row == row:
            return
        self._input = replace(self._input, current_row=int(row))
        self._dirty.add("phase_plane")
        if not self._later.isActive():  # else the deferred redraw draws it
            self._redraw_if_needed()

    def current_key(self) -> str:
        return FIGURES[self.tabs.currentIndex()][0]

    def redraw(self, keys=None) -> None:
        """Draw figures now: the given keys, or all of them (for export and screenshots)."""
        if self._input is None:
            return
        keys = set(self.figures) if keys is None else set(keys)
        if "phase_plane" in keys and "aligned" in self._dirty:
            keys.add("aligned")  # the phase plane draws the aligned beats' averages
        data = self._input
        aligned = self.figures["aligned"]
        for key in sorted(keys, key=lambda k: k != "aligned"):
            if key == "phase_plane":
                self.figures[key].draw(data, aligned.averages)
            else:
                self.figures[key].draw(data)
            self._dirty.discard(key)

    def _redraw_if_needed(self) -> None:
        key = self.current_key()
        if key in self._dirty and self.isVisible():
            self.redraw({key})
        if key not in self._dirty:
            self._updating.hide()

    def showEvent(self, event) -> None:  # noqa: N802
        super().showEvent(event)
        self._redraw_if_needed()

    def export_all(self, folder: str | os.PathLike, *, fmt: str = "png", stem: str = "") -> list[str]:
        """Write every figure into a folder; returns the paths."""
        self.redraw()
        os.makedirs(folder, exist_ok=True)
        prefix = f"{stem}_" if stem else ""
        return [export_figure(fig, os.path.join(folder, f"{prefix}{key}.{fmt}")) for key, fig in self.figures.items()]

    def _export_dialog(self) -> None:
        key = FIGURES[self.tabs.currentIndex()][0]
        path, _ = QtWidgets.QFileDialog.getSaveFileName(self, "Export figure", f"{key}.png", "PNG image (*.png);;SVG drawing (*.svg)")
        if path:
            if not os.path.splitext(path)[1]:
                path += ".png"
            self.redraw({key})
            try:
                export_figure(self.figures[key], path)
            except (InputError, ValueError) as exc:  # a folder one cannot write to, another extension
                QtWidgets.QMessageBox.warning(self, "Export figure", str(exc))
