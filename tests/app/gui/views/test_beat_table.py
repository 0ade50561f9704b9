"""The beat table model over a BeatTable: values, sorting with undefined values last, selection."""

from __future__ import annotations

import numpy as np
import pytest

pytest.importorskip("pytestqt")

from PySide6 import QtCore  # noqa: E402

from app.gui.views.beat_table import BeatTableView  # noqa: E402

from ..handmade import handmade  # noqa: E402


@pytest.fixture
def table_view(qtbot):
    w = BeatTableView()
    qtbot.addWidget(w)
    _rec, beats = handmade()
    cl = beats["cl_ms"].copy()
    cl[4] = 1900.0
    w.set_table(beats.with_columns(cl_ms=cl))
    return w


def test_cells_show_the_table(table_view):
    model = table_view.beat_model
    col = model.column_names().index("cl_ms")
    assert model.rowCount() == len(model.table)
    assert model.data(model.index(4, col)) == "1900.0"
    assert model.data(model.index(0, col)) == ""  # undefined is empty, never 0 (CONTRACT.md)


def test_sorting_puts_undefined_last_both_ways(table_view):
    model = table_view.beat_model
    col = model.column_names().index("cl_ms")
    cl = model.table["cl_ms"]
    n_nan = int(np.isnan(cl).sum())
    for order in (QtCore.Qt.DescendingOrder, QtCore.Qt.AscendingOrder):
        model.sort(col, order)
        shown = np.array([cl[model.table_row(i)] for i in range(model.rowCount())])
        assert np.isnan(shown[-n_nan:]).all() and np.isfinite(shown[:-n_nan]).all()
    model.sort(col, QtCore.Qt.DescendingOrder)
    assert model.table_row(0) == 4  # the longest cycle first


def test_selection_round_trip(table_view, qtbot):
    model = table_view.beat_model
    model.sort(model.column_names().index("cl_ms"), QtCore.Qt.DescendingOrder)
    with qtbot.waitSignal(table_view.row_selected) as sig:
        table_view.setCurrentIndex(model.index(0, 2))
    assert sig.args == [4]
    with qtbot.assertNotEmitted(table_view.row_selected):
        table_view.select_table_row(7)
    assert table_view.current_table_row() == 7


def test_new_decisions_keep_the_rows_and_grey_the_rejected(table_view):
    model = table_view.beat_model
    beats = model.table
    acc = beats["accepted"].copy()
    acc[2] = 0
    reason = beats["reject_reason"].copy()
    reason[2] = "artefact"
    table_view.select_table_row(5)
    table_view.set_table(beats.with_columns(accepted=acc, reject_reason=reason))
    assert table_view.current_table_row() == 5
    r = model.view_row(2)
    assert model.data(model.index(r, model.column_names().index("accepted"))) == "✕"
    assert "artefact" in model.data(model.index(r, 0), QtCore.Qt.ToolTipRole)
