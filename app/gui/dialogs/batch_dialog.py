"""Batch-analyse a folder from the desktop app, with a progress dialog and a cancel button.

The work is :func:`analysis.batch.run_batch` in a worker thread (which itself fans out to a local
process pool), so the window stays responsive. Cancel sets a flag that the batch honours between
files; a cancelled batch writes nothing. When the batch ends, the good results are written to
the chosen results file (atomically) and the files that failed are listed with their reasons.

The main window hooks it into a menu with :func:`add_batch_action`.
"""

from __future__ import annotations

import os
import threading
import traceback
from typing import Any, Callable

from PySide6.QtCore import QObject, QThread, Signal, Slot
from PySide6.QtGui import QAction
from PySide6.QtWidgets import (
    QDialog,
    QDialogButtonBox,
    QFileDialog,
    QLabel,
    QPlainTextEdit,
    QProgressBar,
    QVBoxLayout,
    QWidget,
)

from analysis.batch import BatchCancelled, find_recordings, make_tasks, prepare_existing, run_batch, save_batch
from analysis.results import results_lock
from analysis.errors import InputError

__all__ = ["BatchDialog", "BatchWorker", "add_batch_action", "batch_analyse_folder"]


class BatchWorker(QObject):
    """Runs one batch in a worker thread and reports through Qt signals.

    Signals
    -------
    progressed(int, int, str, str)
        Files done, files in all, the file just finished and why it failed ("" when it did not).
    succeeded(object)
        The :class:`analysis.batch.SavedBatch` once the results file is written.
    cancelled()
        The batch stopped on the cancel flag; nothing was written.
    failed(str)
        One line: the batch could not run or could not write its results.
    """

    progressed = Signal(int, int, str, str)
    succeeded = Signal(object)
    cancelled = Signal()
    failed = Signal(str)

    def __init__(self, sources: list[str], out_path: str, *, settings: Any = None,
                 channel: int | str | None = None, workers: int | None = None) -> None:
        super().__init__()
        self.sources = sources
        self.out_path = out_path
        self.settings = settings
        self.channel = channel
        self.workers = workers
        self.cancel_flag = threading.Event()

    @Slot()
    def run(self) -> None:
        try:
            paths = find_recordings(self.sources, exclude=[self.out_path])
            kept = prepare_existing(self.out_path, paths)  # a damaged or reviewed file stops here
            tasks = make_tasks(paths, settings=self.settings, channel=self.channel, file_conditions=kept)
            result = run_batch(tasks, workers=self.workers, cancel=self.cancel_flag, on_done=self._on_done)
            if self.cancel_flag.is_set():
                raise BatchCancelled(len(result.outcomes), len(tasks))
            with results_lock(self.out_path):  # one writer at a time: save_batch reads the file again
                saved = save_batch(result, out=self.out_path, settings=self.settings)
        except BatchCancelled:
            self.cancelled.emit()
        except InputError as exc:
            self.failed.emit(exc.one_line())
        except Exception:  # an internal fault: show it whole so it can be reported
            self.failed.emit("internal error; please report it:\n" + traceback.format_exc())
        else:
            self.succeeded.emit(saved)

    def _on_done(self, outcome: Any, done: int, total: int) -> None:
        self.progressed.emit(done, total, outcome.path, outcome.reason)


