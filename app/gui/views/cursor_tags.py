"""The trace view's cursor names, drawn in pixels at the top of the cursor lines."""

from __future__ import annotations

import pyqtgraph as pg
from PySide6 import QtCore, QtGui

from .. import palette

__all__ = ["CursorTags"]


class CursorTags(pg.GraphicsObject):
    """The cursors' names at the top of their lines, drawn in pixels.

    Cheaper than pyqtgraph's line labels, which lay out rich text again on every frame of a pan.
    """

    def __init__(self, lines: list[pg.InfiniteLine]) -> None:
        super().__init__()
        self._lines = lines
        self.setZValue(21)
        for line in lines:
            line.sigPositionChanged.connect(lambda *_a: self.update())

    def dataBounds(self, axis, frac=1.0, orthoRange=None):  # noqa: N802 (pyqtgraph API)
        return None

    def viewRangeChanged(self) -> None:  # noqa: N802
        self._cachedView = None
        self.prepareGeometryChange()

    def boundingRect(self) -> QtCore.QRectF:  # noqa: N802
        vr = self.viewRect()
        return QtCore.QRectF() if vr is None else vr

    def paint(self, painter: QtGui.QPainter, *args) -> None:
        vr = self.viewRect()
        tr = painter.deviceTransform()
        sx, sy = tr.m11(), tr.m22()
        if vr is None or sx == 0 or sy == 0:
            return
        top = vr.bottom() if sy < 0 else vr.top()
        font = painter.font()
        font.setPointSizeF(8.5)
        font.setBold(True)
        for line, (colour, label) in zip(self._lines, palette.CURSORS):
            if not line.isVisible():
                continue
            painter.save()
            painter.translate(QtCore.QPointF(float(line.value()), top))
            painter.scale(1.0 / sx, 1.0 / sy)
            painter.setFont(font)
            painter.setPen(QtGui.QColor(colour))
            painter.drawText(QtCore.QPointF(3, 4 + 2 * QtGui.QFontMetrics(font).height()), label)
            painter.restore()
