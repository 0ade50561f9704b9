"""Saving a results file of several recordings forgets every recording's autosave journal."""

from __future__ import annotations

import os

import pytest

pytest.importorskip("pytestqt")

from PySide6 import QtWidgets  # noqa: E402

from analysis.session import Session  # noqa: E402
from analysis.synthetic import preset, synthesize  # noqa: E402
from analysis.synthetic import write_abf  # noqa: E402
from app.gui.window.autosave import Journal, pending_reviews  # noqa: E402
from app.gui.window.main_window import MainWindow  # noqa: E402


@pytest.fixture(scope="module")
def two_cells(tmp_path_factory, cell_abf):
    """A results file holding two recordings: the shared nodal-like cell and a second one."""
    folder = tmp_path_factory.mktemp("two")
    syn = synthesize(preset("nodal-like"), duration_s=6.0, fs_hz=4_000.0, seed=23, noise_mV=0.2)
    second = folder / "cell-r2.abf"
    write_abf(syn.recording, second)
    session = Session()
    session.add(cell_abf)
    session.add(second)
    out = folder / "two-cells.h5"
    session.save(out)
    return out


@pytest.fixture
def reviewed(qtbot, two_cells, tmp_path):
    """The window on a copy of the file, with one rejection in each recording, unsaved."""
    path = tmp_path / "two-cells.h5"
    path.write_bytes(two_cells.read_bytes())
    w = MainWindow(interactive=False)
    qtbot.addWidget(w)
    assert w.open_path(path) and w.settle(60_000) and not w.last_error
    first, second = w.session.recordings
    w.select_beat(3)
    w.reject_current("noise")
    w.select_recording(second)
    assert w.settle(60_000) and w.key == second
    w.select_beat(4)
    w.reject_current("electrical artefact")
    assert {(p.key, p.decisions) for p in pending_reviews()} == {(first, 1), (second, 1)}  # both journalled
    return w, path


def test_saving_forgets_the_journal_of_every_recording_in_the_file(reviewed, qtbot):
    w, path = reviewed
    first, second = w.session.recordings
    assert w.save_results(path)
    assert pending_reviews() == []  # nothing for the next start to offer
    assert not Journal(str(path), first).exists() and not Journal(str(path), second).exists()
    # both decisions are in the file, so nothing was lost with the journals
    saved = Session.open(path)
    assert saved.beats(first)["reject_reason"][3] == "noise"
    assert saved.beats(second)["reject_reason"][4] == "electrical artefact"
    # the review goes on, journalled again for the recording changed
    w.select_beat(5)
    w.reject_current("noise")
    assert [(p.key, p.decisions) for p in pending_reviews()] == [(second, 2)]


def test_save_as_forgets_the_journals_kept_under_the_old_name(reviewed, tmp_path):
    w, path = reviewed
    other = tmp_path / "renamed.h5"
    assert w.save_results(other)
    assert pending_reviews() == []
    w.select_beat(6)
    w.reject_current("noise")
    (pending,) = pending_reviews()
    assert pending.origin == os.path.abspath(other)  # later changes follow the new file


def test_a_journal_left_for_a_recording_not_reopened_since_outlives_the_save(qtbot, two_cells, tmp_path):
    path = tmp_path / "two-cells.h5"
    path.write_bytes(two_cells.read_bytes())
    crashed = MainWindow(interactive=False)
    qtbot.addWidget(crashed)
    assert crashed.open_path(path) and crashed.settle(60_000)
    first, second = crashed.session.recordings
    crashed.select_recording(second)
    assert crashed.settle(60_000)
    crashed.select_beat(2)
    crashed.reject_current("seal or access trouble")  # then the window is dropped, unsaved
    w = MainWindow(interactive=False)
    qtbot.addWidget(w)
    assert w.open_path(path) and w.settle(60_000) and w.key == first
    w.select_beat(3)
    w.reject_current("noise")
    assert w.save_results(path)
    # the second recording's review was never in this session: it is still there to recover
    assert [(p.key, p.decisions) for p in pending_reviews()] == [(second, 1)]


def test_discarding_the_review_forgets_every_recordings_journal(reviewed, monkeypatch, cell_abf):
    w, _path = reviewed
    w.interactive = True  # so that opening another file asks about the unsaved review
    monkeypatch.setattr(QtWidgets.QMessageBox, "question", lambda *a, **k: QtWidgets.QMessageBox.Discard)
    assert w.open_path(cell_abf) and w.settle(60_000)
    assert pending_reviews() == []
