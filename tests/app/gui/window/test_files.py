"""Files from the window: revert to the saved results file, and which file Save writes."""

from __future__ import annotations

import os

import pytest

pytest.importorskip("pytestqt")

from PySide6 import QtWidgets  # noqa: E402

from app.gui.window.autosave import Journal, pending_reviews  # noqa: E402
from app.gui.window.main_window import MainWindow  # noqa: E402


def _window(qtbot, *, interactive: bool = False):
    w = MainWindow(interactive=interactive)
    qtbot.addWidget(w)
    return w


@pytest.fixture
def saved(cell_window, tmp_path):
    """The window on the file with beat 3 rejected and saved; then beat 6 rejected, unsaved."""
    w = cell_window()
    assert w.key is not None and not w.last_error
    w.select_beat(3)
    w.reject_current("noise")
    out = tmp_path / "cell-q7.h5"
    assert w.save_results(out)
    assert not w.act_revert.isEnabled()  # nothing changed since the save
    w.select_beat(6)
    w.reject_current("electrical artefact")
    assert w.session.modified and w.act_revert.isEnabled()
    return w, out


def test_revert_drops_the_unsaved_decision_and_its_journal(saved, qtbot):
    w, out = saved
    key = w.key
    (pending,) = pending_reviews()  # what the next start would offer
    assert pending.origin == os.path.abspath(out) and pending.key == key and pending.decisions == 2
    assert w.revert_to_saved()
    beats = w.session.beats(w.key)
    assert w.key == key and w.results_path == os.fspath(out)
    assert beats["accepted"][3] == 0 and beats["reject_reason"][3] == "noise"  # the saved decision stays
    assert beats["accepted"][6] == 1 and beats["reject_reason"][6] == ""  # the unsaved one is gone
    assert w.table.beat_model.table.equals(beats)
    assert not w.session.modified and not w.act_revert.isEnabled()
    assert pending_reviews() == []  # nothing left for the start-up recovery to offer
    assert not Journal(str(out), key).exists()
    offered = []
    later = _window(qtbot)
    assert later.offer_recovery(choose=lambda items: offered.extend(items) or items[0]) is None
    assert offered == []
    # the review goes on after the revert, journalled again
    w.select_beat(7)
    w.reject_current("noise")
    assert [p.decisions for p in pending_reviews()] == [2]


def test_revert_cancelled_keeps_the_changes_and_the_journal(saved, monkeypatch):
    w, _out = saved
    w.interactive = True
    asked = []

    def question(*args, **kwargs):
        asked.append(args[2])
        return QtWidgets.QMessageBox.Cancel

    monkeypatch.setattr(QtWidgets.QMessageBox, "question", question)
    assert not w.revert_to_saved()
    assert len(asked) == 1 and "cell-q7.h5" in asked[0]
    assert w.session.beats(w.key)["accepted"][6] == 0 and w.session.modified
    assert [p.decisions for p in pending_reviews()] == [2]


def test_revert_to_an_unreadable_file_changes_nothing(saved):
    w, out = saved
    out.write_bytes(b"not an HDF5 file")
    assert not w.revert_to_saved()
    assert "cell-q7.h5" in w.last_error
    assert w.session.beats(w.key)["accepted"][6] == 0 and w.session.modified
    assert [p.decisions for p in pending_reviews()] == [2]  # the journal is all that is left of it


def test_without_a_results_file_there_is_nothing_to_revert(cell_window):
    w = cell_window()
    w.select_beat(2)
    w.reject_current("noise")
    assert not w.act_revert.isEnabled()
    assert not w.revert_to_saved() and "not been saved" in w.last_error
    assert w.session.beats(w.key)["accepted"][2] == 0


def test_a_recording_opened_after_a_results_file_is_not_saved_over_it(saved, cell_abf):
    w, out = saved
    assert w.revert_to_saved()
    before = out.read_bytes()
    assert w.open_path(cell_abf) and w.settle(60_000)
    assert w.results_path is None
    w.select_beat(2)
    w.reject_current("noise")
    assert not w.act_revert.isEnabled()
    assert not w.save()  # no dialog in a non-interactive window: nothing is written
    assert out.read_bytes() == before
