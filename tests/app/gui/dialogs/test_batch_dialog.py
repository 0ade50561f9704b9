"""The app's batch dialog: progress, failures listed, results saved; cancel writes nothing."""

from __future__ import annotations

import pytest

pytest.importorskip("pytestqt")

from analysis import analyze, open_recording  # noqa: E402
from analysis.results import load_results  # noqa: E402
from tests.batch_recordings import beating_trace, write_abf1  # noqa: E402

FS_HZ = 10_000.0


@pytest.fixture
def folder(tmp_path):
    root = tmp_path / "cells"
    root.mkdir()
    for i in range(3):
        v, _ = beating_trace(3.0 + i, FS_HZ, seed=20 + i)
        write_abf1(root / f"cell{i:02d}.abf", v, FS_HZ)
    (root / "cell01b.abf").write_bytes(b"ABF " + b"\0" * 40)  # cut short, sorts into the middle
    return root


def _dialog(qtbot, folder, out, **kw):
    from app.gui.dialogs.batch_dialog import BatchDialog

    dialog = BatchDialog([str(folder)], str(out), workers=1, **kw)
    qtbot.addWidget(dialog)
    return dialog


def test_dialog_saves_the_good_files_and_lists_the_failure(qtbot, folder, tmp_path):
    out = tmp_path / "study.h5"
    dialog = _dialog(qtbot, folder, out)
    dialog.show()
    dialog.start()
    qtbot.waitUntil(lambda: dialog.outcome != "running", timeout=120_000)
    assert dialog.outcome == "saved", dialog.failure_view.toPlainText()
    bad = str(folder / "cell01b.abf")
    assert [p for p, _ in dialog.failures] == [bad]
    assert bad in dialog.failure_view.toPlainText()
    assert dialog.bar.value() == dialog.bar.maximum() == 4
    good = [str(folder / f"cell{i:02d}.abf") for i in range(3)]
    stored = load_results(out).recordings
    assert [r.label for r in stored] == good
    for r, path in zip(stored, good):
        # The sequential analysis of the same file is the reference.
        ref = analyze(open_recording(path), label=path).beats
        for name in ref.names:
            assert list(map(str, r.beats[name])) == list(map(str, ref[name])), name
    assert "Saved 3 recording(s)" in dialog.status.text()


def test_cancel_after_the_first_file_writes_no_results_file(qtbot, folder, tmp_path):
    out = tmp_path / "study.h5"
    dialog = _dialog(qtbot, folder, out)
    dialog.worker.progressed.connect(lambda *a: dialog.cancel())
    dialog.start()
    qtbot.waitUntil(lambda: dialog.outcome != "running", timeout=120_000)
    assert dialog.outcome == "cancelled"
    assert dialog.failures == [] and dialog.bar.value() == 1  # the first file is a good one
    assert sorted(p.name for p in tmp_path.iterdir()) == ["cells"]  # no results file, no temporary file
    assert "No results file was written" in dialog.status.text()


def test_menu_action_asks_for_folder_and_file_then_runs(qtbot, folder, tmp_path, monkeypatch):
    from PySide6.QtWidgets import QFileDialog, QMainWindow

    from app.gui.dialogs import batch_dialog

    window = QMainWindow()
    qtbot.addWidget(window)
    menu = window.menuBar().addMenu("&File")
    out = tmp_path / "from-menu.h5"
    saved = []
    monkeypatch.setattr(QFileDialog, "getExistingDirectory", staticmethod(lambda *a, **k: str(folder)))
    monkeypatch.setattr(QFileDialog, "getSaveFileName", staticmethod(lambda *a, **k: (str(out), "Results (*.h5)")))
    action = batch_dialog.add_batch_action(menu, window, on_saved=saved.append)
    assert action in menu.actions() and action.text() == "&Batch-analyse a folder..."
    action.trigger()
    dialog = window._batch_dialog
    qtbot.waitUntil(lambda: dialog.outcome != "running", timeout=120_000)
    assert dialog.outcome == "saved" and saved == [str(out)] and out.exists()
