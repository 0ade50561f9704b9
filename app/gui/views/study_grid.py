"""The study grid: one row per cell, one column per condition, one recording in each square.

Each square says how many beats the summary uses and how many wait for review, so that a
reviewer sees at a glance which recordings are done and where work is left. Choosing a square
(a click, or Return on the keyboard) asks for its recording; arrow keys only move the focus, so
that walking across the grid does not open every recording on the way.

The grid draws a plain list of :class:`GridEntry` (one per cell x condition, built by the study
controller from the core's per-cell-and-condition table); it never reads the session itself.
"""

from __future__ import annotations

from collections.abc import Sequence
from dataclasses import dataclass

from PySide6 import QtCore, QtGui, QtWidgets

from .. import palette

__all__ = ["ENTRY_ROLE", "GridEntry", "StudyGridModel", "StudyGridView"]

#: The item role that returns a square's :class:`GridEntry` (None for a missing recording).
ENTRY_ROLE = QtCore.Qt.UserRole + 1

#: Colours of the squares: waiting for review, reviewed, no recording.
_WAITING = "#f6e3b4"
_WAITING_INK = palette.FLAG_LABEL
_DONE_INK = "#2f6b3a"
_MISSING = "#eeece6"
_QUIET_INK = "#8a8f96"


@dataclass(frozen=True)
class GridEntry:
    """One cell x condition of a study, as the grid shows it.

    Attributes
    ----------
    cell, condition, group : str
        Where the square sits; the group (e.g. the drug given) is shown beside the cell.
    key : str or None
        The session key of the recording (None: the layout names it but it is not analysed).
    label : str
        The recording's file, as the study layout gives it.
    n_used, n_to_review, n_rejected : int
        Beats the summary uses, beats waiting for review, beats rejected.
    window : str
        The stretch of the recording the summary uses (e.g. "last 30 s"), for the tooltip.
    """

    cell: str
    condition: str
    group: str = ""
    key: str | None = None
    label: str = ""
    n_used: int = 0
    n_to_review: int = 0
    n_rejected: int = 0
    window: str = ""
    #: False while the counts are being worked out (the study just opened).
    ready: bool = True

    @property
    def state(self) -> str:
        """``missing``, ``pending`` (counts not known yet), ``waiting`` (beats to review),
        ``quiet`` (no beat at all) or ``done``."""
        if self.key is None:
            return "missing"
        if not self.ready:
            return "pending"
        if self.n_to_review > 0:
            return "waiting"
        if self.n_used + self.n_rejected == 0:
            return "quiet"
        return "done"

    def lines(self) -> tuple[str, str]:
        """The square's two lines of text."""
        state = self.state
        if state == "missing":
            return "—", "not analysed" if self.label else "no recording"
        if state == "quiet":
            return "0", "no beats"
        if state == "pending":
            return "…", "summarising"
        second = f"{self.n_to_review} to review"
        return f"{self.n_used} used", second

    def tooltip(self) -> str:
        if self.key is None:
            if self.label:
                return f"{self.cell}, {self.condition}: {self.label} is not in the results file; analyse it with the study"
            return f"{self.cell}, {self.condition}: no recording in the study"
        rows = [f"<b>{self.cell}</b>, {self.condition}" + (f" ({self.group})" if self.group else ""),
                self.label or self.key,
                f"{self.n_used} beats used" + (f" ({self.window})" if self.window else ""),
                f"{self.n_to_review} waiting for review", f"{self.n_rejected} rejected"]
        return "<br>".join(rows)


