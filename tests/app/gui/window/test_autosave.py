"""Autosave in the window: on disk before the views redraw, restored off the GUI thread, offered at start."""

from __future__ import annotations

import json
import os
import threading

import pytest

pytest.importorskip("pytestqt")

from app.gui.window.autosave import Journal, pending_reviews  # noqa: E402
from app.gui.window.main_window import MainWindow  # noqa: E402


def _window(qtbot):
    w = MainWindow(interactive=False)
    qtbot.addWidget(w)
    return w


@pytest.fixture
def window(cell_window):
    w = cell_window()
    assert w.key is not None and not w.last_error
    return w


def _journal_reasons(window) -> list[str]:
    return json.loads(window.journal.path.read_text())["decisions"]["reason"]


def test_every_decision_is_on_disk_before_the_views_hear_of_it(window):
    on_disk = []
    window.bridge.decisions_changed.connect(lambda key, rows: on_disk.append(_journal_reasons(window)))
    window.select_beat(2)
    window.reject_current("noise")
    window.select_beat(4)
    window.reject_current("electrode bump")
    window.undo()
    assert on_disk[0] == ["noise"] and on_disk[1] == ["noise", "electrode bump"]
    assert on_disk[2][-1] == ""  # the undo is an entry of its own, journalled as well


def _crashed_review(window):
    """A review with its own settings, left unsaved (the window is dropped, as by a crash)."""
    window.select_beat(5)
    window.reject_current("seal or access trouble")
    window.settings_form.editors["preprocess.ljp_mV"].set(7.0)
    window.settings_form.apply()
    assert window.settle(60_000)
    assert window.journal.exists() and window.session.settings(window.key).preprocess.ljp_mV == 7.0
    return window.key


def test_a_restore_with_other_settings_reanalyses_in_a_worker(window, qtbot, cell_abf, monkeypatch):
    import analysis.pipeline as pipeline

    key = _crashed_review(window)
    threads, progress = [], []
    core = pipeline.analyze

    def spy(rec, *args, **kwargs):
        if rec.source_path and str(rec.source_path).endswith(cell_abf.name):
            threads.append(threading.current_thread() is threading.main_thread())
        return core(rec, *args, **kwargs)

    monkeypatch.setattr(pipeline, "analyze", spy)
    again = _window(qtbot)
    shown = again.feedback.on_progress
    again.feedback.on_progress = lambda f, text: (progress.append((f, text, set(again.feedback.busy_reasons))), shown(f, text))
    assert again.open_path(cell_abf)
    assert again.settle(60_000) and again.key == key
    assert threads == [False, False]  # the opening analysis, then the restore's: neither on the GUI thread
    assert any("restoring" in busy and f > 0 for f, _t, busy in progress)  # the restore showed progress
    assert again.session.settings(key).preprocess.ljp_mV == 7.0
    assert again.settings_form.settings == again.session.settings(key)
    beats = again.session.beats(key)
    assert beats["accepted"][5] == 0 and beats["reject_reason"][5] == "seal or access trouble"
    assert "restored" in again.statusBar().currentMessage()
    # The journal was written once the whole review was back, not in between.
    assert json.loads(again.journal.path.read_text())["decisions"]["reason"][-1] == "seal or access trouble"



def test_at_start_the_app_offers_the_unsaved_reviews(window, qtbot, cell_abf):
    key = _crashed_review(window)
    (pending,) = pending_reviews()
    assert pending.key == key and pending.decisions == 1
    later = _window(qtbot)
    assert later.offer_recovery() is None  # not interactive and no choice given: kept for later
    assert Journal(str(cell_abf), key).exists() and "unsaved review" in later.statusBar().currentMessage()
    again = _window(qtbot)
    offered = []
    chosen = again.offer_recovery(choose=lambda items: offered.extend(items) or items[0])
    assert offered == [pending] and chosen == pending
    assert again.settle(60_000) and again.key == key
    assert again.session.beats(key)["reject_reason"][5] == "seal or access trouble"
    assert again.session.settings(key).preprocess.ljp_mV == 7.0


def test_the_recovery_dialog_discards_one_and_recovers_another(qtbot, tmp_path):
    from PySide6 import QtCore, QtWidgets

    from app.gui.window.autosave import PendingReview
    from app.gui.dialogs.recovery import RecoveryDialog, ask_recovery

    paths = [tmp_path / f"{n}.json" for n in ("a", "b")]
    for p in paths:
        p.write_text("{}")
    pending = [PendingReview(str(tmp_path / f"cell-{n}.abf"), f"k{n}", f"2026-01-0{i + 1}T00:00:00.000Z", 2, p)
               for i, (n, p) in enumerate(zip("ab", paths))]
    clicks = ["Discard", "Recover"]

    def click():
        dialog = QtWidgets.QApplication.activeModalWidget()
        if not isinstance(dialog, RecoveryDialog):
            QtCore.QTimer.singleShot(20, click)
            return
        button = next(b for b in dialog.findChildren(QtWidgets.QPushButton) if b.text() == clicks[0])
        clicks.pop(0)
        if clicks:
            QtCore.QTimer.singleShot(20, click)
        button.click()

    QtCore.QTimer.singleShot(20, click)
    parent = QtWidgets.QWidget()
    qtbot.addWidget(parent)
    chosen = ask_recovery(parent, pending)
    assert chosen == pending[1] and not clicks
    assert not paths[0].exists() and paths[1].exists()  # the discarded journal is gone, the other kept


def test_a_plain_start_offers_the_unsaved_reviews(monkeypatch, qtbot):
    from PySide6 import QtWidgets

    from app.gui.window import launch as launching

    asked = []
    monkeypatch.setattr(MainWindow, "offer_recovery", lambda self, **kw: asked.append(self))
    # The event loop runs what is queued, then returns as if the user had quit.
    monkeypatch.setattr(QtWidgets.QApplication, "exec", lambda self: QtWidgets.QApplication.processEvents() or 0)
    assert launching.launch() == 0
    assert len(asked) == 1 and isinstance(asked[0], MainWindow)
    qtbot.addWidget(asked[0])


def test_changes_after_a_save_come_back_with_the_results_file(window, qtbot, tmp_path):
    key = window.key
    window.select_beat(2)
    window.reject_current("noise")
    out = tmp_path / "review.h5"
    assert window.save_results(out)
    window.select_beat(7)
    window.reject_current("electrode bump")  # unsaved; then a crash
    (pending,) = pending_reviews()
    assert pending.origin == os.path.abspath(out)  # offered at start as the results file
    again = _window(qtbot)
    assert again.open_path(out) and again.settle(60_000)
    beats = again.session.beats(key)
    assert beats["reject_reason"][2] == "noise" and beats["reject_reason"][7] == "electrode bump"
    assert "restored" in again.statusBar().currentMessage()
