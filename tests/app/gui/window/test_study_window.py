"""The study in the main window: the grid opens with the results file, moves through the
recordings from the keyboard, follows the review, and the review is saved into the same file."""

from __future__ import annotations

import csv
from dataclasses import replace

import numpy as np
import pytest
import scipy.stats

pytest.importorskip("pytestqt")

from PySide6 import QtCore

from analysis.results import read_study
from analysis.session import Session

from .study_files import CELLS, CONDITIONS, make_study


@pytest.fixture(scope="module")
def study(tmp_path_factory):
    """The study's results file and layout (made once for the module)."""
    return make_study(tmp_path_factory.mktemp("study"))


@pytest.fixture
def window(qtbot, study, tmp_path):
    from app.gui.window.main_window import MainWindow

    results, _layout = study
    copy = tmp_path / "study.h5"  # each test reviews its own copy
    copy.write_bytes(results.read_bytes())
    w = MainWindow(interactive=False)
    qtbot.addWidget(w)
    w.resize(1366, 768)
    w.show()
    w.open_results(str(copy))
    assert w.settle(120_000)
    return w


def _where(w, key):
    e = next(e for e in w.study.panel.grid.grid_model.entries_in_order() if e.key == key)
    return e.cell, e.condition


def test_a_study_opens_as_a_grid_of_cells_by_conditions(window):
    w = window
    assert w.study.grid_dock.isVisible() and w.study.layout is not None
    model = w.study.panel.grid.grid_model
    assert model.cells == list(CELLS) and model.conditions == list(CONDITIONS)
    # Each square is the core's row of the cell x condition table.
    table = w.study.tables.table
    for e in model.entries_in_order():
        i = next(i for i in range(len(table["cell"])) if table["cell"][i] == e.cell and table["condition"][i] == e.condition)
        assert e.n_used == table["n_used"][i] > 0 and e.n_to_review == table["n_to_review"][i]
    # The study opens on its first square, outlined.
    assert _where(w, w.key) == (CELLS[0], CONDITIONS[0]) and model.current == w.key


def test_the_comparison_draws_each_cell_and_the_mean_and_sem_over_cells(window, tmp_path):
    w = window
    w.study.show_comparison()
    w.study.comparison.redraw()
    drawn = w.study.comparison.figure.drawn["rate_bpm"]
    table = w.study.tables.table
    for j, cond in enumerate(CONDITIONS):
        rows = [i for i in range(len(table["cell"])) if table["condition"][i] == cond]
        values = np.array([table["rate_mean_bpm"][i] for i in rows])
        for i in rows:
            assert drawn["cells"][table["cell"][i]][j] == pytest.approx(table["rate_mean_bpm"][i])
        _x, mean, sem, n = drawn["means"][""]
        assert mean[j] == pytest.approx(np.mean(values))  # numpy reference
        assert sem[j] == pytest.approx(scipy.stats.sem(values))  # scipy.stats reference (SD/sqrt(n), ddof=1)
        assert n[j] == len(CELLS)
    # Every cell slows under UP-113 (the synthetic cells' cycle lengths, tests/app/gui/window/study_files.py).
    assert all(v[1] < v[0] for v in drawn["cells"].values())
    # The comparison CSV of the Study menu: its paired t-test is scipy's on the cells' values.
    path = w.study.export_csv("comparison", tmp_path / "comparison.csv")
    with open(path, encoding="utf-8") as fh:
        rows = list(csv.DictReader(fh))
    group = next(r for r in rows if r["row"] == "group" and r["parameter"] == "rate")
    base, drug = (np.array([drawn["cells"][c][j] for c in CELLS]) for j in (0, 1))
    assert float(group["paired_t_p"]) == pytest.approx(scipy.stats.ttest_rel(drug, base).pvalue, abs=1e-4)  # scipy.stats
    assert int(group["n"]) == len(CELLS)


