"""File > Recover unsaved review…: the start-up recovery, asked from the menu."""

from __future__ import annotations

import pytest

pytest.importorskip("pytestqt")

from PySide6 import QtCore, QtWidgets  # noqa: E402

from app.gui.window.autosave import pending_reviews  # noqa: E402
from app.gui.window.main_window import MainWindow  # noqa: E402
from app.gui.dialogs.recovery import RecoveryDialog  # noqa: E402


@pytest.fixture
def crashed(cell_window):
    """A review of the file with beat 5 rejected, left unsaved (the window dropped as by a crash)."""
    w = cell_window()
    assert w.key is not None
    w.select_beat(5)
    w.reject_current("seal or access trouble")
    assert w.journal.exists()
    return w.key


@pytest.fixture
def fresh(qtbot, monkeypatch):
    """A window as at a plain start, asking its questions (every modal dialog answered here)."""
    w = MainWindow(interactive=True)
    qtbot.addWidget(w)
    monkeypatch.setattr(QtWidgets.QMessageBox, "warning", lambda *a, **k: pytest.fail(f"unexpected error box: {a[2]}"))
    # pytest-qt closes the window before fixtures are torn down: its "save first?" is answered.
    monkeypatch.setattr(QtWidgets.QMessageBox, "question", lambda *a, **k: QtWidgets.QMessageBox.Discard)
    return w


def _answer_dialog(monkeypatch, button: str) -> list:
    """Answer the recovery dialog with one of its buttons; returns what each dialog listed."""
    listed = []

    def exec_(dialog):
        listed.append([dialog.list.item(i).data(QtCore.Qt.UserRole) for i in range(dialog.list.count())])
        dialog._done(button)
        return 0

    monkeypatch.setattr(RecoveryDialog, "exec", exec_)
    return listed


def _file_menu(window) -> QtWidgets.QMenu:
    menu = window.menuBar().actions()[0].menu()
    menu.aboutToShow.emit()  # as when the user opens it
    return menu


def test_the_menu_recovers_what_the_start_offers(crashed, fresh, monkeypatch):
    key = crashed
    at_start = fresh.recoverable_reviews()  # what a plain start offers (offer_recovery's list)
    assert at_start == pending_reviews() and [p.key for p in at_start] == [key]
    menu = _file_menu(fresh)
    assert fresh.act_recover in menu.actions() and menu.toolTipsVisible()
    assert fresh.act_recover.isEnabled() and fresh.act_recover.toolTip().startswith("1 review(s)")
    listed = _answer_dialog(monkeypatch, "recover")
    fresh.act_recover.trigger()
    assert listed == [at_start]
    assert fresh.settle(60_000) and fresh.key == key
    beats = fresh.session.beats(key)
    assert beats["accepted"][5] == 0 and beats["reject_reason"][5] == "seal or access trouble"
    assert "restored" in fresh.statusBar().currentMessage()
    # the journal left is now the one of the review on screen: nothing else to recover
    _file_menu(fresh)
    assert not fresh.act_recover.isEnabled() and fresh.act_recover.toolTip().startswith("No unsaved review")


def test_a_review_discarded_from_the_menu_is_gone(crashed, fresh, monkeypatch):
    _file_menu(fresh)
    assert fresh.act_recover.isEnabled()
    listed = _answer_dialog(monkeypatch, "discard")
    fresh.act_recover.trigger()
    assert len(listed) == 1 and len(listed[0]) == 1
    assert pending_reviews() == [] and fresh.key is None
    assert fresh.statusBar().currentMessage() == "no unsaved review left to recover"
    _file_menu(fresh)
    assert not fresh.act_recover.isEnabled()


def test_later_keeps_the_review_for_next_time(crashed, fresh, monkeypatch):
    _answer_dialog(monkeypatch, "later")
    fresh.act_recover.trigger()
    assert fresh.key is None and [p.key for p in pending_reviews()] == [crashed]
    assert "unsaved review(s) kept" in fresh.statusBar().currentMessage()
    _file_menu(fresh)
    assert fresh.act_recover.isEnabled()


def test_with_nothing_to_recover_the_entry_is_disabled_and_says_why(fresh):
    _file_menu(fresh)
    assert not fresh.act_recover.isEnabled()
    assert "No unsaved review to recover" in fresh.act_recover.toolTip()
