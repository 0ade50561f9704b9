"""A figure of the plots panel as SVG, written from the items its plots hold.

Qt's SVG generator is not used for figures: rasterised by an independent renderer (librsvg), and
by Qt's own, its files put the axes out of line with the data. It replays pyqtgraph's recorded
axis pictures at its 72 dpi, so axes, ticks and grid came out at 3/4 of their size; each scatter
point became the whole symbol atlas squeezed into one point's square; and in SVG 1.1 mode its
clip paths land on the wrong elements, so that other renderers drop the axes and the grid.

Here each element is placed with the item's own scene transform, the mapping the screen and the
PNG export use: pyqtgraph's axis layout (ticks, grid lines, tick labels) as its draw specs give
it, curves and points from the data the items hold, condition bands, labels and legends. Items
under a view are clipped to it. :func:`figure_svg` writes a figure; items it does not know are
listed by :func:`unknown_items` (none in the app's figures).
"""

from __future__ import annotations

import numpy as np
import pyqtgraph as pg
import pyqtgraph.exporters  # noqa: F401  (the exporters' paint order)
from pyqtgraph.graphicsItems.LegendItem import ItemSample
from pyqtgraph.graphicsItems.ScatterPlotItem import Symbols
from pyqtgraph.graphicsItems.ViewBox.ViewBox import ChildGroup
from PySide6 import QtCore, QtGui, QtWidgets

from ...svg.elements import attr, document, escape, num, points, rgba, thin_columns
from ..views.bands import SpanBands

__all__ = ["figure_svg", "unknown_items"]

#: Items that draw nothing themselves (their children do), and pyqtgraph's hover button (a
#: control, not part of the figure).
_SILENT = (pg.PlotItem, pg.ViewBox, pg.GraphicsLayout, pg.PlotDataItem, pg.LabelItem, pg.ButtonItem,
           pg.ItemGroup, ChildGroup)
_GraphicsItem = QtWidgets.QGraphicsItem


def _paint_order(root: _GraphicsItem) -> list[_GraphicsItem]:
    """The items under ``root`` in the order Qt paints them (pyqtgraph's exporters' order)."""
    return pg.exporters.SVGExporter(root).getPaintItems(root)


def _colour(colour: QtGui.QColor) -> tuple[str, str | None]:
    return rgba(colour.red(), colour.green(), colour.blue(), colour.alpha())


def _stroke(pen: QtGui.QPen | None) -> str | None:
    """Stroke attributes of a pen (cosmetic: its width in pixels), or None for no line."""
    if pen is None or pen.style() == QtCore.Qt.NoPen or pen.color().alpha() == 0:
        return None
    colour, opacity = _colour(pen.color())
    width = pen.widthF() or 1.0
    out = f'stroke="{colour}" stroke-width="{num(width)}"'
    if opacity is not None:
        out += f' stroke-opacity="{opacity}"'
    dashes = {QtCore.Qt.DotLine: (1, 2), QtCore.Qt.DashLine: (4, 2), QtCore.Qt.DashDotLine: (4, 2, 1, 2)}
    if pen.style() in dashes:
        out += ' stroke-dasharray="' + ",".join(num(d * width) for d in dashes[pen.style()]) + '"'
    caps = {QtCore.Qt.FlatCap: "butt", QtCore.Qt.RoundCap: "round", QtCore.Qt.SquareCap: "square"}
    joins = {QtCore.Qt.MiterJoin: "miter", QtCore.Qt.RoundJoin: "round", QtCore.Qt.BevelJoin: "bevel"}
    return out + f' stroke-linecap="{caps.get(pen.capStyle(), "butt")}" stroke-linejoin="{joins.get(pen.joinStyle(), "miter")}"'


def _fill(brush: QtGui.QBrush | None) -> str:
    if brush is None or brush.style() == QtCore.Qt.NoBrush or brush.color().alpha() == 0:
        return 'fill="none"'
    colour, opacity = _colour(brush.color())
    return f'fill="{colour}"' + (f' fill-opacity="{opacity}"' if opacity is not None else "")


