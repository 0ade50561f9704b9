"""Starting the desktop app: the Qt application, the window, and screenshots.

Used by ``upstroke gui`` and ``upstroke demo``. With a screenshot path the window is loaded,
analysed and rendered to PNG, then the app exits without showing anything on screen.
"""

from __future__ import annotations

import os
import sys
from pathlib import Path
from typing import Sequence

from analysis.conditions import Condition
from analysis.errors import InputError
from analysis.recording import Recording

__all__ = ["application", "launch", "prepare_screenshot_view"]

SCREENSHOT_SIZE = (1600, 1000)


def application():
    """The QApplication (made once, named for Qt's settings locations)."""
    from PySide6 import QtWidgets

    app = QtWidgets.QApplication.instance()
    if app is None:
        app = QtWidgets.QApplication(sys.argv[:1])
        app.setApplicationName("Upstroke")
        app.setOrganizationName("Upstroke")
        app.setApplicationDisplayName("Upstroke")
    return app


def prepare_screenshot_view(window) -> None:
    """A view worth a screenshot: a few beats around a rejected one, phases and cursors on."""
    import math

    import numpy as np

    beats = window.beats
    if beats is None or not len(beats):
        return
    rows = window.state.sweep_rows()
    rejected = [int(r) for r in rows if not beats["accepted"][r]]
    quiet = ("", "no_diastole", "truncated")
    flagged = [int(r) for r in rows if str(beats["flags"][r]) not in quiet] if "flags" in beats else []
    # What the review is for: a rejected beat, else a flagged one, else one a third of the way in.
    focus = rejected[0] if rejected else flagged[-1] if flagged else int(rows[min(len(rows) - 1, len(rows) // 3)])
    window.select_beat(focus)
    t = float(beats["t_upstroke_s"][focus])
    cl = np.nanmedian(np.asarray(beats["cl_ms"], float)) / 1e3 if np.isfinite(beats["cl_ms"]).any() else 1.0
    window.trace_view.show_span(t - 3.4 * cl, t + 4.6 * cl)
    window.trace_view.fit_y()
    window.set_phases_visible(True)
    window.set_cursors_visible(True)
    # Both cursors on the sweep, even a short one (a cursor past its end reads nothing).
    end = window.levels(window.sweep).duration_s if window.recording is not None else math.inf
    c1 = min(t + 3.2 * cl, end - 0.02 * cl)
    window.trace_view.set_cursor_times(min(t + 1.2 * cl, c1 - 0.5 * cl), c1)
    window.figures.tabs.setCurrentIndex(0)


def launch(
    source: str | os.PathLike | Recording | None = None,
    *,
    conditions: Sequence[Condition] = (),
    label: str | None = None,
    screenshot: str | os.PathLike | None = None,
    size: tuple[int, int] = SCREENSHOT_SIZE,
) -> int:
    """Run the app on a recording, a results file or nothing; returns the exit status.

    Raises
    ------
    InputError
        When the file cannot be opened (with a screenshot requested, or before the window
        shows), so that the command line reports it in one line with exit status 2.
    """
    if screenshot is not None and not os.environ.get("QT_QPA_PLATFORM") and not os.environ.get("DISPLAY") \
            and not os.environ.get("WAYLAND_DISPLAY") and sys.platform.startswith("linux"):
        os.environ["QT_QPA_PLATFORM"] = "offscreen"
    if screenshot is not None:
        out = Path(screenshot)
        if out.suffix.lower() != ".png":
            raise InputError(str(out), "the screenshot must be a .png file", "give a path ending in .png")
        if not out.parent.exists():
            raise InputError(str(out), "the screenshot's folder does not exist", "create it or choose another path")
    if isinstance(source, (str, os.PathLike)) and not os.path.exists(source):
        raise InputError(os.fspath(source), "no such file", "check the path")
    app = application()
    from .main_window import MainWindow

    window = MainWindow(interactive=screenshot is None)
    window.resize(*size)
    if isinstance(source, Recording):
        window.open_recording_file(source, label=label, conditions=conditions)
    elif source is not None:
        from analysis import open_recording

        path = os.fspath(source)
        if Path(path).suffix.lower() in (".h5", ".hdf5"):
            window.open_results(path)
        else:
            window.open_recording_file(open_recording(path), origin=path, label=label, conditions=conditions)
        window.recent.add(path)
    if screenshot is not None:
        window.show()
        if not window.settle():
            raise RuntimeError("the analysis did not finish within the time allowed for a screenshot")
        if window.last_error:
            raise InputError(None, window.last_error, "")
        prepare_screenshot_view(window)
        window.settle()
        window.render_png(screenshot, size=size)
        window.runner.wait(10_000)
        window.close()
        print(f"wrote {screenshot}")
        return 0
    window.show()
    if source is None:  # a plain start: offer the reviews a crash or a kill left unsaved
        from PySide6.QtCore import QTimer

        QTimer.singleShot(0, window.offer_recovery)
    return int(app.exec())
