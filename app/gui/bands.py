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
    label_row : int
        Which line from the top the labels go on (so several kinds of band can be labelled).
    """

    def __init__(self, *, hatch: bool = False, label_colour: str | None = None, z: float = -10,
                 label_row: int = 0) -> None:
        super().__init__()
        self._t0 = np.empty(0)
        self._t1 = np.empty(0)
        self._brushes: list[QtGui.QBrush] = []
        self._hatch_brushes: list[QtGui.QBrush] = []
        self._labels: list[str] = []
        self._hatch = hatch
        self._label_row = int(label_row)
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
        # pyqtgraph keeps the view rectangle cached until the transform changes; drop it here
        # so the bands follow the new range at once.
        self._cachedView = None
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
        # Labels in pixels: scale the painter by the inverse of the data-to-pixel scale at each
        # label, so the text is neither stretched nor flipped (and stays right when the widget is
        # rendered into another device, as for screenshots).
        tr = painter.deviceTransform()
        sx, sy = tr.m11(), tr.m22()
        if sx == 0 or sy == 0:
            return
        font = painter.font()
        font.setPointSizeF(8.5)
        metrics = QtGui.QFontMetrics(font)
        y_screen_top = vr.bottom() if sy < 0 else vr.top()
        for i in visible:
            if i >= len(self._labels) or not self._labels[i]:
                continue
            width = metrics.horizontalAdvance(self._labels[i])
            if abs((self._t1[i] - self._t0[i]) * sx) < width + 4:
                continue
            painter.save()
            painter.translate(QtCore.QPointF((self._t0[i] + self._t1[i]) / 2, y_screen_top))
            painter.scale(1.0 / sx, 1.0 / sy)
            painter.setFont(font)
            painter.setPen(self._label_pen)
            y = metrics.ascent() + 2 + self._label_row * (metrics.height() + 1)
            painter.drawText(QtCore.QPointF(-width / 2, y), self._labels[i])
            painter.restore()
