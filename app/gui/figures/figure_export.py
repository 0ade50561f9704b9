"""Writing a figure of the plots panel to PNG or SVG, the two showing the same drawing.

The SVG is written from the figure's items (:mod:`app.gui.figures.figure_svg`), one unit per pixel
of the figure on screen. The PNG is the scene rendered at the figure's size onto an image of higher
pixel density (``width_px`` wide), so that everything is enlarged alike: pyqtgraph's own image
exporter scales the painter instead, which legends (drawn ignoring transformations) and label
grounds (drawn with their own transform) escape, so that in its files they came out small and
in the wrong place. Both are written through the core's atomic writer
(:func:`analysis.results.atomic_output`), so that a failed export never leaves half a file.
"""

from __future__ import annotations

import os

import pyqtgraph as pg
import pyqtgraph.exporters  # noqa: F401  (registers the exporters)
from PySide6 import QtCore, QtGui, QtWidgets

from analysis.results import atomic_output

from .figure_svg import figure_svg

__all__ = ["export_figure", "figure_png"]


def _layout(figure: pg.GraphicsLayoutWidget) -> list[tuple[float, float, float, float]]:
    return [item.sceneBoundingRect().getRect() for item in figure.scene().items() if isinstance(item, pg.ViewBox)]


def _settle(figure: pg.GraphicsLayoutWidget) -> QtCore.QRectF:
    """Lay the figure out as it will be painted; returns its rectangle in the scene.

    An axis measures its tick labels only when painted, and then claims the width they need: a
    figure never shown (a tab not opened since it was drawn) would be exported with its plots
    where they were before. So the figure is painted off screen until its layout holds still.
    """
    scene = figure.scene()
    for _attempt in range(4):
        QtWidgets.QApplication.sendPostedEvents(None, QtCore.QEvent.LayoutRequest)
        if hasattr(scene, "prepareForPaint"):
            scene.prepareForPaint()
        before = _layout(figure)
        scratch = QtGui.QImage(8, 8, QtGui.QImage.Format_ARGB32)
        painter = QtGui.QPainter(scratch)
        try:
            scene.render(painter, QtCore.QRectF(0, 0, 8, 8), figure.export_item().sceneBoundingRect())
        finally:
            painter.end()
        QtWidgets.QApplication.sendPostedEvents(None, QtCore.QEvent.LayoutRequest)
        if _layout(figure) == before:
            break
    if hasattr(scene, "prepareForPaint"):
        scene.prepareForPaint()
    return figure.export_item().sceneBoundingRect()


def figure_png(figure: pg.GraphicsLayoutWidget, *, width_px: int = 1600) -> QtGui.QImage:
    """The figure as an image ``width_px`` wide, its height in proportion.

    Parameters
    ----------
    figure : pyqtgraph.GraphicsLayoutWidget
        A figure of the plots panel, drawn.
    width_px : int, keyword-only
        Width of the image in pixels.

    Returns
    -------
    QImage
        The image, on the figure's background.
    """
    source = _settle(figure)
    scale = width_px / source.width()
    image = QtGui.QImage(int(width_px), max(1, round(source.height() * scale)), QtGui.QImage.Format_ARGB32)
    background = figure.backgroundBrush()
    image.fill(background.color() if background.style() != QtCore.Qt.NoBrush else QtGui.QColor(0, 0, 0, 0))
    image.setDevicePixelRatio(scale)
    painter = QtGui.QPainter(image)
    # Export mode makes scatter points draw as shapes (not from a screen-resolution pixmap atlas).
    exporter = pg.exporters.ImageExporter(figure.export_item())
    exporter.setExportMode(True, {"antialias": True, "background": background.color(), "painter": painter,
                                  "resolutionScale": 1.0})
    try:
        painter.setRenderHint(QtGui.QPainter.RenderHint.Antialiasing, True)
        figure.scene().render(painter, QtCore.QRectF(0, 0, source.width(), source.height()), source)
    finally:
        exporter.setExportMode(False)
        painter.end()
    image.setDevicePixelRatio(1.0)
    return image


def export_figure(figure: pg.GraphicsLayoutWidget, path: str | os.PathLike, *, width_px: int = 1600) -> str:
    """Write a figure to PNG or SVG, by the path's extension; returns the path.

    Parameters
    ----------
    figure : pyqtgraph.GraphicsLayoutWidget
        A figure of the plots panel, drawn.
    path : str or os.PathLike
        Where to write, ending in ``.png`` or ``.svg``.
    width_px : int, keyword-only
        Width of a PNG in pixels (an SVG is the figure's size on screen, one unit a pixel).

    Raises
    ------
    ValueError
        For another extension.
    analysis.results._atomic.WriteError
        When the file cannot be written (the file at ``path``, if any, is left as it was).
    """
    path = os.fspath(path)
    ext = os.path.splitext(path)[1].lower()
    if ext not in (".png", ".svg"):
        raise ValueError(f"{path}: figures export to .png or .svg")
    with atomic_output(path) as partial:
        if ext == ".svg":
            _settle(figure)
            with open(partial, "w", encoding="utf-8", newline="\n") as f:
                f.write(figure_svg(figure, title=getattr(figure, "title", "")))
        elif not figure_png(figure, width_px=width_px).save(partial, "PNG"):
            raise OSError(f"{path}: the image could not be written")
    return path
