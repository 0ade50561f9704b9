"""Waiting for the window's background work (tests, screenshots, the command line's --screenshot)."""

from __future__ import annotations

from PySide6 import QtCore, QtWidgets

from .display import Display
from .workers import JobRunner

__all__ = ["settle", "wait_idle"]


def settle(display: Display, runner: JobRunner, timeout_ms: int = 120_000) -> bool:
    """Run pending delayed refreshes now and wait for every background job, until neither
    is left (a finished analysis schedules a summary, which is a job of its own)."""
    timer = QtCore.QElapsedTimer()
    timer.start()
    while True:
        if display.summary_timer.isActive():
            display.summary_timer.stop()
            display.refresh_summary()
        if not wait_idle(runner, max(1, timeout_ms - timer.elapsed())):
            return False
        if display.overview_timer.isActive():
            display.overview_timer.stop()
            display.sync_overview_window()
        if not display.summary_timer.isActive() and not runner.busy():
            return True


def wait_idle(runner: JobRunner, timeout_ms: int = 120_000) -> bool:
    """Process events until no background job is left (or the timeout)."""
    timer = QtCore.QElapsedTimer()
    timer.start()
    app = QtWidgets.QApplication.instance()
    while timer.elapsed() < timeout_ms:
        app.processEvents(QtCore.QEventLoop.AllEvents, 50)
        if not runner.busy():
            app.processEvents()
            if not runner.busy():
                return True
        QtCore.QThread.msleep(5)
    return False
