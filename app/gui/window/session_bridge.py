"""Qt signals for the core's session, whose notifications are plain Python callbacks.

The session lives on the GUI thread; its callbacks are forwarded as queued-safe Qt signals so
that views subscribe to Qt signals and the session never knows a view exists.
"""

from __future__ import annotations

from PySide6 import QtCore

from analysis.session import Change, Session

__all__ = ["SessionBridge"]


class SessionBridge(QtCore.QObject):
    """Re-emits a :class:`Session`'s changes.

    Signals
    -------
    changed(str, str, list)
        Every change: event name, recording key ("" for none), rows concerned. Emitted before
        the specific signal of the same change, so that what listens to it (the autosave
        journal) has run before any view redraws and reports the change done.
    decisions_changed(str, list), conditions_changed(str), results_changed(str),
    settings_changed(str), history_changed(), warning(str, str), saved(str)
    """

    changed = QtCore.Signal(str, str, list)
    decisions_changed = QtCore.Signal(str, list)
    conditions_changed = QtCore.Signal(str)
    results_changed = QtCore.Signal(str)
    settings_changed = QtCore.Signal(str)
    history_changed = QtCore.Signal()
    warning = QtCore.Signal(str, str)
    saved = QtCore.Signal(str)

    def __init__(self, session: Session, parent: QtCore.QObject | None = None) -> None:
        super().__init__(parent)
        self.session = session
        self._unsubscribe = session.subscribe("*", self._forward)

    def detach(self) -> None:
        """Stop forwarding (before the session is replaced)."""
        self._unsubscribe()

    def _forward(self, change: Change) -> None:
        key = change.recording or ""
        rows = list(change.rows)
        self.changed.emit(change.event, key, rows)  # first: the autosave runs before the views
        if change.event == "decisions_changed":
            self.decisions_changed.emit(key, rows)
        elif change.event == "conditions_changed":
            self.conditions_changed.emit(key)
        elif change.event in ("results_changed", "recording_added"):
            self.results_changed.emit(key)
        elif change.event == "settings_changed":
            self.settings_changed.emit(key)
        elif change.event == "history_changed":
            self.history_changed.emit()
        elif change.event == "warning":
            self.warning.emit(key, change.detail)
        elif change.event == "saved":
            self.saved.emit(change.detail)
