"""The trace view: one sweep of the membrane potential with every beat's markers.

Drawn with pyqtgraph's clip-to-view and peak downsampling over samples that
:class:`~app.gui.views.trace_data.SweepLevels` loads for the visible span only. Each beat shows its
upstroke, MDP, take-off, peak and APD90 markers, drawn where the core put them; rejected beats are
greyed over a hatched band with their reason (and on hover); the action-potential phases can be
washed in behind the trace.
"""

from __future__ import annotations

import numpy as np
import pyqtgraph as pg
from PySide6 import QtCore, QtGui, QtWidgets

from analysis.beats import phase_spans
from analysis.columns import column
from analysis.table import BeatTable

from .. import palette
from .bands import SpanBands
from .beat_marks import (
    MARKER_COLUMNS,
    BeatMarks,
    beat_extent,
    column_of,
    keep_as_pixels,
)
from .cursor_tags import CursorTags
from .trace_data import DrawData, SweepLevels

__all__ = ["TraceView", "MARKER_COLUMNS", "DEFAULT_WINDOW_S"]

#: The trace view's initial width (a dozen beats of a nodal-like cell), in seconds.
DEFAULT_WINDOW_S = 10.0
#: With more beats than this in view, markers and phases are left out: at that density they
#: are a smear, and drawing thousands of symbols would slow panning (rejections stay shown).
MAX_DETAILED_BEATS = 400


