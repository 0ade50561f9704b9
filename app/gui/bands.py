"""Vertical bands across a plot's whole height: phases, rejected beats, conditions.

One graphics item draws any number of bands, so a three-minute recording's hundreds of beats
cost one item rather than hundreds of region widgets. Bands take no part in auto-ranging.
"""

from __future__ import annotations

import numpy as np
import pyqtgraph as pg
from PySide6 import QtCore, QtGui

__all__ = ["SpanBands"]


class SpanBands(pg.GraphicsObject):
    """Bands from ``t0[i]`` to ``t1[i]`` in data x, filled with ``colours[i]``.

    Parameters
    ----------
    hatch : bool
        Overlay a diagonal hatch (used for rejected beats, so they stay distinct in grey print).
    label_colour : str or None
        Colour of the per-band labels, drawn along the top when a band is wide enough.
    """

    def __init__(self, *, hatch: bool = False, label_colour: str | None = None, z: float = -10) -> None:
        super().__init__()
        self._t0 = np.empty(0)
        self._t1 = np.empty(0)
        self._brushes: list[QtGui.QBrush] = []
        self._hatch_brushes: list[QtGui.QBrush] = []
        self._labels: list[str] = []
        self._hatch = hatch
        self._label_pen = QtGui.QPen(QtGui.QColor(label_colour)) if label_colour else None
        self._bounds = QtCore.QRectF()
        self.setZValue(z)

    def set_bands(self, t0, t1, colours, labels=None) -> None:
        """Replace the bands. ``colours`` are RGBA tuples (one per band, or one for all)."""
        self._t0 = np.asarray(t0, dtype=np.float64).reshape(-1)
        self._t1 = np.asarray(t1, dtype=np.float64).reshape(-1)
        n = len(self._t0)
        if len(colours) and not isinstance(colours[0], (tuple, list, QtGui.QColor, str)):
            colours = [colours] * n
        if len(colours) == 4 and isinstance(colours[0], (int, np.integer)):
            colours = [colours] * n
        cache: dict[object, tuple[QtGui.QBrush, QtGui.QBrush]] = {}
        self._brushes, self._hatch_brushes = [], []
        for c in colours:
            key = tuple(c) if isinstance(c, (tuple, list)) else str(c)
            if key not in cache:
                qc = QtGui.QColor(*c) if isinstance(c, (tuple, list)) else QtGui.QColor(c)
                hatch = QtGui.QColor(qc)
                hatch.setAlpha(min(255, qc.alpha() * 3))
                cache[key] = (QtGui.QBrush(qc), QtGui.QBrush(hatch, QtCore.Qt.BDiagPattern))
            self._brushes.append(cache[key][0])
            self._hatch_brushes.append(cache[key][1])
        self._labels = list(labels) if labels is not None else []
        self.prepareGeometryChange()
        self._update_bounds()
        self.update()

    def band_at(self, x: float) -> int:
        """Index of the band containing data x, or -1."""
        inside = np.flatnonzero((self._t0 <= x) & (x <= self._t1))
        return int(inside[0]) if len(inside) else -1

    def __len__(self) -> int:
        return len(self._t0)

    # -- pyqtgraph hooks ---------------------------------------------------------------------
    def dataBounds(self, axis, frac=1.0, orthoRange=None):  # noqa: N802 (pyqtgraph API)
        return None  # never widen the view to show bands

    def viewRangeChanged(self) -> None:  # noqa: N802
        self.prepareGeometryChange()
        self._update_bounds()

    def _update_bounds(self) -> None:
        vr = self.viewRect()
        if vr is None or not len(self._t0):
            self._bounds = QtCore.QRectF()
            return
        x0 = max(float(self._t0.min()), vr.left())
        x1 = min(float(self._t1.max()), vr.right())
        self._bounds = QtCore.QRectF(x0, vr.top(), max(0.0, x1 - x0), vr.height())

    def boundingRect(self) -> QtCore.QRectF:  # noqa: N802
        return self._bounds

    def paint(self, painter: QtGui.QPainter, *args) -> None:
        vr = self.viewRect()
        if vr is None or not len(self._t0):
            return
        visible = np.flatnonzero((self._t1 >= vr.left()) & (self._t0 <= vr.right()))
        painter.setPen(QtCore.Qt.NoPen)
        top, height = vr.top(), vr.height()
        for i in visible:
            rect = QtCore.QRectF(self._t0[i], top, self._t1[i] - self._t0[i], height)
            painter.fillRect(rect, self._brushes[i])
            if self._hatch:
                painter.fillRect(rect, self._hatch_brushes[i])
        if self._label_pen is None or not self._labels:
            return
        # Labels in device pixels so the text is not stretched by the data scale.
        tr = painter.deviceTransform()
        painter.save()
        painter.resetTransform()
        painter.setPen(self._label_pen)
        font = painter.font()
        font.setPointSizeF(8.5)
        painter.setFont(font)
        metrics = QtGui.QFontMetrics(font)
        y_top = tr.map(QtCore.QPointF(vr.left(), vr.bottom())).y()
        y_bottom = tr.map(QtCore.QPointF(vr.left(), vr.top())).y()
        y = min(y_top, y_bottom) + metrics.ascent() + 2
        for i in visible:
            if i >= len(self._labels) or not self._labels[i]:
                continue
            a = tr.map(QtCore.QPointF(self._t0[i], 0)).x()
            b = tr.map(QtCore.QPointF(self._t1[i], 0)).x()
            width = metrics.horizontalAdvance(self._labels[i])
            if abs(b - a) >= width + 4:
                painter.drawText(QtCore.QPointF((a + b - width) / 2, y), self._labels[i])
        painter.restore()
