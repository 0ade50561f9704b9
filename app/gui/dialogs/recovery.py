"""The reviews a crash or a kill left unsaved: which to reopen, which to drop.

The journals themselves are the core's (:mod:`analysis.session._journal`); this is the question
the window asks about them (:meth:`~app.gui.window.files.Files.offer_recovery`), at start and
from File > Recover unsaved review… (:func:`add_recover_action`).
"""

from __future__ import annotations

import os

from PySide6 import QtCore, QtGui, QtWidgets

from ..window.autosave import PendingReview

__all__ = ["RecoveryDialog", "add_recover_action", "ask_recovery", "recover_unsaved", "update_recover_action"]


class RecoveryDialog(QtWidgets.QDialog):
    """Lists unsaved reviews, newest first; *Recover* reopens the one selected and replays its
    review, *Discard* deletes its journal for good, *Later* keeps them all for the next start."""

    def __init__(self, pending: list[PendingReview], parent: QtWidgets.QWidget | None = None) -> None:
        super().__init__(parent)
        self.setWindowTitle("Unsaved reviews")
        self.action: str = "later"
        layout = QtWidgets.QVBoxLayout(self)
        layout.addWidget(QtWidgets.QLabel(
            "Upstroke ended without saving these reviews. Their decisions were kept as they were made."))
        self.list = QtWidgets.QListWidget()
        for p in pending:
            item = QtWidgets.QListWidgetItem(f"{os.path.basename(p.origin)} — {p.decisions} decision(s), {p.written_utc}")
            item.setToolTip(p.origin)
            item.setData(QtCore.Qt.UserRole, p)
            self.list.addItem(item)
        self.list.setCurrentRow(0)
        layout.addWidget(self.list)
        buttons = QtWidgets.QDialogButtonBox()
        recover = buttons.addButton("Recover", QtWidgets.QDialogButtonBox.AcceptRole)
        discard = buttons.addButton("Discard", QtWidgets.QDialogButtonBox.DestructiveRole)
        later = buttons.addButton("Later", QtWidgets.QDialogButtonBox.RejectRole)
        recover.clicked.connect(lambda: self._done("recover"))
        discard.clicked.connect(lambda: self._done("discard"))
        later.clicked.connect(lambda: self._done("later"))
        layout.addWidget(buttons)

    def selected(self) -> PendingReview | None:
        item = self.list.currentItem()
        return None if item is None else item.data(QtCore.Qt.UserRole)

    def _done(self, action: str) -> None:
        self.action = action
        self.accept() if action != "later" else self.reject()


def ask_recovery(parent: QtWidgets.QWidget, pending: list[PendingReview]) -> PendingReview | None:
    """Ask which unsaved review to reopen; journals the user discards are deleted here.

    Returns
    -------
    PendingReview or None
        The review to reopen, or None (later, or every one discarded).
    """
    pending = list(pending)
    while pending:
        dialog = RecoveryDialog(pending, parent)
        dialog.exec()
        choice = dialog.selected()
        if dialog.action == "recover" and choice is not None:
            return choice
        if dialog.action != "discard" or choice is None:
            return None
        try:
            choice.path.unlink()
        except FileNotFoundError:
            pass
        pending.remove(choice)
    return None


def _shown_origins(window) -> list[str]:
    """The file on screen: its journal is the review being made, not one to recover."""
    return [window.origin] if window.key is not None and window.origin else []


def update_recover_action(action: QtGui.QAction, window) -> int:
    """Enable the action when there is an unsaved review to recover, and say why (not) in its
    tooltip; returns how many there are."""
    n = len(window.recoverable_reviews(skip=_shown_origins(window)))
    action.setEnabled(n > 0)
    if n:
        tip = f"{n} review(s) left unsaved by a crash or a kill: choose one to reopen, or discard them"
    else:
        tip = "No unsaved review to recover: every review was saved, reverted or discarded"
    action.setToolTip(tip)
    action.setStatusTip(tip)
    return n


def recover_unsaved(window) -> PendingReview | None:
    """File > Recover unsaved review…: the start-up question, asked now
    (:meth:`~app.gui.window.files.Files.offer_recovery`)."""
    choice = window.offer_recovery(skip=_shown_origins(window))
    if choice is None and not window.recoverable_reviews(skip=_shown_origins(window)):
        window.status("no unsaved review left to recover")
    return choice


def add_recover_action(menu: QtWidgets.QMenu, window) -> QtGui.QAction:
    """Add File > Recover unsaved review… to ``menu``, brought up to date whenever it opens."""
    action = QtGui.QAction("Re&cover unsaved review…", window)
    action.triggered.connect(lambda: recover_unsaved(window))
    menu.addAction(action)
    menu.setToolTipsVisible(True)  # so that a disabled entry still says why
    menu.aboutToShow.connect(lambda: update_recover_action(action, window))
    update_recover_action(action, window)
    return action
