"""The beat table: a Qt model over the core's BeatTable, sortable, in step with the trace view.

The model never copies or edits the table; sorting keeps a permutation of its rows (undefined
values last, in either direction), and decisions arrive as a new table from the session.
"""

from __future__ import annotations

import math

import numpy as np
from PySide6 import QtCore, QtGui, QtWidgets

from analysis.columns import column
from analysis.table import BeatTable

from .. import palette

__all__ = ["BeatTableModel", "BeatTableView", "SHOWN_COLUMNS", "header_label"]

#: Columns shown, in order: where and whether, the measured values, then the words.
SHOWN_COLUMNS = (
    "sweep", "beat", "t_upstroke_s", "accepted", "cl_ms", "rate_bpm", "mdp_mV", "top_mV",
    "ddr_mV_per_s", "ddr100_mV_per_s", "dvdt_max_V_per_s", "peak_mV", "apa_mV", "apd20_ms",
    "apd50_ms", "apd90_ms", "condition", "flags", "reject_reason",
)


def header_label(name: str) -> str:
    """The column's header text, its unit in brackets: the catalogue's (:mod:`analysis.columns`)."""
    try:
        return column(name).header
    except KeyError:
        return name


class BeatTableModel(QtCore.QAbstractTableModel):
    """Rows of a :class:`BeatTable`, in a sortable order."""

    def __init__(self, parent: QtCore.QObject | None = None) -> None:
        super().__init__(parent)
        self._table = BeatTable.empty()
        self._names: list[str] = []
        self._order = np.empty(0, dtype=np.int64)
        self._sort: tuple[int, QtCore.Qt.SortOrder] | None = None
        self._rejected_bg = QtGui.QBrush(QtGui.QColor(*palette.REJECTED_BAND[:3], 40))
        self._rejected_fg = QtGui.QBrush(QtGui.QColor(palette.REJECTED_LABEL))

    # -- data in and out ------------------------------------------------------------------------
    @property
    def table(self) -> BeatTable:
        return self._table

    def set_table(self, table: BeatTable | None) -> None:
        """Show a table; a table of the same rows (new decisions) keeps order and selection."""
        table = table if table is not None else BeatTable.empty()
        names = [n for n in SHOWN_COLUMNS if n in table]
        if len(table) == len(self._table) and names == self._names and len(table):
            self._table = table
            if self._sort is not None:
                self._apply_sort(*self._sort, notify=True)
            self.dataChanged.emit(self.index(0, 0), self.index(len(table) - 1, len(names) - 1))
            return
        self.beginResetModel()
        self._table, self._names = table, names
        self._order = np.arange(len(table), dtype=np.int64)
        if self._sort is not None:
            self._apply_sort(*self._sort, notify=False)
        self.endResetModel()

    def column_names(self) -> list[str]:
        return list(self._names)

    def table_row(self, view_row: int) -> int:
        """The beat-table row shown at a model row."""
        return int(self._order[view_row])

    def view_row(self, table_row: int) -> int:
        """The model row showing a beat-table row, or -1."""
        hits = np.flatnonzero(self._order == table_row)
        return int(hits[0]) if len(hits) else -1

    # -- Qt model API ---------------------------------------------------------------------------
    def rowCount(self, parent=QtCore.QModelIndex()) -> int:  # noqa: N802
        return 0 if parent.isValid() else len(self._table)

    def columnCount(self, parent=QtCore.QModelIndex()) -> int:  # noqa: N802
        return 0 if parent.isValid() else len(self._names)

    def headerData(self, section, orientation, role=QtCore.Qt.DisplayRole):  # noqa: N802
        if orientation != QtCore.Qt.Horizontal or section >= len(self._names):
            return None
        name = self._names[section]
        if role == QtCore.Qt.DisplayRole:
            return header_label(name)
        if role == QtCore.Qt.ToolTipRole:
            try:
                return f"{name}: {column(name).description}"
            except KeyError:
                return name
        return None

    def data(self, index, role=QtCore.Qt.DisplayRole):
        if not index.isValid():
            return None
        row = int(self._order[index.row()])
        name = self._names[index.column()]
        value = self._table[name][row]
        rejected = "accepted" in self._table and not self._table["accepted"][row]
        if role == QtCore.Qt.DisplayRole:
            return self._text(name, value)
        if role == QtCore.Qt.TextAlignmentRole:
            numeric = name not in ("reject_reason", "flags", "condition")
            return int((QtCore.Qt.AlignRight if numeric else QtCore.Qt.AlignLeft) | QtCore.Qt.AlignVCenter)
        if role == QtCore.Qt.BackgroundRole and rejected:
            return self._rejected_bg
        if role == QtCore.Qt.ForegroundRole and rejected:
            return self._rejected_fg
        if role == QtCore.Qt.ToolTipRole and rejected:
            reason = self._table["reject_reason"][row] if "reject_reason" in self._table else ""
            return f"rejected: {reason or 'no reason given'}"
        if role == QtCore.Qt.UserRole:
            return row
        return None

    @staticmethod
    def _text(name: str, value) -> str:
        if name == "accepted":
            return "✓" if value else "✕"
        if isinstance(value, (float, np.floating)):
            if not math.isfinite(value):
                return ""
            decimals = 3 if name == "t_upstroke_s" else 2 if name == "dvdt_max_V_per_s" else 1
            return f"{float(value):.{decimals}f}"
        return "" if value is None else str(value)

    def sort(self, column: int, order=QtCore.Qt.AscendingOrder) -> None:  # noqa: A003
        if not (0 <= column < len(self._names)):
            return
        self._sort = (column, order)
        self.layoutAboutToBeChanged.emit()
        self._apply_sort(column, order, notify=False)
        self.layoutChanged.emit()

    def _apply_sort(self, column: int, order, *, notify: bool) -> None:
        values = self._table[self._names[column]]
        if values.dtype.kind in "fiub":
            keys = values.astype(np.float64)
            finite = np.isfinite(keys)
            # Undefined values last, whatever the direction.
            if order == QtCore.Qt.DescendingOrder:
                keys = -keys
            base = np.lexsort((np.arange(len(keys)), keys, ~finite))
        else:
            text = np.array([str(v) for v in values], dtype=object)
            base = np.array(sorted(range(len(text)), key=lambda i: (text[i] == "", text[i], i)), dtype=np.int64)
            if order == QtCore.Qt.DescendingOrder:
                empty = text[base] == ""
                base = np.concatenate([base[~empty][::-1], base[empty]])
        self._order = np.asarray(base, dtype=np.int64)