class StudyGridModel(QtCore.QAbstractTableModel):
    """Cells (rows, grouped) by conditions (columns, in the study's order) of :class:`GridEntry`."""

    def __init__(self, parent: QtCore.QObject | None = None) -> None:
        super().__init__(parent)
        self._cells: list[tuple[str, str]] = []  # (cell, group) per row
        self._conditions: list[str] = []
        self._entries: dict[tuple[str, str], GridEntry] = {}
        self._current: str | None = None

    # -- data in --------------------------------------------------------------------------------
    def set_entries(self, entries: Sequence[GridEntry], *, conditions: Sequence[str] = (),
                    cells: Sequence[str] = ()) -> None:
        """Show a study's squares.

        ``conditions`` and ``cells`` give the order of columns and rows (the study's); names
        they leave out follow in the order they first appear. Rows are grouped by group, the
        groups in the order their first cell comes.
        """
        order = list(dict.fromkeys([*conditions, *(e.condition for e in entries)]))
        cell_order = list(dict.fromkeys([*cells, *(e.cell for e in entries)]))
        groups: dict[str, str] = {}
        for e in entries:
            groups.setdefault(e.cell, e.group)
        group_rank = {g: i for i, g in enumerate(dict.fromkeys(groups.get(c, "") for c in cell_order))}
        cell_order.sort(key=lambda c: group_rank[groups.get(c, "")])  # stable: the study's order within a group
        self.beginResetModel()
        self._conditions = order
        # The group beside each cell only when there is more than one to tell apart.
        several = len(group_rank) > 1
        self._cells = [(c, groups.get(c, "") if several else "") for c in cell_order]
        self._entries = {(e.cell, e.condition): e for e in entries}
        self.endResetModel()

    def update_entries(self, entries: Sequence[GridEntry]) -> None:
        """New counts for squares already shown (after a verdict): no reset, the focus stays.
        Entries of cells or conditions not shown are ignored."""
        for e in entries:
            self._entries[(e.cell, e.condition)] = e
        if self._cells and self._conditions:
            self.dataChanged.emit(self.index(0, 0), self.index(len(self._cells) - 1, len(self._conditions) - 1))

    def set_current(self, key: str | None) -> None:
        """Outline the square of the recording under review."""
        self._current = key
        if self._cells and self._conditions:
            self.dataChanged.emit(self.index(0, 0), self.index(len(self._cells) - 1, len(self._conditions) - 1))

    # -- data out -------------------------------------------------------------------------------
    @property
    def conditions(self) -> list[str]:
        return list(self._conditions)

    @property
    def cells(self) -> list[str]:
        return [c for c, _g in self._cells]

    @property
    def current(self) -> str | None:
        return self._current

    def entry(self, index: QtCore.QModelIndex) -> GridEntry | None:
        if not index.isValid():
            return None
        cell, _group = self._cells[index.row()]
        return self._entries.get((cell, self._conditions[index.column()]))

    def index_of(self, key: str) -> QtCore.QModelIndex:
        """The square of a recording (invalid when it is not in the grid)."""
        for r, (cell, _g) in enumerate(self._cells):
            for c, cond in enumerate(self._conditions):
                e = self._entries.get((cell, cond))
                if e is not None and e.key == key:
                    return self.index(r, c)
        return QtCore.QModelIndex()

    def entries_in_order(self) -> list[GridEntry]:
        """The recordings of the grid, row by row (cell by cell, each through its conditions)."""
        out = []
        for cell, _g in self._cells:
            for cond in self._conditions:
                e = self._entries.get((cell, cond))
                if e is not None and e.key is not None:
                    out.append(e)
        return out

    def rowCount(self, parent=None) -> int:
        return 0 if parent is not None and parent.isValid() else len(self._cells)

    def columnCount(self, parent=None) -> int:
        return 0 if parent is not None and parent.isValid() else len(self._conditions)

    def data(self, index: QtCore.QModelIndex, role: int = QtCore.Qt.DisplayRole):
        e = self.entry(index)
        if role == ENTRY_ROLE:
            return e
        if e is None:
            cell, _g = self._cells[index.row()]
            e = GridEntry(cell=cell, condition=self._conditions[index.column()])
        if role == QtCore.Qt.DisplayRole:
            return "\n".join(e.lines())
        if role == QtCore.Qt.ToolTipRole:
            return e.tooltip()
        if role == QtCore.Qt.AccessibleTextRole:
            return f"{e.cell}, {e.condition}: " + ", ".join(e.lines())
        return None

    def flags(self, index: QtCore.QModelIndex) -> QtCore.Qt.ItemFlags:
        e = self.entry(index)
        if e is None or e.key is None:
            return QtCore.Qt.ItemIsEnabled
        return QtCore.Qt.ItemIsEnabled | QtCore.Qt.ItemIsSelectable

    def headerData(self, section: int, orientation, role: int = QtCore.Qt.DisplayRole):
        if role not in (QtCore.Qt.DisplayRole, QtCore.Qt.ToolTipRole):
            return None
        if orientation == QtCore.Qt.Horizontal:
            return self._conditions[section] if 0 <= section < len(self._conditions) else None
        if 0 <= section < len(self._cells):
            cell, group = self._cells[section]
            if role == QtCore.Qt.ToolTipRole:
                return f"cell {cell}" + (f", group {group}" if group else "")
            return f"{cell}\n{group}" if group else cell
        return None


