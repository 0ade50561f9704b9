"""SVG text to PNG bytes with Qt's SVG renderer (for ``upstroke export --compare-figures``).

The command line writes its figures as SVG without Qt; a PNG beside each needs a rasteriser, and
Qt (already a dependency of the app) has one. The figure is drawn on a white image ``scale``
times its SVG size. Without a display the offscreen platform is used.
"""

from __future__ import annotations

import os

__all__ = ["svg_to_png"]


def _application():
    from PySide6 import QtGui

    app = QtGui.QGuiApplication.instance()
    if app is None:
        if not os.environ.get("DISPLAY") and not os.environ.get("WAYLAND_DISPLAY"):
            os.environ.setdefault("QT_QPA_PLATFORM", "offscreen")
        app = QtGui.QGuiApplication([])
    return app


def svg_to_png(svg: str, *, scale: float = 2.0) -> bytes:
    """The PNG bytes of an SVG document drawn at ``scale`` times its own size."""
    from PySide6 import QtCore, QtGui, QtSvg

    _application()
    renderer = QtSvg.QSvgRenderer(QtCore.QByteArray(svg.encode("utf-8")))
    if not renderer.isValid():
        raise ValueError("the SVG text could not be read")
    size = renderer.defaultSize()
    image = QtGui.QImage(max(1, round(size.width() * scale)), max(1, round(size.height() * scale)),
                         QtGui.QImage.Format.Format_ARGB32)
    image.fill(QtGui.QColor("white"))
    painter = QtGui.QPainter(image)
    try:
        painter.setRenderHint(QtGui.QPainter.RenderHint.Antialiasing)
        painter.setRenderHint(QtGui.QPainter.RenderHint.TextAntialiasing)
        renderer.render(painter)
    finally:
        painter.end()
    buffer = QtCore.QBuffer()
    buffer.open(QtCore.QIODevice.OpenModeFlag.WriteOnly)
    image.save(buffer, "PNG")
    return bytes(buffer.data())
