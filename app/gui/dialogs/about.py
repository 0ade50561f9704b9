"""The About box: version, what the tool is for, and the research-use caution."""

from __future__ import annotations

import platform

from PySide6 import QtCore, QtWidgets

__all__ = ["CAUTION", "about_text", "AboutDialog"]

#: Shown in the About box and the window's status line on first start.
CAUTION = (
    "Upstroke is a research tool, not a medical device; its output is not for diagnosing or "
    "treating anyone."
)


def about_text() -> str:
    """The About box's text (HTML)."""
    import numpy
    import pyqtgraph
    import PySide6

    from app import __version__

    return (
        f"<h2>Upstroke {__version__}</h2>"
        "<p>Beat-by-beat analysis of spontaneously beating cardiac cells recorded in current "
        "clamp: every beat's MDP, take-off, DDR, dV/dt max, peak, amplitude and APD20/50/90, "
        "reviewed from the keyboard and kept with its settings and decisions in one HDF5 file.</p>"
        f"<p><b>Caution.</b> {CAUTION}</p>"
        f"<p style='color:#666'>Python {platform.python_version()}, PySide6 {PySide6.__version__}, "
        f"pyqtgraph {pyqtgraph.__version__}, numpy {numpy.__version__}</p>"
    )


class AboutDialog(QtWidgets.QMessageBox):
    """A modal box with :func:`about_text`."""

    def __init__(self, parent: QtWidgets.QWidget | None = None) -> None:
        super().__init__(parent)
        self.setObjectName("about_dialog")
        self.setWindowTitle("About Upstroke")
        self.setTextFormat(QtCore.Qt.RichText)
        self.setText(about_text())
        self.setStandardButtons(QtWidgets.QMessageBox.Close)