class _SquareDelegate(QtWidgets.QStyledItemDelegate):
    """Paints a square: its ground by state, the beats used, what is left, the current outline."""

    def paint(self, painter: QtGui.QPainter, option: QtWidgets.QStyleOptionViewItem, index: QtCore.QModelIndex) -> None:
        model: StudyGridModel = index.model()
        e = index.data(ENTRY_ROLE)
        cell = model.cells[index.row()]
        e = e if e is not None else GridEntry(cell=cell, condition=model.conditions[index.column()])
        state = e.state
        rect = option.rect.adjusted(2, 2, -2, -2)
        painter.save()
        painter.setRenderHint(QtGui.QPainter.Antialiasing, True)
        ground = {"waiting": _WAITING, "missing": _MISSING}.get(state, palette.PAPER)
        painter.setPen(QtGui.QPen(QtGui.QColor(palette.GRID), 1))
        painter.setBrush(QtGui.QColor(ground))
        painter.drawRoundedRect(rect, 4, 4)
        if option.state & QtWidgets.QStyle.State_HasFocus or option.state & QtWidgets.QStyle.State_Selected:
            painter.setPen(QtGui.QPen(QtGui.QColor(palette.ENVELOPE), 1, QtCore.Qt.DashLine))
            painter.setBrush(QtCore.Qt.NoBrush)
            painter.drawRoundedRect(rect.adjusted(1, 1, -1, -1), 4, 4)
        if e.key is not None and e.key == model.current:
            painter.setPen(QtGui.QPen(QtGui.QColor(palette.TRACE), 2.5))
            painter.setBrush(QtCore.Qt.NoBrush)
            painter.drawRoundedRect(rect.adjusted(1, 1, -1, -1), 4, 4)
        first, second = e.lines()
        font = QtGui.QFont(option.font)
        top = QtCore.QRectF(rect.adjusted(6, 3, -6, -rect.height() // 2))
        bottom = QtCore.QRectF(rect.adjusted(6, rect.height() // 2, -6, -3))
        font.setBold(state in ("done", "waiting"))
        painter.setFont(font)
        painter.setPen(QtGui.QColor(palette.INK if state in ("done", "waiting") else _QUIET_INK))
        painter.drawText(top, QtCore.Qt.AlignLeft | QtCore.Qt.AlignBottom, first)
        font.setBold(state == "waiting")
        font.setPointSizeF(font.pointSizeF() * 0.92)
        painter.setFont(font)
        ink = {"waiting": _WAITING_INK, "done": _DONE_INK}.get(state, _QUIET_INK)
        painter.setPen(QtGui.QColor(ink))
        painter.drawText(bottom, QtCore.Qt.AlignLeft | QtCore.Qt.AlignTop, ("✓ " if state == "done" else "") + second)
        painter.restore()

    def sizeHint(self, option, index) -> QtCore.QSize:
        metrics = QtGui.QFontMetrics(option.font)
        return QtCore.QSize(metrics.horizontalAdvance("000 to review") + 16, 2 * metrics.height() + 12)


class StudyGridView(QtWidgets.QTableView):
    """The grid of a study's recordings.

    Signals
    -------
    recording_chosen(str)
        The session key of the recording a click or Return chose.
    """

    recording_chosen = QtCore.Signal(str)

    def __init__(self, parent: QtWidgets.QWidget | None = None) -> None:
        super().__init__(parent)
        self.setObjectName("study_grid")
        self.grid_model = StudyGridModel(self)
        self.setModel(self.grid_model)
        self.setItemDelegate(_SquareDelegate(self))
        self.setSelectionMode(QtWidgets.QAbstractItemView.SingleSelection)
        self.setSelectionBehavior(QtWidgets.QAbstractItemView.SelectItems)
        self.setShowGrid(False)
        self.setWordWrap(False)
        self.setEditTriggers(QtWidgets.QAbstractItemView.NoEditTriggers)
        self.setTabKeyNavigation(False)
        self.horizontalHeader().setSectionResizeMode(QtWidgets.QHeaderView.ResizeToContents)
        self.horizontalHeader().setMinimumSectionSize(64)
        self.verticalHeader().setSectionResizeMode(QtWidgets.QHeaderView.ResizeToContents)
        self.verticalHeader().setDefaultAlignment(QtCore.Qt.AlignLeft | QtCore.Qt.AlignVCenter)
        self.setStyleSheet(f"QTableView {{ background: {palette.PAPER}; border: none; }}")
        self.clicked.connect(self._choose)

    def set_entries(self, entries: Sequence[GridEntry], *, conditions: Sequence[str] = (),
                    cells: Sequence[str] = ()) -> None:
        self.grid_model.set_entries(entries, conditions=conditions, cells=cells)

    def update_entries(self, entries: Sequence[GridEntry]) -> None:
        self.grid_model.update_entries(entries)

    def set_current(self, key: str | None) -> None:
        """Outline the recording under review and move the focus to it."""
        self.grid_model.set_current(key)
        index = self.grid_model.index_of(key) if key is not None else QtCore.QModelIndex()
        if index.isValid():
            self.selectionModel().setCurrentIndex(index, QtCore.QItemSelectionModel.ClearAndSelect)
            self.scrollTo(index)

    def _choose(self, index: QtCore.QModelIndex) -> None:
        e = self.grid_model.entry(index)
        if e is not None and e.key is not None:
            self.recording_chosen.emit(e.key)

    def keyPressEvent(self, event: QtGui.QKeyEvent) -> None:
        if event.key() in (QtCore.Qt.Key_Return, QtCore.Qt.Key_Enter) and not event.modifiers():
            self._choose(self.currentIndex())
            event.accept()
            return
        super().keyPressEvent(event)