def _font_attrs(font: QtGui.QFont) -> str:
    info = QtGui.QFontInfo(font)
    size_px = font.pixelSize() if font.pixelSize() > 0 else font.pointSizeF() * _dpi() / 72.0
    out = f'font-family={attr(f"{info.family()}, sans-serif")} font-size="{num(size_px)}"'
    if font.bold():
        out += ' font-weight="bold"'
    if font.italic():
        out += ' font-style="italic"'
    return out


def _dpi() -> float:
    screen = QtGui.QGuiApplication.primaryScreen()
    return screen.logicalDotsPerInchY() if screen is not None else 96.0


def _symbol_path(symbol, size: float, x: float, y: float) -> str:
    """A pyqtgraph symbol of ``size`` pixels centred on (x, y), as path data."""
    path = Symbols[symbol] if isinstance(symbol, str) else symbol
    out = []
    i = 0
    while i < path.elementCount():
        e = path.elementAt(i)
        px, py = num(x + e.x * size), num(y + e.y * size)
        if e.type == QtGui.QPainterPath.ElementType.CurveToElement:
            c1, c2 = path.elementAt(i + 1), path.elementAt(i + 2)
            out.append(f"C{px},{py} {num(x + c1.x * size)},{num(y + c1.y * size)} {num(x + c2.x * size)},{num(y + c2.y * size)}")
            i += 3
            continue
        out.append(("M" if e.type == QtGui.QPainterPath.ElementType.MoveToElement else "L") + f"{px},{py}")
        i += 1
    return " ".join(out) + " Z"


def _symbol(symbol, size: float, x: float, y: float) -> str:
    """One point's mark (a circle for pyqtgraph's ``"o"``), without its paint attributes."""
    if symbol == "o":
        return f'<circle cx="{num(x)}" cy="{num(y)}" r="{num(size / 2)}"/>'
    return f'<path d="{_symbol_path(symbol, size, x, y)}"/>'