class BeatTableView(QtWidgets.QTableView):
    """The beat table widget. ``row_selected(int)`` gives the beat-table row picked by the user."""

    row_selected = QtCore.Signal(int)

    def __init__(self, parent: QtWidgets.QWidget | None = None) -> None:
        super().__init__(parent)
        self.setObjectName("beat_table")
        self.beat_model = BeatTableModel(self)
        self.setModel(self.beat_model)
        self.setSortingEnabled(True)
        self.horizontalHeader().setSortIndicatorShown(True)
        self.horizontalHeader().setSortIndicator(-1, QtCore.Qt.AscendingOrder)
        self.setSelectionBehavior(QtWidgets.QAbstractItemView.SelectRows)
        self.setSelectionMode(QtWidgets.QAbstractItemView.SingleSelection)
        self.setAlternatingRowColors(True)
        self.verticalHeader().setVisible(False)
        self.verticalHeader().setDefaultSectionSize(22)
        self.setHorizontalScrollMode(QtWidgets.QAbstractItemView.ScrollPerPixel)
        self.setEditTriggers(QtWidgets.QAbstractItemView.NoEditTriggers)
        self._quiet = False
        self.selectionModel().currentRowChanged.connect(self._on_current)
        self.beat_model.modelReset.connect(self._fit_columns)

    def set_table(self, table: BeatTable | None) -> None:
        current = self.current_table_row()
        self.beat_model.set_table(table)
        if current >= 0 and current < self.beat_model.rowCount():
            self.select_table_row(current)

    def current_table_row(self) -> int:
        index = self.currentIndex()
        return self.beat_model.table_row(index.row()) if index.isValid() else -1

    def select_table_row(self, table_row: int) -> None:
        """Select and show a beat-table row without emitting ``row_selected``."""
        view_row = self.beat_model.view_row(table_row)
        if view_row < 0:
            return
        self._quiet = True
        try:
            index = self.beat_model.index(view_row, max(0, self.currentIndex().column()))
            self.setCurrentIndex(index)
            self.selectRow(view_row)
            self.scrollTo(index, QtWidgets.QAbstractItemView.EnsureVisible)
        finally:
            self._quiet = False

    def _on_current(self, current: QtCore.QModelIndex, _previous) -> None:
        if not self._quiet and current.isValid():
            self.row_selected.emit(self.beat_model.table_row(current.row()))

    def _fit_columns(self) -> None:
        header = self.horizontalHeader()
        for i in range(self.beat_model.columnCount()):
            wide = self.beat_model.column_names()[i] in ("reject_reason", "flags")
            header.resizeSection(i, max(44, header.sectionSizeFromContents(i).width() + 4, 110 if wide else 0))
