"""What the main window tells the user: the status line, errors, and the progress of its jobs."""

from __future__ import annotations

from PySide6 import QtWidgets

from .. import palette
from ..dialogs.about import CAUTION

__all__ = ["Feedback"]


class Feedback:
    """The status bar's message, progress bar and caution, and the error box.

    Parameters
    ----------
    window : QMainWindow
        Whose status bar is used and over which error boxes open.
    interactive : bool
        False for tests and screenshots: no modal dialogs (errors go to the status bar and
        :attr:`last_error`), no question on closing.
    """

    def __init__(self, window: QtWidgets.QMainWindow, *, interactive: bool = True) -> None:
        self.window = window
        self.interactive = interactive
        self.last_error = ""
        #: What the window is busy with (the progress bar shows while any).
        self.busy_reasons: set[str] = set()
        self.progress = QtWidgets.QProgressBar()
        self.progress.setMaximumWidth(220)
        self.progress.setVisible(False)
        window.statusBar().addPermanentWidget(self.progress)
        caution = QtWidgets.QLabel("research use only — not a medical device")
        caution.setToolTip(CAUTION)
        caution.setStyleSheet(f"color: {palette.ENVELOPE}; padding: 0 6px;")
        window.statusBar().addPermanentWidget(caution)

    def status(self, text: str) -> None:
        self.window.statusBar().showMessage(text, 0)

    def show_error(self, text: str) -> None:
        self.last_error = text
        self.status(text)
        if self.interactive:
            QtWidgets.QMessageBox.warning(self.window, "Upstroke", text)

    def busy(self, what: str, on: bool) -> None:
        (self.busy_reasons.add if on else self.busy_reasons.discard)(what)
        self.progress.setVisible(bool(self.busy_reasons))
        if on:
            self.progress.setRange(0, 0)
            self.progress.setFormat(what)

    def on_progress(self, fraction: float, text: str) -> None:
        if fraction > 0:
            self.progress.setRange(0, 1000)
            self.progress.setValue(int(fraction * 1000))
        self.progress.setFormat(f"{text} %p%" if fraction > 0 else text)

    def job_failed(self, message: str, user_error: bool) -> None:
        self.busy_reasons.clear()
        self.progress.setVisible(False)
        self.show_error(message.splitlines()[0] if user_error else f"internal error, please report it: {message}")
