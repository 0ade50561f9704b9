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

__all__ = ["BeatFilterBar", "BeatTableModel", "BeatTableView", "FILTERS", "SHOWN_COLUMNS", "filter_mask", "header_label"]

#: Columns shown, in order: where and whether, the measured values, then the words.
SHOWN_COLUMNS = (
    "sweep", "beat", "t_upstroke_s", "accepted", "cl_ms", "rate_bpm", "mdp_mV", "top_mV",
    "ddr_mV_per_s", "ddr100_mV_per_s", "dvdt_max_V_per_s", "peak_mV", "apa_mV", "apd20_ms",
    "apd50_ms", "apd90_ms", "condition", "flags", "verdict", "reject_reason", "decided_by",
)

#: The beat table's filters: key -> what the menu says. Any other key is a flag's word.
FILTERS = {
    "all": "all beats",
    "to_review": "waiting for a look",
    "unreviewed": "not yet reviewed",
    "rejected": "rejected",
    "accepted": "accepted",
    "flagged": "with any flag",
}


def filter_mask(table: BeatTable, name: str) -> np.ndarray | None:
    """Which rows a filter keeps (None: all of them)."""
    n = len(table)
    if name == "all" or not n:
        return None
    if name in ("to_review", "rejected", "accepted"):
        if "verdict" in table:
            return np.asarray(table["verdict"], dtype=object) == name
        ok = np.asarray(table["accepted"]) != 0
        return ok if name == "accepted" else ~ok if name == "rejected" else np.zeros(n, bool)
    if name == "unreviewed":
        return np.asarray(table["reviewed"]) == 0 if "reviewed" in table else np.ones(n, bool)
    flags = np.asarray(table["flags"], dtype=object) if "flags" in table else np.full(n, "", dtype=object)
    if name == "flagged":
        return np.array([bool(f) for f in flags], dtype=bool)
    return np.array([name in str(f).split(";") for f in flags], dtype=bool)