class BatchDialog(QDialog):
    """Progress of one batch: a bar, the file just finished, the failures so far, and Cancel.

    Parameters
    ----------
    sources : list of str
        Folders or files to analyse.
    out_path : str
        The results file (.h5) to write.
    settings, channel, workers
        As for :func:`analysis.batch.make_tasks` and :func:`analysis.batch.run_batch`.
    parent : QWidget or None
    """

    def __init__(self, sources: list[str], out_path: str, *, settings: Any = None,
                 channel: int | str | None = None, workers: int | None = None,
                 parent: QWidget | None = None) -> None:
        super().__init__(parent)
        self.setWindowTitle("Batch analysis")
        self.setMinimumWidth(520)
        self.out_path = out_path
        self.saved: Any = None
        self.outcome = "running"  # then "saved", "cancelled" or "failed"
        self.failures: list[tuple[str, str]] = []

        self.status = QLabel(f"Looking for recordings in {', '.join(sources)} ...")
        self.status.setWordWrap(True)
        self.bar = QProgressBar()
        self.bar.setRange(0, 0)  # busy until the number of files is known
        self.failure_view = QPlainTextEdit()
        self.failure_view.setReadOnly(True)
        self.failure_view.setPlaceholderText("Files that cannot be analysed are listed here.")
        self.failure_view.setMaximumHeight(140)
        self.buttons = QDialogButtonBox(QDialogButtonBox.StandardButton.Cancel)
        self.buttons.rejected.connect(self.cancel)
        layout = QVBoxLayout(self)
        for widget in (self.status, self.bar, self.failure_view, self.buttons):
            layout.addWidget(widget)

        self._thread = QThread(self)
        self.worker = BatchWorker(sources, out_path, settings=settings, channel=channel, workers=workers)
        self.worker.moveToThread(self._thread)
        self._thread.started.connect(self.worker.run)
        self.worker.progressed.connect(self._on_progress)
        self.worker.succeeded.connect(self._on_saved)
        self.worker.cancelled.connect(self._on_cancelled)
        self.worker.failed.connect(self._on_failed)

    def start(self) -> None:
        """Start the batch in its worker thread."""
        self._thread.start()

    def is_running(self) -> bool:
        return self._thread.isRunning()

    @Slot()
    def cancel(self) -> None:
        """Ask the batch to stop after the files now running; closes the dialog when idle."""
        if self.outcome != "running":
            self.reject()
            return
        self.worker.cancel_flag.set()
        self.status.setText("Cancelling: waiting for the files now running to stop ...")
        self.buttons.setEnabled(False)

    def reject(self) -> None:  # Esc and the window's close button cancel as well
        if self.outcome == "running":
            self.cancel()
            return
        super().reject()

    def _finish(self, outcome: str, text: str) -> None:
        self.outcome = outcome
        self._thread.quit()
        self._thread.wait()
        self.status.setText(text)
        self.buttons.setEnabled(True)
        self.buttons.setStandardButtons(QDialogButtonBox.StandardButton.Close)

    @Slot(int, int, str, str)
    def _on_progress(self, done: int, total: int, path: str, reason: str) -> None:
        self.bar.setRange(0, total)
        self.bar.setValue(done)
        if reason:
            self.failures.append((path, reason))
            self.failure_view.appendPlainText(reason)
        if not self.worker.cancel_flag.is_set():
            self.status.setText(f"{done} of {total} analysed: {os.path.basename(path)}")

    @Slot(object)
    def _on_saved(self, saved: Any) -> None:
        self.saved = saved
        n_bad = len(self.failures)
        text = f"Saved {saved.n_files} recording(s), {saved.n_beats} beats, to {self.out_path}."
        if n_bad:
            text += f" {n_bad} file(s) could not be analysed (listed below)."
        self._finish("saved", text)
        self.buttons.setStandardButtons(QDialogButtonBox.StandardButton.Ok)
        self.buttons.accepted.connect(self.accept)

    @Slot()
    def _on_cancelled(self) -> None:
        self._finish("cancelled", "Cancelled. No results file was written.")

    @Slot(str)
    def _on_failed(self, line: str) -> None:
        self._finish("failed", "The batch did not finish; no results file was written.")
        self.failure_view.appendPlainText(line)


def batch_analyse_folder(parent: QWidget | None = None, *, folder: str | None = None,
                         out_path: str | None = None, settings: Any = None,
                         channel: int | str | None = None,
                         on_saved: Callable[[str], None] | None = None) -> BatchDialog | None:
    """Ask for a folder and a results file, then batch-analyse it in a progress dialog.

    Parameters
    ----------
    parent : QWidget or None
    folder, out_path : str or None
        None asks the user with a file dialog.
    settings : analysis.settings._settings.Settings or None
        The settings to analyse with (the window's current ones); None for the defaults.
    channel : int, str or None
    on_saved : callable or None
        Called with the results file's path once it is written (the main window can open it).

    Returns
    -------
    BatchDialog or None
        The dialog, shown and running; None when the user cancelled a file dialog.
    """
    if folder is None:
        folder = QFileDialog.getExistingDirectory(parent, "Folder of recordings to analyse")
        if not folder:
            return None
    if out_path is None:
        suggestion = os.path.join(folder, os.path.basename(os.path.normpath(folder)) + "-results.h5")
        out_path, _ = QFileDialog.getSaveFileName(parent, "Save the results as", suggestion, "Results (*.h5)")
        if not out_path:
            return None
    dialog = BatchDialog([folder], out_path, settings=settings, channel=channel, parent=parent)
    if on_saved is not None:
        dialog.worker.succeeded.connect(lambda saved: on_saved(saved.out))
    dialog.show()
    dialog.start()
    return dialog


def add_batch_action(menu: Any, window: QWidget, *, settings_getter: Callable[[], Any] | None = None,
                     on_saved: Callable[[str], None] | None = None) -> QAction:
    """Add "Batch-analyse a folder..." to a menu of the main window.

    Parameters
    ----------
    menu : QMenu
    window : QWidget
        The dialog's parent.
    settings_getter : callable or None
        Returns the settings the window is using now (None: the defaults).
    on_saved : callable or None
        Called with the results file's path once written.
    """
    action = QAction("&Batch-analyse a folder...", window)
    action.setStatusTip("Analyse every recording in a folder and its subfolders into one results file")

    def trigger() -> None:
        settings = settings_getter() if settings_getter is not None else None
        window._batch_dialog = batch_analyse_folder(window, settings=settings, on_saved=on_saved)  # keep it alive

    action.triggered.connect(trigger)
    menu.addAction(action)
    return action
