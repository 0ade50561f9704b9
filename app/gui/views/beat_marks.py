"""The trace view's beat marks: markers, rejected and waiting beats, for the stretch around the view.

A 30-minute gap-free sweep holds thousands of beats; giving every marker item all of them costs
pyqtgraph a Python object per point on every verdict. :class:`BeatMarks` draws only the beats of
a stretch reaching one view width beyond each side of the view (the rest are off screen), and
draws it again when the view leaves that stretch or a verdict changes a beat in it.

Three looks: an accepted beat has its markers; a rejected beat is greyed, with a hatched band
and its reason; a beat waiting for a look (verdict ``to_review``) keeps its markers over an
amber band naming its flags.
"""

from __future__ import annotations

import numpy as np
import pyqtgraph as pg
from PySide6 import QtCore, QtGui, QtWidgets

from analysis.decisions import REJECTED, TO_REVIEW
from analysis.table import BeatTable

from .. import palette
from .bands import SpanBands

__all__ = ["MARKER_COLUMNS", "BeatMarks", "beat_extent", "column_of", "keep_as_pixels", "verdicts"]

#: Room in Qt's pixmap cache for the items :func:`keep_as_pixels` keeps (KiB).
PIXMAP_CACHE_KB = 64 * 1024

#: The marker kinds and the beat-table columns giving each marker's time and potential.
MARKER_COLUMNS = {
    "upstroke": ("t_upstroke_s", None),
    "mdp": ("t_mdp_s", "mdp_mV"),
    "top": ("t_top_s", "top_mV"),
    "peak": ("t_peak_s", "peak_mV"),
    "apd90": ("t_apd90_s", None),
}


def keep_as_pixels(*items) -> None:
    """Keep each item's rendering as pixels until the item itself or the view changes.

    A review key repaints part of the trace view (the beat left, the beat reached, a reason
    picker closed over it), and every item crossing that part would otherwise draw itself whole
    again, clipped: the trace's thousands of segments, every marker kind, the grid and the axes.
    Kept as pixels, an unchanged item is copied; only the items a verdict changed draw again.
    """
    # Each item kept costs a plot's worth of pixels in Qt's pixmap cache (10 MB by default,
    # shared by every view): room for a trace view's dozen items on a large screen.
    if QtGui.QPixmapCache.cacheLimit() < PIXMAP_CACHE_KB:
        QtGui.QPixmapCache.setCacheLimit(PIXMAP_CACHE_KB)
    for item in items:
        item.setCacheMode(QtWidgets.QGraphicsItem.CacheMode.DeviceCoordinateCache)


class MarkerItem(pg.ScatterPlotItem):
    """A marker kind's points; a change of a few points repaints only around them.

    pyqtgraph repaints a scatter item whole on any change of its points, and works its bounding
    rectangle out anew each time Qt asks (several times per repaint). Here the rectangle is kept
    until the points, their sizes or the view change, and :meth:`set_points` marks as changed
    only the points that came or went (a verdict changes one beat), unless the points' overall
    bounds moved.
    """

    def __init__(self, *args, **kwargs) -> None:
        self._rect: tuple[list, QtCore.QRectF] | None = None
        self._quiet = False
        super().__init__(*args, **kwargs)

    def set_points(self, t: np.ndarray, v: np.ndarray, rows: np.ndarray) -> None:
        """Replace the points (``rows`` is each point's data)."""
        x0, y0 = np.asarray(self.data["x"], float), np.asarray(self.data["y"], float)
        t, v = np.asarray(t, float), np.asarray(v, float)
        same_bounds = bool(x0.size and t.size) and all(
            np.nanmin(a) == np.nanmin(b) and np.nanmax(a) == np.nanmax(b) for a, b in ((x0, t), (y0, v)))
        if not same_bounds:
            self.setData(t, v, data=rows)
            return
        came = _rows_not_in(np.column_stack([t, v]), np.column_stack([x0, y0]))
        went = _rows_not_in(np.column_stack([x0, y0]), np.column_stack([t, v]))
        bounds, rect = self.bounds, self._rect
        self._quiet = True
        try:
            self.setData(t, v, data=rows)
        finally:
            self._quiet = False
        # The same bounds, so the same rectangle (pyqtgraph only forgot it).
        self.bounds[:] = bounds
        self._rect = (self.bounds, rect[1]) if rect is not None and rect[0] is bounds else None
        px, py = self.pixelVectors()
        if px is None or py is None:
            super().update()
            return
        pad_x, pad_y = (self.pixelPadding() + 2) * px.length(), (self.pixelPadding() + 2) * py.length()
        for x, y in np.concatenate([came, went]):
            super().update(QtCore.QRectF(x - pad_x, y - pad_y, 2 * pad_x, 2 * pad_y))

    def update(self, *args) -> None:
        if not self._quiet:
            super().update(*args)

    def boundingRect(self) -> QtCore.QRectF:
        kept = self._rect
        if kept is not None and kept[0] is self.bounds:
            return QtCore.QRectF(kept[1])
        rect = super().boundingRect()
        self._rect = (self.bounds, QtCore.QRectF(rect))
        return rect

    def prepareGeometryChange(self) -> None:
        if self._quiet:
            return
        self._rect = None
        super().prepareGeometryChange()