class TraceView(pg.PlotWidget):
    """One sweep of one channel, its beats' markers, phases, rejections and two cursors.

    Signals
    -------
    beat_clicked(int)
        Row (in the full beat table) of the beat the user clicked.
    cursors_finished(float, float)
        Cursor times (seconds in the sweep) when a cursor drag ends.
    view_changed(float, float)
        The visible time span (seconds in the sweep), whenever it changes.
    """

    beat_clicked = QtCore.Signal(int)
    #: The view's own right-click menu asks the window for these (so menu, toolbar and keys agree).
    phases_toggled = QtCore.Signal(bool)
    cursors_toggled = QtCore.Signal(bool)
    cursors_finished = QtCore.Signal(float, float)
    view_changed = QtCore.Signal(float, float)
    first_paint = QtCore.Signal()

    def __init__(self, parent: QtWidgets.QWidget | None = None) -> None:
        super().__init__(parent, background=palette.PAPER)
        self.setObjectName("trace_view")
        self._levels: SweepLevels | None = None
        self._drawn: DrawData | None = None
        self._beats: BeatTable | None = None
        self._rows = np.empty(0, dtype=np.int64)
        self._offset_mV = 0.0
        self._current_row = -1
        self._painted = False
        self._upstrokes_sorted = np.empty(0)
        self._detailed = True
        self._phases_wanted = False
        self._phases_stale = True

        plot = self.getPlotItem()
        # A grid item rather than the axes' own grid lines: those are replayed from a picture on
        # every frame and cost more than the trace itself while panning.
        grid = pg.GridItem(pen=pg.mkPen(palette.GRID), textPen=None)
        grid.setZValue(-50)
        # Kept as pixels between moves of the view (see :func:`keep_as_pixels`).
        keep_as_pixels(grid)
        plot.addItem(grid, ignoreBounds=True)
        plot.setLabel("bottom", "time in sweep", units="s")
        plot.setMenuEnabled(False)
        for axis in ("left", "bottom"):
            plot.getAxis(axis).setPen(palette.INK)
            plot.getAxis(axis).setTextPen(palette.INK)
        self.vb = plot.getViewBox()
        self.vb.setMouseMode(pg.ViewBox.PanMode)
        self.vb.disableAutoRange()

        self.curve = pg.PlotDataItem(pen=pg.mkPen(palette.TRACE, width=palette.TRACE_WIDTH), skipFiniteCheck=True)
        # The plot hands its own clip and downsampling modes to every curve it adds, so they are
        # set on the plot (the item's constructor options would be overwritten).
        plot.setClipToView(True)
        plot.setDownsampling(auto=True, mode="peak")
        plot.addItem(self.curve)
        keep_as_pixels(self.curve.curve)

        self.phase_bands = SpanBands(label_colour=palette.INK, z=-30)
        self.current_band = SpanBands(z=-25)
        for item in (self.phase_bands, self.current_band):
            plot.addItem(item, ignoreBounds=True)
        keep_as_pixels(self.phase_bands, *(plot.getAxis(a) for a in ("left", "bottom")))
        self.phase_bands.setVisible(False)

        # The legend sits in a title row above the data, in one line, so it never hides a beat.
        plot.setTitle(" ", size="13pt")
        self.legend = pg.LegendItem(colCount=len(palette.MARKERS) + 1, labelTextColor=palette.INK,
                                    labelTextSize="9pt", horSpacing=14, verSpacing=-6)
        self.legend.setParentItem(plot)
        self.legend.anchor(itemPos=(1, 0), parentPos=(1, 0), offset=(-6, -2))
        self.marks = BeatMarks(plot, self.legend)
        self.markers = self.marks.markers
        self.rejected_markers = self.marks.rejected_markers
        self.reject_bands = self.marks.reject_bands
        self.flag_bands = self.marks.flag_bands
        self._v_up_of: tuple[object, bytes, np.ndarray] | None = None

        self.cursor_lines: list[pg.InfiniteLine] = []
        for colour, label in palette.CURSORS:
            line = pg.InfiniteLine(
                angle=90, movable=True, pen=pg.mkPen(colour, width=1.5, style=QtCore.Qt.DashLine),
                hoverPen=pg.mkPen(colour, width=3),
            )
            line.setZValue(20)
            line.setVisible(False)
            line.sigPositionChangeFinished.connect(self._emit_cursors)
            plot.addItem(line, ignoreBounds=True)
            self.cursor_lines.append(line)
        self.cursor_tags = CursorTags(self.cursor_lines)
        self.gate_line = pg.LabelItem(" ", justify="left")
        plot.layout.addItem(self.gate_line, 5, 1)
        self.gate_line.setVisible(False)
        plot.addItem(self.cursor_tags, ignoreBounds=True)

        self.vb.sigXRangeChanged.connect(self._on_x_range)
        self.scene().sigMouseMoved.connect(self._on_mouse_moved)
        self.scene().sigMouseClicked.connect(self._on_mouse_clicked)

    # -- data ----------------------------------------------------------------------------------
    @property
    def levels(self) -> SweepLevels | None:
        return self._levels

    def set_sweep(self, levels: SweepLevels, *, label: str = "V", units: str = "mV",
                  offset_mV: float = 0.0, window_s: float | None = None) -> None:
        """Show a sweep (its drawable samples in ``levels``), starting at its beginning.

        ``offset_mV`` is subtracted from the samples drawn (the liquid-junction-potential
        correction the analysis applied), so the trace and the markers agree.
        """
        self._levels = levels
        self._drawn = None
        self._offset_mV = float(offset_mV)
        self.curve.setPos(0.0, -self._offset_mV)
        self.getPlotItem().setLabel("left", label, units=units)
        width = min(levels.duration_s, window_s or DEFAULT_WINDOW_S)
        pad = 0.02 * levels.duration_s
        self.vb.setLimits(xMin=-pad, xMax=levels.duration_s + pad, minXRange=20.0 / levels.fs_hz)
        self.vb.setXRange(0.0, width, padding=0.0)
        self._refresh_curve(force=True)
        self.fit_y()
        self._update_beats()

    def set_beats(self, beats: BeatTable | None) -> None:
        """The beat table of the whole recording and channel; the view shows its sweep's rows."""
        self._beats = beats
        self._update_beats()

    def set_offset(self, offset_mV: float) -> None:
        self._offset_mV = float(offset_mV)
        self.curve.setPos(0.0, -self._offset_mV)
        self._update_beats()

    def refresh_samples(self) -> None:
        """Reload the drawn samples (for example when the envelope has just been built)."""
        self._refresh_curve(force=True)

    def sweep_rows(self) -> np.ndarray:
        """Rows of the beat table in the sweep shown, in upstroke order."""
        return self._rows

    def drawn_markers(self) -> dict[str, tuple[np.ndarray, np.ndarray, np.ndarray]]:
        """What each marker kind draws (beats not rejected, around the view): ``{kind: (t_s,
        v_mV, rows)}``."""
        return self.marks.drawn()

    # -- view ----------------------------------------------------------------------------------
    def x_range(self) -> tuple[float, float]:
        (x0, x1), _ = self.vb.viewRange()
        return float(x0), float(x1)

    def show_span(self, t0_s: float, t1_s: float) -> None:
        self.vb.setXRange(t0_s, t1_s, padding=0.0)

    def fit_y(self) -> None:
        """Fit the potential axis to the samples now drawn."""
        if self._drawn is None or not len(self._drawn.y):
            return
        x0, x1 = self.x_range()
        sel = (self._drawn.x_s >= x0) & (self._drawn.x_s <= x1)
        y = self._drawn.y[sel] if sel.any() else self._drawn.y
        lo, hi = float(np.nanmin(y)) - self._offset_mV, float(np.nanmax(y)) - self._offset_mV
        pad = max(0.08 * (hi - lo), 1.0)
        self.vb.setYRange(lo - pad, hi + 1.8 * pad, padding=0.0)  # room at the top for labels

    def set_phases_visible(self, visible: bool) -> None:
        self._phases_wanted = bool(visible)
        if self._phases_wanted and self._phases_stale:
            self._update_phases()
        self.phase_bands.setVisible(self._phases_wanted and self._detailed)

    def phases_visible(self) -> bool:
        """Whether phases are switched on (they hide while too many beats are in view)."""
        return self._phases_wanted

    def set_current_beat(self, row: int, *, follow: bool = True) -> None:
        """Highlight a beat (row of the full table); with ``follow``, scroll it into view."""
        self._current_row = int(row)
        if self._beats is None or row < 0 or not np.any(self._rows == row):
            self.current_band.set_bands([], [], [])
            return
        t_up = float(self._beats["t_upstroke_s"][row])
        a, b = self._beat_extent(np.array([row]))
        self.current_band.set_bands(a, b, [palette.CURRENT_BAND])
        if follow:
            x0, x1 = self.x_range()
            if not (x0 + 0.05 * (x1 - x0) <= t_up <= x1 - 0.05 * (x1 - x0)):
                half = (x1 - x0) / 2
                self.show_span(t_up - half, t_up + half)

    # -- cursors -------------------------------------------------------------------------------
    def set_cursors_visible(self, visible: bool) -> None:
        if visible and not self.cursor_lines[0].isVisible():
            x0, x1 = self.x_range()
            self.set_cursor_times(x0 + (x1 - x0) / 3, x0 + 2 * (x1 - x0) / 3, emit=False)
        for line in self.cursor_lines:
            line.setVisible(bool(visible))
        self.cursor_tags.update()
        if visible:
            self._emit_cursors()

    def cursors_visible(self) -> bool:
        return self.cursor_lines[0].isVisible()

    def cursor_times(self) -> tuple[float, float]:
        a, b = (float(line.value()) for line in self.cursor_lines)
        return (a, b) if a <= b else (b, a)

    def set_cursor_times(self, t0_s: float, t1_s: float, *, emit: bool = True) -> None:
        self.cursor_lines[0].setValue(t0_s)
        self.cursor_lines[1].setValue(t1_s)
        if emit:
            self._emit_cursors()

    def set_readout_text(self, text: str) -> None:
        """The gates' one-line readout in its own row under the time axis ("" clears it), so it
        covers neither the trace nor the legend."""
        self.gate_line.setText(text or " ", justify="left", size="9pt", color=palette.INK)
        self.gate_line.setVisible(bool(text))

    def readout_line(self) -> str:
        return self.gate_line.text if self.gate_line.isVisible() else ""

    def _emit_cursors(self, *_args) -> None:
        self.cursors_finished.emit(*self.cursor_times())

    # -- drawing -------------------------------------------------------------------------------
    def _on_x_range(self, *_args) -> None:
        self._refresh_curve()
        self.marks.follow(*self.x_range())
        self._update_detail()
        self.view_changed.emit(*self.x_range())

    def beats_in_view(self) -> int:
        if not len(self._upstrokes_sorted):
            return 0
        x0, x1 = self.x_range()
        return int(np.searchsorted(self._upstrokes_sorted, x1) - np.searchsorted(self._upstrokes_sorted, x0))

    def _update_detail(self) -> None:
        detailed = self.beats_in_view() <= MAX_DETAILED_BEATS
        if detailed != self._detailed:
            self._detailed = detailed
            for item in self.markers.values():
                item.setVisible(detailed)
            self.phase_bands.setVisible(detailed and self._phases_wanted)

    def _refresh_curve(self, force: bool = False) -> None:
        if self._levels is None:
            return
        x0, x1 = self.x_range()
        width = max(1, int(self.vb.width()))
        if force or self._levels.needs_reload(self._drawn, x0, x1, width):
            self._drawn = self._levels.for_view(x0, x1, width)
            self.curve.setData(self._drawn.x_s, self._drawn.y)

    def paintEvent(self, event: QtGui.QPaintEvent) -> None:  # noqa: N802
        super().paintEvent(event)
        if not self._painted and self._drawn is not None:
            self._painted = True
            self.first_paint.emit()

    def _beat_extent(self, rows: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
        return beat_extent(self._beats, rows)

    def _upstroke_levels(self, rows: np.ndarray) -> np.ndarray:
        """The trace at each beat's upstroke (kept while the sweep and the upstrokes stay:
        a verdict reads no sample)."""
        b, levels = self._beats, self._levels
        if "i_upstroke" in b:
            i_up = np.asarray(b["i_upstroke"], dtype=np.int64)[rows]
        else:
            i_up = np.round(column_of(b, "t_upstroke_s", rows) * levels.fs_hz).astype(np.int64)
        key = i_up.tobytes()
        if self._v_up_of is None or self._v_up_of[0] is not levels or self._v_up_of[1] != key:
            self._v_up_of = (levels, key, levels.value_at(i_up) if len(rows) else np.empty(0))
        return self._v_up_of[2] - self._offset_mV

    def _update_beats(self) -> None:
        b, levels = self._beats, self._levels
        if b is None or levels is None or not len(b) or "t_upstroke_s" not in b:
            self._rows = np.empty(0, dtype=np.int64)
            self._upstrokes_sorted = np.empty(0)
            self.marks.clear()
            for bands in (self.phase_bands, self.current_band):
                bands.set_bands([], [], [])
            return
        sweeps = np.asarray(b["sweep"]) if "sweep" in b else np.zeros(len(b), dtype=np.int64)
        rows = np.flatnonzero(sweeps == levels.sweep)
        rows = rows[np.argsort(np.asarray(b["t_upstroke_s"])[rows], kind="stable")]
        self._rows = rows
        self._upstrokes_sorted = np.asarray(b["t_upstroke_s"], dtype=np.float64)[rows]
        self.marks.set_beats(b, rows, self._upstroke_levels(rows), self.x_range())
        self._phases_stale = True
        if self._phases_wanted:
            self._update_phases()
        self.set_current_beat(self._current_row, follow=False)
        self._update_detail()

    def _update_phases(self) -> None:
        """Phase spans of the sweep's beats (phase 1 found in the samples), when shown."""
        self._phases_stale = False
        b, levels = self._beats, self._levels
        if b is None or levels is None or not len(self._rows):
            self.phase_bands.set_bands([], [], [])
            return
        rec, ch, offset = levels.recording, levels.channel, self._offset_mV
        spans = phase_spans(b, rows=self._rows, fs_hz=levels.fs_hz,
                            samples=lambda sweep, a, z: rec.sweep(sweep, ch, start=a, stop=z) - offset)
        self.phase_bands.set_bands(
            spans.t0_s, spans.t1_s, [palette.PHASES[int(p)] for p in spans.phase],
            [str(int(p)) for p in spans.phase],
        )

    # -- hover and click -----------------------------------------------------------------------
    def beat_at(self, t_s: float) -> int:
        """Row of the beat whose span holds ``t_s`` (else the nearest upstroke), or -1."""
        if self._beats is None or not len(self._rows):
            return -1
        a, e = self._beat_extent(self._rows)
        inside = np.flatnonzero((a <= t_s) & (t_s <= e))
        if len(inside):
            return int(self._rows[inside[0]])
        t_up = column_of(self._beats, "t_upstroke_s", self._rows)
        return int(self._rows[int(np.nanargmin(np.abs(t_up - t_s)))])

    def describe_beat(self, row: int) -> str:
        """Tooltip text of one beat: its number, decision and main values."""
        b = self._beats
        r = b.row(row)
        head = f"sweep {r.get('sweep', 0)}, beat {r.get('beat', row)}"
        if "accepted" in r and not r["accepted"]:
            reason = r.get("reject_reason") or "no reason given"
            head += f" — REJECTED: {reason}"
        parts = []
        for name in ("cl_ms", "mdp_mV", "dvdt_max_V_per_s", "apd90_ms"):
            value = r.get(name)
            if isinstance(value, float) and np.isfinite(value):
                parts.append(f"{column(name).label} {value:.1f} {column(name).unit}")
        flags = r.get("flags")
        if flags:
            parts.append(f"flags: {flags}")
        return head + ("\n" + ", ".join(parts) if parts else "")

    def _on_mouse_moved(self, pos: QtCore.QPointF) -> None:
        if self._beats is None or not self.vb.sceneBoundingRect().contains(pos):
            return
        t = self.vb.mapSceneToView(pos).x()
        band = self.reject_bands.band_at(t)
        if band >= 0:
            rej = self.marks.rejected_rows()
            if band < len(rej):
                QtWidgets.QToolTip.showText(QtGui.QCursor.pos(), self.describe_beat(int(rej[band])), self)
                return
        QtWidgets.QToolTip.hideText()

    def view_menu(self) -> QtWidgets.QMenu:
        """The right-click menu of the view: phases, cursors, fit and whole sweep."""
        menu = QtWidgets.QMenu(self)
        phases = menu.addAction("Phases (4, 0, 1, 2, 3)")
        phases.setCheckable(True)
        phases.setChecked(self.phases_visible())
        phases.toggled.connect(self.phases_toggled)
        cursors = menu.addAction("Gates")
        cursors.setCheckable(True)
        cursors.setChecked(self.cursors_visible())
        cursors.toggled.connect(self.cursors_toggled)
        menu.addSeparator()
        menu.addAction("Fit voltage", self.fit_y)
        if self._levels is not None:
            menu.addAction("Whole sweep", lambda: self.show_span(0.0, self._levels.duration_s))
        return menu

    def _on_mouse_clicked(self, event) -> None:
        if event.button() == QtCore.Qt.RightButton and self.vb.sceneBoundingRect().contains(event.scenePos()):
            event.accept()
            self.view_menu().popup(QtGui.QCursor.pos())
            return
        if event.button() != QtCore.Qt.LeftButton or not self.vb.sceneBoundingRect().contains(event.scenePos()):
            return
        row = self.beat_at(self.vb.mapSceneToView(event.scenePos()).x())
        if row >= 0:
            self.beat_clicked.emit(row)