class _Writer:
    """Walks a figure's items in paint order and writes each as SVG elements."""

    def __init__(self, root: _GraphicsItem) -> None:
        self.root = root
        rect = root.sceneBoundingRect()
        self.origin = rect.topLeft()
        self.size = (rect.width(), rect.height())
        self.defs: list[str] = []
        self.body: list[str] = []
        self.unknown: list[str] = []
        self._clips: dict[tuple, str] = {}
        self._open_clip: str | None = None
        self._metrics_image = QtGui.QImage(4, 4, QtGui.QImage.Format_ARGB32)

    # -- geometry ---------------------------------------------------------------------------------
    def _to_px(self, item: _GraphicsItem, x, y) -> tuple[np.ndarray, np.ndarray]:
        """Item coordinates to the figure's pixels (its scene transform, less the figure's corner)."""
        t = item.sceneTransform()
        x = np.asarray(x, dtype=float)
        y = np.asarray(y, dtype=float)
        return (t.m11() * x + t.m21() * y + t.m31() - self.origin.x(),
                t.m12() * x + t.m22() * y + t.m32() - self.origin.y())

    def _rect_px(self, item: _GraphicsItem, rect: QtCore.QRectF) -> tuple[float, float, float, float]:
        r = item.mapRectToScene(rect).translated(-self.origin)
        return r.left(), r.top(), r.width(), r.height()

    def _clip_of(self, item: _GraphicsItem) -> tuple | None:
        """The figure-pixel rectangle the item's clipping ancestors (its view) confine it to."""
        clip = None
        parent = item.parentItem()
        while parent is not None:
            if parent.flags() & _GraphicsItem.GraphicsItemFlag.ItemClipsChildrenToShape:
                r = parent.mapToScene(parent.shape()).boundingRect().translated(-self.origin)
                clip = r if clip is None else clip.intersected(r)
            parent = parent.parentItem()
        return None if clip is None else (clip.left(), clip.top(), clip.width(), clip.height())

    def _emit(self, item: _GraphicsItem, elements: list[str]) -> None:
        if not elements:
            return
        clip = self._clip_of(item)
        name = None
        if clip is not None:
            key = tuple(round(v, 3) for v in clip)
            if key not in self._clips:
                self._clips[key] = name = f"clip{len(self._clips) + 1}"
                x, y, w, h = key
                self.defs.append(f'<clipPath id="{name}"><rect x="{num(x)}" y="{num(y)}" width="{num(w)}" height="{num(h)}"/></clipPath>')
            name = self._clips[key]
        if name != self._open_clip:
            if self._open_clip is not None:
                self.body.append("</g>")
            if name is not None:
                self.body.append(f'<g clip-path="url(#{name})">')
            self._open_clip = name
        self.body.extend(elements)

    # -- items ------------------------------------------------------------------------------------
    def write(self) -> None:
        for item in _paint_order(self.root):
            if not item.isVisible() or item.effectiveOpacity() <= 0:
                continue
            self._emit(item, self._draw(item))
        if self._open_clip is not None:
            self.body.append("</g>")

    def _draw(self, item: _GraphicsItem) -> list[str]:
        if isinstance(item, pg.AxisItem):
            return self._axis(item)
        if isinstance(item, QtWidgets.QGraphicsTextItem):
            return self._text(item)
        if isinstance(item, pg.LegendItem):
            return self._box(item, item.boundingRect(), item.opts["pen"], item.opts["brush"])
        if isinstance(item, ItemSample):
            return self._sample(item)
        if isinstance(item, pg.TextItem):
            inner = item.textItem
            return self._box(inner, inner.boundingRect(), item.border, item.fill)
        if isinstance(item, SpanBands):
            return self._bands(item)
        if isinstance(item, pg.PlotCurveItem):
            return self._curve(item)
        if isinstance(item, pg.ScatterPlotItem):
            return self._scatter(item)
        if isinstance(item, QtWidgets.QGraphicsRectItem):
            return self._box(item, item.rect(), item.pen(), item.brush())
        if not isinstance(item, _SILENT):
            self.unknown.append(type(item).__name__)
        return []

    def _line(self, item, pen, p1, p2) -> list[str]:
        stroke = _stroke(pen)
        if stroke is None:
            return []
        (x1, x2), (y1, y2) = self._to_px(item, [p1.x(), p2.x()], [p1.y(), p2.y()])
        return [f'<line x1="{num(x1)}" y1="{num(y1)}" x2="{num(x2)}" y2="{num(y2)}" {stroke}/>']

    def _box(self, item, rect: QtCore.QRectF, pen, brush) -> list[str]:
        pen, brush = pg.mkPen(pen), pg.mkBrush(brush)
        stroke, fill = _stroke(pen), _fill(brush)
        if stroke is None and fill == 'fill="none"':
            return []
        x, y, w, h = self._rect_px(item, rect)
        return [f'<rect x="{num(x)}" y="{num(y)}" width="{num(w)}" height="{num(h)}" {fill}' + (f" {stroke}" if stroke else "") + "/>"]

    def _axis(self, axis: pg.AxisItem) -> list[str]:
        """The axis line, ticks and grid lines, and tick labels, as pyqtgraph lays them out."""
        painter = QtGui.QPainter(self._metrics_image)
        try:
            font = axis.style["tickFont"] or painter.font()
            painter.setFont(font)
            specs = axis.generateDrawSpecs(painter)
        finally:
            painter.end()
        if specs is None:
            return []
        (pen, p1, p2), ticks, texts = specs
        out = self._line(axis, pen, p1, p2)
        for tick_pen, a, b in ticks:
            out += self._line(axis, tick_pen, a, b)
        if texts:
            colour, opacity = _colour(axis.textPen().color())
            metrics = QtGui.QFontMetricsF(font)
            out.append(f'<g fill="{colour}"' + (f' fill-opacity="{opacity}"' if opacity else "") + f" {_font_attrs(font)}>")
            for rect, flags, text in texts:
                out.append(self._tick_label(axis, rect, int(flags), text, metrics))
            out.append("</g>")
        return out

    def _tick_label(self, axis, rect: QtCore.QRectF, flags: int, text: str, metrics: QtGui.QFontMetricsF) -> str:
        """A tick label placed as Qt's drawText(rect, flags) places it, anchored at its aligned edge."""
        a = QtCore.Qt.AlignmentFlag
        if flags & a.AlignRight:
            x, anchor = rect.right(), "end"
        elif flags & a.AlignHCenter:
            x, anchor = rect.center().x(), "middle"
        else:
            x, anchor = rect.left(), "start"
        if flags & a.AlignTop:
            y = rect.top() + metrics.ascent()
        elif flags & a.AlignBottom:
            y = rect.bottom() - metrics.descent()
        else:
            y = rect.center().y() + (metrics.ascent() - metrics.descent()) / 2
        (px,), (py,) = self._to_px(axis, [x], [y])
        return f'<text x="{num(px)}" y="{num(py)}" text-anchor="{anchor}">{escape(text)}</text>'

    def _text(self, item: QtWidgets.QGraphicsTextItem) -> list[str]:
        """Each laid-out line of a text item at its baseline, in the item's font and colour."""
        doc = item.document()
        parent = item.parentItem()
        centred = isinstance(parent, pg.AxisItem) or (isinstance(parent, pg.TextItem) and parent.anchor.x() == 0.5)
        t = item.sceneTransform() * QtGui.QTransform.fromTranslate(-self.origin.x(), -self.origin.y())
        matrix = ",".join(num(v, 4) for v in (t.m11(), t.m12(), t.m21(), t.m22(), t.m31(), t.m32()))
        out = []
        block = doc.firstBlock()
        while block.isValid():
            layout = block.layout()
            fragment = next(iter(block), None)
            fmt = fragment.fragment().charFormat() if fragment is not None else block.charFormat()
            font = fmt.font().resolve(doc.defaultFont())
            brush = fmt.foreground()
            colour = brush.color() if brush.style() != QtCore.Qt.NoBrush else item.defaultTextColor()
            fill, opacity = _colour(colour)
            for i in range(layout.lineCount()):
                line = layout.lineAt(i)
                text = block.text()[line.textStart():line.textStart() + line.textLength()].strip()
                if not text:
                    continue
                x = layout.position().x() + line.x() + (line.naturalTextWidth() / 2 if centred else 0.0)
                y = layout.position().y() + line.y() + line.ascent()
                out.append(f'<text transform="matrix({matrix})" x="{num(x)}" y="{num(y)}" fill="{fill}"'
                           + (f' fill-opacity="{opacity}"' if opacity else "")
                           + f' text-anchor="{"middle" if centred else "start"}" {_font_attrs(font)}>{escape(text)}</text>')
            block = block.next()
        return out

    def _sample(self, sample: ItemSample) -> list[str]:
        """A legend entry's sample: the line of its curve and the mark of its points."""
        shown = sample.item
        opts = shown.opts
        out = []
        if not isinstance(shown, pg.ScatterPlotItem):
            out += self._line(sample, pg.mkPen(opts["pen"]), QtCore.QPointF(0, 11), QtCore.QPointF(20, 11))
        if opts.get("symbol") is not None:
            marks = shown.scatter.opts if isinstance(shown, pg.PlotDataItem) else opts
            (x,), (y,) = self._to_px(sample, [10.0], [10.0])
            out.append(self._marks([(opts["symbol"], marks["size"], pg.mkPen(marks["pen"]), pg.mkBrush(marks["brush"]))], [x], [y]))
        return out

    def _bands(self, bands: SpanBands) -> list[str]:
        """Condition bands over the view's whole height."""
        view = bands.viewRect()
        if view is None or not len(bands):
            return []
        out = []
        # Drawn as SpanBands.paint draws them.
        for t0, t1, brush in bands.spans():
            if t1 < view.left() or t0 > view.right():
                continue
            out += self._box(bands, QtCore.QRectF(t0, view.top(), t1 - t0, view.height()), None, brush)
        return out

    def _curve(self, curve: pg.PlotCurveItem) -> list[str]:
        """A curve as polylines, broken at non-finite points, thinned to its pixel columns."""
        stroke = _stroke(pg.mkPen(curve.opts["pen"]))
        x, y = curve.getData()
        if stroke is None or x is None or not len(x):
            return []
        px, py = self._to_px(curve, x, y)
        ok = np.isfinite(px) & np.isfinite(py)
        connect = curve.opts.get("connect", "all")
        if isinstance(connect, np.ndarray):
            breaks = np.flatnonzero(~ok | np.r_[False, connect[:-1] == 0])
        elif connect == "pairs":
            breaks = np.arange(0, len(px) + 1, 2)
        else:
            breaks = np.flatnonzero(~ok)
        out = []
        for part in np.split(np.arange(len(px)), np.r_[breaks, breaks + 1]):
            part = part[ok[part]]
            if part.size < 2:
                continue
            xs, ys = thin_columns(px[part], py[part])
            out.append(f'<polyline points="{points(xs, ys)}" fill="none" {stroke}/>')
        return out

    def _scatter(self, scatter: pg.ScatterPlotItem) -> list[str]:
        """Each point's mark, in pixels (pyqtgraph's pxMode), grouped by style."""
        data = scatter.data
        if not data.size:
            return []
        opts = scatter.opts
        keep = data["visible"]
        px, py = self._to_px(scatter, data["x"], data["y"])
        keep &= np.isfinite(px) & np.isfinite(py)
        styles = [(opts["symbol"] if s is None else s, opts["size"] if z < 0 else z,
                   pg.mkPen(opts["pen"] if p is None else p), pg.mkBrush(opts["brush"] if b is None else b))
                  for s, z, p, b in zip(data["symbol"], data["size"], data["pen"], data["brush"])]
        return [self._marks([styles[i] for i in np.flatnonzero(keep)], px[keep], py[keep])]

    @staticmethod
    def _marks(styles, xs, ys) -> str:
        """Marks sharing paint attributes in one group each."""
        groups: dict[str, list[str]] = {}
        for (symbol, size, pen, brush), x, y in zip(styles, xs, ys):
            paint = _fill(brush) + " " + (_stroke(pen) or 'stroke="none"')
            groups.setdefault(paint, []).append(_symbol(symbol, float(size), float(x), float(y)))
        return "\n".join(f"<g {paint}>\n" + "\n".join(marks) + "\n</g>" for paint, marks in groups.items())


def _writer(figure: pg.GraphicsLayoutWidget) -> _Writer:
    scene = figure.scene()
    if hasattr(scene, "prepareForPaint"):
        scene.prepareForPaint()  # views update their transforms, labels their placement
    writer = _Writer(figure.export_item() if hasattr(figure, "export_item") else figure.ci)
    writer.write()
    return writer


def figure_svg(figure: pg.GraphicsLayoutWidget, *, title: str = "") -> str:
    """The figure as an SVG document, one unit per pixel of the figure on screen.

    Parameters
    ----------
    figure : pyqtgraph.GraphicsLayoutWidget
        A figure of the plots panel (:mod:`app.gui.figures.plots`), drawn.
    title : str, keyword-only
        The document's title.

    Returns
    -------
    str
        The SVG text.
    """
    writer = _writer(figure)
    background = figure.backgroundBrush()
    fill = None
    if background.style() != QtCore.Qt.NoBrush:
        fill = background.color().name()
    return document(*writer.size, writer.body, defs=writer.defs, title=title or None, background=fill)


def unknown_items(figure: pg.GraphicsLayoutWidget) -> list[str]:
    """Class names of the visible items :func:`figure_svg` would leave out of the figure."""
    return _writer(figure).unknown
