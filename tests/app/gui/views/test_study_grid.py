"""The study grid: cells by conditions, what each square says, and choosing a recording."""

from __future__ import annotations

import pytest

pytest.importorskip("pytestqt")

from PySide6 import QtCore

from app.gui.views.study_grid import ENTRY_ROLE, GridEntry, StudyGridView

CONDITIONS = ["baseline", "UP-113 1 uM", "washout"]


def _entries():
    out = []
    for cell, group in (("NL-0417", "UP-113"), ("NL-0502", "vehicle"), ("NL-0423", "UP-113")):
        for i, cond in enumerate(CONDITIONS):
            if cell == "NL-0502" and cond == "washout":
                continue  # the cell was lost before washout
            out.append(GridEntry(cell, cond, group, key=f"{cell}|{cond}", label=f"{cell}/{cond}.abf",
                                 n_used=30 + i, n_to_review=2 if cell == "NL-0423" else 0, n_rejected=1))
    return out


@pytest.fixture
def grid(qtbot):
    view = StudyGridView()
    qtbot.addWidget(view)
    view.resize(420, 300)
    view.set_entries(_entries(), conditions=CONDITIONS, cells=["NL-0417", "NL-0502", "NL-0423"])
    view.show()
    qtbot.waitExposed(view)
    return view


def test_rows_are_cells_grouped_and_columns_the_conditions_in_order(grid):
    model = grid.grid_model
    assert model.columnCount() == 3 and model.conditions == CONDITIONS
    # Rows grouped by group in the order groups first come, the study's order within a group.
    assert model.cells == ["NL-0417", "NL-0423", "NL-0502"]
    assert model.headerData(2, QtCore.Qt.Vertical) == "NL-0502\nvehicle"


def test_each_square_says_beats_used_and_waiting(grid):
    model = grid.grid_model
    assert model.data(model.index(0, 1)) == "31 used\n0 to review"
    assert model.data(model.index(1, 0)) == "30 used\n2 to review"
    assert model.data(model.index(2, 2)) == "—\nno recording"
    assert model.data(model.index(2, 2), ENTRY_ROLE) is None
    assert not model.flags(model.index(2, 2)) & QtCore.Qt.ItemIsSelectable
    assert GridEntry("c", "x", key="k").lines() == ("0", "no beats")
    assert GridEntry("c", "x", label="c/x.abf").lines() == ("—", "not analysed")


def test_a_click_chooses_a_recording(grid, qtbot):
    index = grid.grid_model.index(1, 2)
    rect = grid.visualRect(index)
    with qtbot.waitSignal(grid.recording_chosen) as blocker:
        qtbot.mouseClick(grid.viewport(), QtCore.Qt.LeftButton, pos=rect.center())
    assert blocker.args == ["NL-0423|washout"]


def test_arrows_move_and_return_chooses(grid, qtbot):
    grid.setFocus()
    grid.setCurrentIndex(grid.grid_model.index(0, 0))
    chosen = []
    grid.recording_chosen.connect(chosen.append)
    qtbot.keyClick(grid, QtCore.Qt.Key_Right)
    qtbot.keyClick(grid, QtCore.Qt.Key_Down)
    assert chosen == []  # moving the focus opens nothing
    qtbot.keyClick(grid, QtCore.Qt.Key_Return)
    assert chosen == ["NL-0423|UP-113 1 uM"]


def test_counts_update_in_place_and_the_current_square_is_marked(grid):
    model = grid.grid_model
    grid.set_current("NL-0417|washout")
    assert model.current == "NL-0417|washout"
    assert grid.currentIndex() == model.index(0, 2)
    model.update_entries([GridEntry("NL-0423", "baseline", "UP-113", key="NL-0423|baseline", n_used=32, n_to_review=0)])
    assert model.data(model.index(1, 0)) == "32 used\n0 to review"
    assert grid.currentIndex() == model.index(0, 2)  # the focus stays
    order = [e.key for e in model.entries_in_order()]
    assert order[:4] == ["NL-0417|baseline", "NL-0417|UP-113 1 uM", "NL-0417|washout", "NL-0423|baseline"]
    assert len(order) == 8


def test_one_group_is_not_repeated_beside_every_cell(qtbot):
    view = StudyGridView()
    qtbot.addWidget(view)
    view.set_entries([GridEntry("NL-S01", "baseline", "UP-113", key="a"), GridEntry("NL-S02", "baseline", "UP-113", key="b")])
    assert view.grid_model.headerData(1, QtCore.Qt.Vertical) == "NL-S02"


def test_a_square_whose_counts_are_not_known_yet_says_so():
    assert GridEntry("NL-S01", "baseline", key="k", ready=False).lines() == ("…", "summarising")
