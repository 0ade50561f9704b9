"""Vertical bands across a plot's whole height: phases, rejected beats, conditions.

One graphics item draws any number of bands, so a three-minute recording's hundreds of beats
cost one item rather than hundreds of region widgets. Bands take no part in auto-ranging.
A few wide bands that must be named where they cover data (conditions) get
:class:`BandLabels`: one text item each, on a paper ground.
"""

from __future__ import annotations

import numpy as np
import pyqtgraph as pg
from PySide6 import QtCore, QtGui

from .. import palette

__all__ = ["BandLabels", "SpanBands"]


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
    whole_view : bool
        Claim the whole view while there is any band, so that a band added or removed at
        either end changes only its own part of the view (for many bands kept as pixels).
    """

    def __init__(self, *, hatch: bool = False, label_colour: str | None = None, z: float = -10,
                 label_row: int = 0, whole_view: bool = False) -> None:
        super().__init__()
        self._whole_view = bool(whole_view)
        self._t0 = np.empty(0)
        self._t1 = np.empty(0)
        self._brushes: list[QtGui.QBrush] = []
        self._hatch_brushes: list[QtGui.QBrush] = []
        self._labels: list[str] = []
        self._colour_keys: list = []
        self._hatch = hatch
        self._label_row = int(label_row)
        self._label_pen = QtGui.QPen(QtGui.QColor(label_colour)) if label_colour else None
        self._label_font = QtGui.QFont()
        self._label_font.setPointSizeF(8.5)
        self._bounds = QtCore.QRectF()
        self.setZValue(z)

    def set_bands(self, t0, t1, colours, labels=None) -> None:
        """Replace the bands. ``colours`` are RGBA tuples (one per band, or one for all).

        Only the part of the plot whose bands or labels changed is drawn again (a verdict adds
        or removes one band among many), unless the bands' overall extent changed.
        """
        before = self._drawing()
        self._t0 = np.asarray(t0, dtype=np.float64).reshape(-1)
        self._t1 = np.asarray(t1, dtype=np.float64).reshape(-1)
        n = len(self._t0)
        if len(colours) and not isinstance(colours[0], (tuple, list, QtGui.QColor, str)):
            colours = [colours] * n
        if len(colours) == 4 and isinstance(colours[0], (int, np.integer)):
            colours = [colours] * n
        cache: dict[object, tuple[QtGui.QBrush, QtGui.QBrush]] = {}
        self._brushes, self._hatch_brushes, self._colour_keys = [], [], []
        for c in colours:
            key = tuple(c) if isinstance(c, (tuple, list)) else str(c)
            if key not in cache:
                qc = QtGui.QColor(*c) if isinstance(c, (tuple, list)) else QtGui.QColor(c)
                hatch = QtGui.QColor(qc)
                hatch.setAlpha(min(255, qc.alpha() * 3))
                cache[key] = (QtGui.QBrush(qc), QtGui.QBrush(hatch, QtCore.Qt.BDiagPattern))
            self._brushes.append(cache[key][0])
            self._hatch_brushes.append(cache[key][1])
            self._colour_keys.append(key)
        self._labels = list(labels) if labels is not None else []
        bounds = self._bounds_now()
        dirty = self._changed_part(before) if bounds == self._bounds else None
        if dirty is None:
            self.prepareGeometryChange()
            self._bounds = bounds
            self.update()
        elif not dirty.isEmpty():
            self.update(dirty)

    def _drawing(self) -> tuple[set, set] | None:
        """What is drawn now: the bands ``(t0, t1, colour)`` and the labels ``(text, rect in the
        scene)``; None when the item is not in a view."""
        vr, view = self.viewRect(), self.getViewWidget()
        if vr is None or view is None:
            return None
        bands = set(zip(self._t0.tolist(), self._t1.tolist(), self._colour_keys))
        if self._label_pen is None or not self._labels:
            return bands, set()
        visible = np.flatnonzero((self._t1 >= vr.left()) & (self._t0 <= vr.right()))
        labels = {(self._labels[i], rect.getRect()) for i, rect in self._label_layout(self.sceneTransform(), vr, visible)}
        return bands, labels

    def _changed_part(self, before: tuple[set, set] | None) -> QtCore.QRectF | None:
        """The part of the item (its own coordinates) where the bands or labels drawn differ
        from ``before``; None when that cannot be told (the whole item changes)."""
        after = self._drawing()
        vr = self.viewRect()
        if before is None or after is None or vr is None:
            return None
        dirty = QtCore.QRectF()
        for t0, t1, _colour in before[0] ^ after[0]:
            dirty = dirty.united(QtCore.QRectF(t0, vr.top(), t1 - t0, vr.height()))
        changed = before[1] ^ after[1]
        if changed:
            to_item, invertible = self.sceneTransform().inverted()
            if not invertible:
                return None
            for _text, rect in changed:
                dirty = dirty.united(to_item.mapRect(QtCore.QRectF(*rect).adjusted(-2, -2, 2, 2)))
        return dirty

    def band_at(self, x: float) -> int:
        """Index of the band containing data x, or -1."""
        inside = np.flatnonzero((self._t0 <= x) & (x <= self._t1))
        return int(inside[0]) if len(inside) else -1

    def __len__(self) -> int:
        return len(self._t0)

    def spans(self) -> list[tuple[float, float, QtGui.QBrush]]:
        """``(start, end, brush)`` of each band, in data x (for exporters that draw them)."""
        return [(float(a), float(b), brush) for a, b, brush in zip(self._t0, self._t1, self._brushes)]

    # -- pyqtgraph hooks ---------------------------------------------------------------------
    def dataBounds(self, axis, frac=1.0, orthoRange=None):  # noqa: N802 (pyqtgraph API)
        return None  # never widen the view to show bands

    def viewRangeChanged(self) -> None:  # noqa: N802
        # pyqtgraph keeps the view rectangle cached until the transform changes; drop it here
        # so the bands follow the new range at once.
        self._cachedView = None
        self.prepareGeometryChange()
        self._bounds = self._bounds_now()

    def _bounds_now(self) -> QtCore.QRectF:
        vr = self.viewRect()
        if vr is None or not len(self._t0):
            return QtCore.QRectF()
        if self._whole_view:
            return QtCore.QRectF(vr)
        x0 = max(float(self._t0.min()), vr.left())
        x1 = min(float(self._t1.max()), vr.right())
        return QtCore.QRectF(x0, vr.top(), max(0.0, x1 - x0), vr.height())

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
        if self._hatch and len(visible):
            # The hatch in pixels, its pattern anchored at the view's corner: the same lines
            # whether the bands are drawn whole or one changed band at a time.
            tr = painter.transform()
            painter.save()
            painter.resetTransform()
            painter.setBrushOrigin(tr.map(vr.topLeft()).toPoint())
            for i in visible:
                rect = QtCore.QRectF(self._t0[i], top, self._t1[i] - self._t0[i], height)
                painter.fillRect(tr.mapRect(rect), self._hatch_brushes[i])
            painter.restore()
        if self._label_pen is None or not self._labels:
            return
        # Labels in pixels: scale the painter by the inverse of the data-to-pixel scale at each
        # label, so the text is neither stretched nor flipped (and stays right when the widget is
        # rendered into another device, as for screenshots).
        tr = painter.deviceTransform()
        sx, sy = tr.m11(), tr.m22()
        if sx == 0 or sy == 0:
            return
        # Baseline below the label's top; the text is placed from the band's centre in pixels.
        baseline = QtGui.QFontMetricsF(self._label_font).ascent() - self._top_px(tr, vr)
        y_data = vr.bottom() if sy < 0 else vr.top()
        for i, rect in self._label_layout(tr, vr, visible):
            centre = (self._t0[i] + self._t1[i]) / 2
            centre_px = tr.map(QtCore.QPointF(centre, y_data)).x()
            painter.save()
            painter.translate(QtCore.QPointF(centre, y_data))
            painter.scale(1.0 / sx, 1.0 / sy)
            painter.setFont(self._label_font)
            painter.setPen(self._label_pen)
            painter.drawText(QtCore.QPointF(rect.left() - centre_px, rect.top() + baseline), self._labels[i])
            painter.restore()

    # -- labels --------------------------------------------------------------------------------
    def label_rects(self) -> list[tuple[str, QtCore.QRectF]]:
        """The labels drawn now and where: ``(text, rect in scene coordinates)``, band order."""
        vr = self.viewRect()
        if self._label_pen is None or vr is None or not len(self._t0):
            return []
        view = self.getViewBox()
        if view is not None and hasattr(view, "updateMatrix"):
            view.updateMatrix()  # a new range reaches the item's transform only at the next paint
        visible = np.flatnonzero((self._t1 >= vr.left()) & (self._t0 <= vr.right()))
        return [(self._labels[i], rect) for i, rect in self._label_layout(self.sceneTransform(), vr, visible)]

    @staticmethod
    def _top_px(tr: QtGui.QTransform, vr: QtCore.QRectF) -> float:
        return min(tr.map(vr.topLeft()).y(), tr.map(vr.bottomLeft()).y())

    def _label_layout(self, tr: QtGui.QTransform, vr: QtCore.QRectF, visible: np.ndarray):
        """Where each visible band's label goes, in the pixels ``tr`` maps data to.

        A label is centred on its band. One too wide for its band (a millisecond-wide upstroke)
        spills over its neighbours' ground rather than go missing, on the next line down where
        it would cover a neighbour's label on its own; it is left out only where both lines are
        taken. A label is shifted inward where its band runs past the view's edge, so that it
        stays whole inside the view while it still starts (or ends) over its own band; such a
        shifted label is left out where it would cover its neighbour's, and so is the label of
        a band of which only a sliver is in view.
        """
        metrics = QtGui.QFontMetricsF(self._label_font)
        v0, v1 = sorted((tr.map(vr.topLeft()).x(), tr.map(vr.topRight()).x()))
        line = metrics.height() + 1
        top = self._top_px(tr, vr) + 2 + self._label_row * line
        out = []
        for i in visible:
            if i >= len(self._labels) or not self._labels[i]:
                continue
            p0, p1 = sorted((tr.map(QtCore.QPointF(self._t0[i], 0.0)).x(), tr.map(QtCore.QPointF(self._t1[i], 0.0)).x()))
            width = metrics.horizontalAdvance(self._labels[i])
            cut = p0 < v0 or p1 > v1
            if cut and min(p1, v1) - max(p0, v0) < 4:
                continue  # only a sliver of the band in view: its label would float beside it
            narrow = p1 - p0 < width + 4
            # Within the band (centred on a narrow one), then inward at the view's edges (a
            # margin of 2 px): the view wins, so a band that runs past an edge has its label
            # start (or end) at that edge, over the band's visible part.
            centred = (p0 + p1 - width) / 2 if narrow else min(max((p0 + p1 - width) / 2, p0), p1 - width)
            left = max(min(centred, v1 - 2 - width), v0 + 2)
            out.append((int(i), QtCore.QRectF(left, top, width, metrics.height()), left != centred, narrow))
        # A label shifted at an edge gives way to a neighbour it would cover (neither would read).
        placed = []
        for k, (i, rect, shifted, narrow) in enumerate(out):
            neighbours = [r for _i, r, _s, n in out[max(0, k - 1):k] + out[k + 1:k + 2] if not n]
            if shifted and any(rect.intersects(r) for r in neighbours):
                continue
            placed.append((i, rect, narrow))
        # Narrow bands' labels go where no other label is: this line, else the next.
        keep = [(i, rect) for i, rect, narrow in placed if not narrow]
        for i, rect, narrow in placed:
            if not narrow:
                continue
            for down in (0.0, line):
                moved = rect.translated(0.0, down)
                if not any(moved.intersects(r) for _j, r in keep):
                    keep.append((i, moved))
                    break
        keep.sort(key=lambda item: item[0])
        return keep


class BandLabels:
    """Names of bands along the top of a plot, each on a semi-opaque paper label bordered in its
    band's colour, so that it reads over the trace or the points beneath.

    Each label is centred on the visible part of its band and kept inside that part and the
    plot; it hides while that part is too narrow to hold it. It follows the plot's range and
    size by itself. The overview strip and the time-course figure name their conditions so.

    Parameters
    ----------
    plot : pyqtgraph.PlotItem
        The plot the labels go on (above its data: they take no part in auto-ranging).
    z : float
        Stacking order, above the data and any navigation window.
    """

    #: Opacity of the paper ground (of 255): the data beneath still shows, faintly.
    GROUND_ALPHA = 215

    def __init__(self, plot: pg.PlotItem, *, z: float = 25) -> None:
        self._plot = plot
        self._box = plot.getViewBox()
        self._z = z
        #: The labels, one per band, in band order.
        self.items: list[pg.TextItem] = []
        self._spans: list[tuple[float, float]] = []
        self._font = QtGui.QFont()
        self._font.setPointSizeF(8.5)
        self._box.sigRangeChanged.connect(lambda *_a: self.place())
        self._box.sigResized.connect(lambda *_a: self.place())

    def set_labels(self, names, colours, spans) -> None:
        """One label per band: its name, its colour (the border) and its ``(start, end)`` in x."""
        names = list(names)
        for label in self.items[len(names):]:
            self._plot.removeItem(label)
        del self.items[len(names):]
        for i, (name, colour) in enumerate(zip(names, colours)):
            if i == len(self.items):
                label = pg.TextItem(anchor=(0.5, 0.0))
                label.setZValue(self._z)
                label.textItem.document().setDocumentMargin(1.5)  # covers as little data as it can
                self._plot.addItem(label, ignoreBounds=True)
                self.items.append(label)
            label = self.items[i]
            label.setText(str(name), color=palette.INK)
            label.setFont(self._font)
            label.fill = pg.mkBrush(palette.rgba(palette.PAPER, self.GROUND_ALPHA))
            label.border = pg.mkPen(colour, width=1)
            label.update()
        self._spans = [(float(a), float(b)) for a, b in spans]
        self.place()

    def place(self) -> None:
        """Put each label at the top of the plot, centred on the visible part of its band, or
        hide it when that part is too narrow for it."""
        if not self.items:
            return
        (x0, x1), (_y0, y1) = self._box.viewRange()
        px_x, _px_y = self._box.viewPixelSize()
        if not (px_x > 0 and np.isfinite(px_x)):
            return
        for label, (a, b) in zip(self.items, self._spans):
            lo, hi = max(a, x0), min(b, x1)
            half = (label.textItem.boundingRect().width() / 2 + 3) * px_x
            if hi - lo < 2 * half:
                label.setVisible(False)
                continue
            label.setPos((lo + hi) / 2, y1)  # it fits, so centred it stays inside lo..hi
            label.setVisible(True)