def _rows_not_in(a: np.ndarray, b: np.ndarray) -> np.ndarray:
    """The rows of ``a`` (points, one per row) that ``b`` lacks."""
    if not len(b):
        return a
    theirs = {tuple(p) for p in b.tolist()}
    return a[[tuple(p) not in theirs for p in a.tolist()]].reshape(-1, 2)


def column_of(beats: BeatTable, name: str, rows: np.ndarray) -> np.ndarray:
    """A float column at some rows (NaN where the table lacks the column)."""
    values = beats.get(name)
    if values is None:
        return np.full(len(rows), np.nan)
    return np.asarray(values, dtype=np.float64)[rows]


def verdicts(beats: BeatTable, rows: np.ndarray) -> np.ndarray:
    """Each row's verdict (``accepted``, ``rejected`` or ``to_review``); from ``accepted`` when
    the table has no ``verdict`` column (an automatic table)."""
    if "verdict" in beats:
        return np.asarray(beats["verdict"], dtype=object)[rows]
    ok = (np.asarray(beats["accepted"])[rows] != 0) if "accepted" in beats else np.ones(len(rows), bool)
    return np.where(ok, "accepted", REJECTED).astype(object)


def beat_extent(beats: BeatTable, rows: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
    """A time span covering each beat: from its MDP (or a little before the upstroke) to its
    APD90 (or a little after the peak)."""
    t_up = column_of(beats, "t_upstroke_s", rows)
    cl = column_of(beats, "cl_ms", rows) / 1e3
    lead = np.where(np.isfinite(cl), 0.35 * cl, 0.15)
    start = column_of(beats, "t_mdp_s", rows)
    start = np.where(np.isfinite(start), start, t_up - lead)
    end = column_of(beats, "t_apd90_s", rows)
    end = np.where(np.isfinite(end), end, t_up + 0.6 * lead)
    return np.minimum(start, t_up - 0.002), np.maximum(end, t_up + 0.002)


def _flag_words(flags) -> str:
    return ", ".join(w for w in str(flags).split(";") if w and w not in palette.QUIET_FLAGS)


class BeatMarks:
    """Marker items, rejection and review bands of one plot, drawn for a stretch of a sweep.

    Parameters
    ----------
    plot : pyqtgraph.PlotItem
        Where the items go.
    legend : pyqtgraph.LegendItem
        Gets one entry per marker kind and one for rejected beats.
    """

    def __init__(self, plot: pg.PlotItem, legend: pg.LegendItem) -> None:
        self.markers: dict[str, pg.ScatterPlotItem] = {}
        for kind, (label, colour, symbol, size) in palette.MARKERS.items():
            item = MarkerItem(size=size, symbol=symbol, pen=pg.mkPen(palette.INK, width=0.6),
                                      brush=pg.mkBrush(colour), name=label)
            item.setZValue(10)
            plot.addItem(item)
            legend.addItem(item, label)
            self.markers[kind] = item
        self.rejected_markers = MarkerItem(size=8, symbol="x", pen=pg.mkPen(palette.REJECTED_MARKER, width=1.5),
                                                   brush=None, name="rejected beat")
        self.rejected_markers.setZValue(9)
        plot.addItem(self.rejected_markers)
        legend.addItem(self.rejected_markers, "rejected")
        self.reject_bands = SpanBands(hatch=True, label_colour=palette.REJECTED_LABEL, z=-20, label_row=1, whole_view=True)
        self.flag_bands = SpanBands(label_colour=palette.FLAG_LABEL, z=-22, label_row=1, whole_view=True)
        for item in (self.reject_bands, self.flag_bands):
            plot.addItem(item, ignoreBounds=True)
        keep_as_pixels(*self.markers.values(), self.rejected_markers, self.reject_bands, self.flag_bands)
        self._beats: BeatTable | None = None
        self._rows = np.empty(0, dtype=np.int64)
        self._t_up = np.empty(0)
        self._v_up = np.empty(0)
        self._span = (np.inf, -np.inf)
        self._drawn: dict[str, tuple[np.ndarray, np.ndarray, np.ndarray]] = {}
        self._rejected_rows = np.empty(0, dtype=np.int64)
        self._points: dict[str, tuple[np.ndarray, np.ndarray, np.ndarray]] = {}
        self._band_keys: dict[int, tuple] = {}

    def set_beats(self, beats: BeatTable | None, rows: np.ndarray, v_up: np.ndarray, view: tuple[float, float]) -> None:
        """A sweep's beats (``rows`` in upstroke order, ``v_up`` the trace at each upstroke);
        draws the stretch around ``view`` (seconds in the sweep)."""
        self._beats = beats
        self._rows = rows
        self._t_up = column_of(beats, "t_upstroke_s", rows) if beats is not None else np.empty(0)
        self._v_up = v_up
        self._draw(*view)

    def follow(self, x0: float, x1: float) -> None:
        """The view moved: draw again when it left the stretch drawn."""
        if x0 < self._span[0] or x1 > self._span[1]:
            self._draw(x0, x1)

    def drawn(self) -> dict[str, tuple[np.ndarray, np.ndarray, np.ndarray]]:
        """What each marker kind draws: ``{kind: (t_s, v_mV, rows)}``."""
        return dict(self._drawn)

    def rejected_rows(self) -> np.ndarray:
        """Rows of the rejected beats drawn, in the order of :attr:`reject_bands`."""
        return self._rejected_rows

    def clear(self) -> None:
        self._beats, self._rows, self._t_up, self._v_up = None, np.empty(0, np.int64), np.empty(0), np.empty(0)
        self._draw(0.0, 0.0)

    def _draw(self, x0: float, x1: float) -> None:
        width = max(x1 - x0, 1e-3)
        lo, hi = x0 - width, x1 + width
        self._span = (lo, hi)
        b = self._beats
        a, z = np.searchsorted(self._t_up, lo), np.searchsorted(self._t_up, hi, side="right")
        # A beat reaches back to its MDP: one more on the left keeps its band whole.
        a = max(0, a - 1)
        rows = self._rows[a:z]
        self._drawn = {}
        if b is None or not rows.size:
            for item in (*self.markers.values(), self.rejected_markers):
                item.setData([], [])
            for bands in (self.reject_bands, self.flag_bands):
                bands.set_bands([], [], [])
            self._points, self._band_keys = {}, {}
            self._rejected_rows = np.empty(0, np.int64)
            return
        verdict = verdicts(b, rows)
        shown = verdict != REJECTED
        v_up = self._v_up[a:z]
        apd90_v = column_of(b, "peak_mV", rows) - 0.9 * column_of(b, "apa_mV", rows)
        for kind, (t_name, v_name) in MARKER_COLUMNS.items():
            t = column_of(b, t_name, rows)
            v = v_up if kind == "upstroke" else apd90_v if kind == "apd90" else column_of(b, v_name, rows)
            ok = shown & np.isfinite(t) & np.isfinite(v)
            self._set_points(kind, self.markers[kind], t[ok], v[ok], rows[ok])
        rej = rows[~shown]
        self._rejected_rows = rej
        self._set_points("rejected", self.rejected_markers, column_of(b, "t_upstroke_s", rej), v_up[~shown], rej)
        self._drawn.pop("rejected")
        start, end = beat_extent(b, rej)
        reasons = b.get("reject_reason")
        labels = [f"✕ {reasons[r]}" if reasons is not None and reasons[r] else "✕ rejected" for r in rej]
        self._set_bands(self.reject_bands, start, end, [palette.REJECTED_BAND] * len(rej), labels)
        # Beats waiting for a look, and accepted beats with flags the review should see.
        flags = np.asarray(b["flags"], dtype=object)[rows] if "flags" in b else np.full(rows.size, "", dtype=object)
        words = [_flag_words(f) for f in flags]
        waiting = verdict == TO_REVIEW
        marked = (np.array([bool(w) for w in words], dtype=bool) & shown) | waiting
        fa, fe = beat_extent(b, rows[marked])
        labels = [("? to review: " if wait else "⚑ ") + (w or "flagged")
                  for w, wait, m in zip(words, waiting, marked) if m]
        colours = [palette.REVIEW_BAND if wait else palette.FLAG_BAND for wait, m in zip(waiting, marked) if m]
        self._set_bands(self.flag_bands, fa, fe, colours, labels)

    def _set_points(self, kind: str, item: MarkerItem, t: np.ndarray, v: np.ndarray, rows: np.ndarray) -> None:
        """Give a marker item its points, unless it has them already (a verdict changes one
        beat: the other kinds keep theirs, and pyqtgraph builds nothing again)."""
        before = self._points.get(kind)
        if before is None or not all(np.array_equal(a, b, equal_nan=True) for a, b in zip(before, (t, v, rows))):
            item.set_points(t, v, rows)
            self._points[kind] = (t, v, rows)
        self._drawn[kind] = (t, v, rows)

    def _set_bands(self, bands: SpanBands, t0, t1, colours, labels) -> None:
        key = (np.asarray(t0).tobytes(), np.asarray(t1).tobytes(), [tuple(c) for c in colours], list(labels))
        if self._band_keys.get(id(bands)) != key:
            bands.set_bands(t0, t1, colours, labels)
            self._band_keys[id(bands)] = key
