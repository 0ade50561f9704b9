"""Work off the GUI thread: a job runs in Qt's thread pool and reports back through signals.

A job is a plain function ``fn(report, cancelled)``: it calls ``report(fraction, text)`` as it
goes and checks ``cancelled()`` between steps. Its result (or its error) arrives on the GUI
thread as a signal, so the window stays responsive while a long recording is analysed.
"""

from __future__ import annotations

import threading
import traceback
from typing import Any, Callable

from PySide6 import QtCore

from analysis.errors import InputError

__all__ = ["Job", "JobRunner"]


class _Signals(QtCore.QObject):
    progress = QtCore.Signal(float, str)
    finished = QtCore.Signal(object)
    failed = QtCore.Signal(str, bool)
    ended = QtCore.Signal()


class Job(QtCore.QRunnable):
    """One function run in the thread pool.

    Signals (on ``job.signals``)
    ----------------------------
    progress(float, str)
        Fraction done (0-1) and what is being done.
    finished(object)
        The function's result.
    failed(str, bool)
        The error's one-line message, and whether it is the user's input (an
        :class:`~analysis.errors.InputError`) rather than a fault.
    """

    def __init__(self, fn: Callable[[Callable[[float, str], None], Callable[[], bool]], Any], name: str = "") -> None:
        super().__init__()
        self.setAutoDelete(False)
        self.fn = fn
        self.name = name
        self.signals = _Signals()
        self._cancel = threading.Event()
        self.done = threading.Event()

    def cancel(self) -> None:
        self._cancel.set()

    @property
    def cancelled(self) -> bool:
        return self._cancel.is_set()

    def run(self) -> None:
        try:
            result = self.fn(lambda f, text="": self.signals.progress.emit(float(f), str(text)), self._cancel.is_set)
        except InputError as exc:
            self.signals.failed.emit(exc.one_line(), True)
        except Exception as exc:  # a fault: keep the traceback for the report
            self.signals.failed.emit(f"{type(exc).__name__}: {exc}\n{traceback.format_exc()}", False)
        else:
            if not self._cancel.is_set():
                self.signals.finished.emit(result)
        finally:
            self.done.set()
            self.signals.ended.emit()


class JobRunner(QtCore.QObject):
    """Starts jobs in the global thread pool and keeps them alive until they end."""

    def __init__(self, parent: QtCore.QObject | None = None) -> None:
        super().__init__(parent)
        self.pool = QtCore.QThreadPool.globalInstance()
        self._jobs: set[Job] = set()

    def start(self, job: Job) -> Job:
        self._jobs.add(job)
        job.signals.ended.connect(lambda j=job: self._jobs.discard(j))
        self.pool.start(job)
        return job

    def busy(self) -> bool:
        return any(not j.done.is_set() for j in self._jobs)

    def wait(self, timeout_ms: int = 60_000) -> bool:
        """Block until every job has ended (for tests, screenshots and closing)."""
        return self.pool.waitForDone(timeout_ms)

    def cancel_all(self) -> None:
        for job in list(self._jobs):
            job.cancel()