def test_keys_move_through_the_study_in_grid_order(window, qtbot):
    w = window
    w.setFocus()
    expected = [(c, k) for c in CELLS for k in CONDITIONS]
    seen = [_where(w, w.key)]
    for _ in range(len(expected) - 1):
        qtbot.keyClick(w, QtCore.Qt.Key_PageDown, QtCore.Qt.ControlModifier)
        assert w.settle(60_000)
        seen.append(_where(w, w.key))
    assert seen == expected
    qtbot.keyClick(w, QtCore.Qt.Key_PageUp, QtCore.Qt.ControlModifier)
    assert w.settle(60_000)
    assert _where(w, w.key) == expected[-2]
    assert w.study.grid_dock.isVisible()  # the study stays while recordings change
    # Ctrl+Shift+PgDown: the next square with beats waiting for review, wrapping round the study.
    model = w.study.panel.grid.grid_model
    waiting = next(e for e in model.entries_in_order() if (e.cell, e.condition) == expected[1])
    model.update_entries([replace(waiting, n_to_review=3)])
    qtbot.keyClick(w, QtCore.Qt.Key_PageDown, QtCore.Qt.ControlModifier | QtCore.Qt.ShiftModifier)
    assert w.settle(60_000)
    assert _where(w, w.key) == expected[1]
    model.update_entries([replace(waiting, n_to_review=0)])
    qtbot.keyClick(w, QtCore.Qt.Key_PageDown, QtCore.Qt.ControlModifier | QtCore.Qt.ShiftModifier)
    assert _where(w, w.key) == expected[1] and "no recording" in w.statusBar().currentMessage()


def test_the_grid_opens_a_recording_from_the_keyboard(window, qtbot):
    w = window
    qtbot.keyClick(w, QtCore.Qt.Key_G, QtCore.Qt.ControlModifier)
    grid = w.study.panel.grid
    assert grid.hasFocus()
    qtbot.keyClick(grid, QtCore.Qt.Key_Down)
    qtbot.keyClick(grid, QtCore.Qt.Key_Right)
    assert _where(w, w.key) == (CELLS[0], CONDITIONS[0])  # moving the focus opens nothing
    qtbot.keyClick(grid, QtCore.Qt.Key_Return)
    assert w.settle(60_000)
    assert _where(w, w.key) == (CELLS[1], CONDITIONS[1])
    assert w.recording_combo.currentData() == w.key
    # The review keys work while the keyboard is on the grid.
    row = w.current_row
    qtbot.keyClick(grid, QtCore.Qt.Key_N)
    assert w.current_row != row and w.current_row >= 0


def test_the_grid_and_figure_follow_the_review_and_it_is_saved_in_the_study(window):
    w = window
    key, path = w.key, w.results_path
    cell = _where(w, key)[0]

    def square():
        return next(e for e in w.study.panel.grid.grid_model.entries_in_order() if e.key == key)

    before = square().n_used
    rate_before = w.study.comparison.figure.drawn["rate_bpm"]["cells"][cell][0]
    rows = w.state.sweep_rows()
    middle = int(rows[rows.size // 2])  # a beat of the steady window, well inside the sweep
    w.select_beat(middle)
    w.reject_current("seal or access trouble")
    assert w.settle(60_000)
    assert square().n_used == before - 1
    table = w.study.tables.table
    i = next(i for i in range(len(table["cell"])) if table["cell"][i] == cell and table["condition"][i] == CONDITIONS[0])
    w.study.comparison.redraw()
    rate_after = w.study.comparison.figure.drawn["rate_bpm"]["cells"][cell][0]
    assert rate_after == pytest.approx(table["rate_mean_bpm"][i]) and rate_after != rate_before
    assert w.save_results(path)
    assert read_study(path) is not None  # the results file is still the study
    reopened = Session.open(path)
    assert not reopened.beats(key)["accepted"][middle]
    assert reopened.beats(key)["reject_reason"][middle] == "seal or access trouble"