_WORD_COLUMNS = ("reject_reason", "flags", "condition", "verdict", "decided_by")
_DISPLAY, _ALIGN, _USER = QtCore.Qt.DisplayRole, QtCore.Qt.TextAlignmentRole, QtCore.Qt.UserRole
_BACKGROUND, _FOREGROUND = QtCore.Qt.BackgroundRole, QtCore.Qt.ForegroundRole
_ROLES = (_DISPLAY, _ALIGN, _USER, _BACKGROUND, _FOREGROUND, QtCore.Qt.ToolTipRole)
_RIGHT = int(QtCore.Qt.AlignRight | QtCore.Qt.AlignVCenter)
_LEFT = int(QtCore.Qt.AlignLeft | QtCore.Qt.AlignVCenter)
#: What the ``accepted`` column shows for each verdict.
_VERDICT_MARK = {"accepted": "✓", "rejected": "✕", "to_review": "?"}


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
        self._filter = "all"
        self._arrays: list[np.ndarray] = []
        self._numeric: list[bool] = []
        self._verdicts: np.ndarray | None = None
        self._rejected_bg = QtGui.QBrush(QtGui.QColor(*palette.REJECTED_BAND[:3], 40))
        self._rejected_fg = QtGui.QBrush(QtGui.QColor(palette.REJECTED_LABEL))
        self._waiting_bg = QtGui.QBrush(QtGui.QColor(*palette.REVIEW_BAND[:3], 50))

    # -- data in and out ------------------------------------------------------------------------
    @property
    def table(self) -> BeatTable:
        return self._table

    def set_table(self, table: BeatTable | None, changed=None) -> None:
        """Show a table; a table of the same rows (new decisions) keeps order and selection.

        ``changed`` names the rows whose verdict changed (a review key): only they are redrawn,
        and the order stays as it is (neither sorted nor filtered again), so that the row under
        review never jumps away. None: every row may have changed, and the order is made again.
        """
        table = table if table is not None else BeatTable.empty()
        names = [n for n in SHOWN_COLUMNS if n in table]
        if len(table) == len(self._table) and names == self._names and len(table):
            self._table = table
            self._columns_changed()
            if changed is not None:
                last = len(names) - 1
                for row in changed:
                    view_row = self.view_row(int(row))
                    if view_row >= 0:
                        self.dataChanged.emit(self.index(view_row, 0), self.index(view_row, last))
                return
            self.layoutAboutToBeChanged.emit()
            self._make_order()
            self.layoutChanged.emit()
            self.dataChanged.emit(self.index(0, 0), self.index(max(0, self.rowCount() - 1), len(names) - 1))
            return
        self.beginResetModel()
        self._table, self._names = table, names
        self._columns_changed()
        self._make_order()
        self.endResetModel()

    def set_filter(self, name: str) -> None:
        """Show only some beats: a key of :data:`FILTERS`, or a flag's word."""
        self.layoutAboutToBeChanged.emit()
        self._filter = name
        self._make_order()
        self.layoutChanged.emit()

    def shown_rows(self) -> np.ndarray:
        """The beat-table rows shown, in the order shown."""
        return self._order.copy()

    def _make_order(self) -> None:
        self._order = np.arange(len(self._table), dtype=np.int64)
        if self._sort is not None:
            self._apply_sort(*self._sort, notify=False)
        keep = filter_mask(self._table, self._filter)
        if keep is not None:
            self._order = self._order[keep[self._order]]

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
        return 0 if parent.isValid() else len(self._order)

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

    def _verdict(self, row: int) -> str:
        return str(self._verdicts[row]) if self._verdicts is not None else "accepted"

    def _columns_changed(self) -> None:
        """Arrays looked up once per table, not once per cell painted."""
        t = self._table
        self._arrays = [t[name] for name in self._names]
        self._numeric = [name not in _WORD_COLUMNS for name in self._names]
        if "verdict" in t:
            self._verdicts = np.asarray(t["verdict"], dtype=object)
        elif "accepted" in t:
            self._verdicts = np.where(np.asarray(t["accepted"]) != 0, "accepted", "rejected").astype(object)
        else:
            self._verdicts = None

    def data(self, index, role=QtCore.Qt.DisplayRole):
        if role not in _ROLES or not index.isValid():
            return None
        row = int(self._order[index.row()])
        col = index.column()
        if role == _DISPLAY:
            name = self._names[col]
            if name == "accepted":
                return _VERDICT_MARK[self._verdict(row)]
            return self._text(name, self._arrays[col][row])
        if role == _ALIGN:
            return _RIGHT if self._numeric[col] else _LEFT
        if role == _USER:
            return row
        verdict = self._verdict(row)
        if verdict == "accepted":
            return None
        if role == _BACKGROUND:
            return self._rejected_bg if verdict == "rejected" else self._waiting_bg
        if role == _FOREGROUND:
            return self._rejected_fg if verdict == "rejected" else None
        if verdict == "rejected":
            reason = self._table["reject_reason"][row] if "reject_reason" in self._table else ""
            return f"rejected: {reason or 'no reason given'}"
        return f"waiting for a look (flags: {self._table['flags'][row]}); left out of the summaries until reviewed"

    @staticmethod
    def _text(name: str, value) -> str:
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
        self._make_order()
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

    def set_table(self, table: BeatTable | None, changed=None) -> None:
        """Show a table (``changed``: see :meth:`BeatTableModel.set_table`)."""
        current = self.current_table_row()
        self.beat_model.set_table(table, changed)
        if changed is None and current >= 0 and current < len(self.beat_model.table):
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


class BeatFilterBar(QtWidgets.QWidget):
    """"show: [which beats]" above the beat table. ``filter_chosen(str)`` gives a key of
    :data:`FILTERS` or a flag's word."""

    filter_chosen = QtCore.Signal(str)

    def __init__(self, parent: QtWidgets.QWidget | None = None) -> None:
        super().__init__(parent)
        from analysis.columns import FLAG_VOCABULARY

        layout = QtWidgets.QHBoxLayout(self)
        layout.setContentsMargins(2, 0, 2, 0)
        layout.addWidget(QtWidgets.QLabel("show"))
        self.combo = QtWidgets.QComboBox()
        self.combo.setObjectName("beat_filter")
        self.combo.setToolTip("Which beats the table lists (a verdict given while a filter is on leaves the row in place)")
        for key, text in FILTERS.items():
            self.combo.addItem(text, key)
        self.combo.insertSeparator(self.combo.count())
        for word in FLAG_VOCABULARY:
            self.combo.addItem(f"flagged {word}", word)
        self.combo.activated.connect(lambda i: self.filter_chosen.emit(self.combo.itemData(i)))
        layout.addWidget(self.combo)
        layout.addStretch(1)

    def choose(self, key: str) -> None:
        """Pick a filter as the user would."""
        self.combo.setCurrentIndex(self.combo.findData(key))
        self.filter_chosen.emit(key)
