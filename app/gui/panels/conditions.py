"""Conditions: naming a span marked on the overview, its steady-state window, and the list.

A span dragged on the overview strip opens :class:`ConditionDialog` with the span filled in; the
user names it (baseline, the compound and its concentration, washout...) and chooses which beats
its summary uses: the core's suggested steady state, the whole condition, the last seconds or the
last beats. :class:`ConditionsPanel` lists the recording's conditions for editing and removal.
"""

from __future__ import annotations

import math
from typing import Sequence

from PySide6 import QtCore, QtGui, QtWidgets

from analysis.conditions import Condition, ConditionError, SteadyState

from .. import palette

__all__ = ["ConditionDialog", "ConditionsPanel", "NAME_SUGGESTIONS", "STEADY_CHOICES"]

NAME_SUGGESTIONS = ("baseline", "drug", "washout", "agonist", "antagonist", "vehicle")
#: (SteadyState kind, label) in the dialog's order.
STEADY_CHOICES = (
    ("auto", "suggested steady state"),
    ("last_s", "last … seconds"),
    ("last_beats", "last … beats"),
    ("all", "whole condition"),
)


def describe_condition(c: Condition) -> str:
    """One line: span and steady-state rule."""
    if c.unit == "sweeps":
        span = f"sweeps {int(c.start)}–{'end' if not math.isfinite(c.end) else int(c.end)}"
    else:
        span = f"{c.start:.1f}–{'end' if not math.isfinite(c.end) else f'{c.end:.1f}'} s"
    steady = dict(STEADY_CHOICES)[c.steady.kind]
    if c.steady.kind == "last_s":
        steady = f"last {c.steady.value:g} s"
    elif c.steady.kind == "last_beats":
        steady = f"last {int(c.steady.value)} beats"
    return f"{span}; steady state: {steady}"


class ConditionDialog(QtWidgets.QDialog):
    """Name a condition and choose its steady-state window."""

    def __init__(self, start_s: float, end_s: float, *, duration_s: float, taken: Sequence[str] = (),
                 condition: Condition | None = None, parent: QtWidgets.QWidget | None = None) -> None:
        super().__init__(parent)
        self.setObjectName("condition_dialog")
        self.setWindowTitle("Condition")
        self._taken = set(taken)
        form = QtWidgets.QFormLayout(self)
        self.name = QtWidgets.QComboBox()
        self.name.setEditable(True)
        self.name.addItems([n for n in NAME_SUGGESTIONS if n not in self._taken])
        self.name.setToolTip("Shown in the condition column of the beats CSV; e.g. 'compound 1 uM'")
        self.start = QtWidgets.QDoubleSpinBox()
        self.end = QtWidgets.QDoubleSpinBox()
        for spin in (self.start, self.end):
            spin.setDecimals(2)
            spin.setRange(0.0, max(duration_s, end_s) + 1e-6)
            spin.setSuffix(" s")
        self.start.setValue(max(0.0, start_s))
        self.end.setValue(min(end_s, duration_s))
        self.steady_kind = QtWidgets.QComboBox()
        for kind, label in STEADY_CHOICES:
            self.steady_kind.addItem(label, kind)
        self.steady_value = QtWidgets.QDoubleSpinBox()
        self.steady_value.setRange(1.0, 36000.0)
        self.steady_value.setValue(30.0)
        self.steady_kind.currentIndexChanged.connect(self._steady_kind_changed)
        self.message = QtWidgets.QLabel("")
        self.message.setStyleSheet(f"color: {palette.REJECTED_LABEL}")
        form.addRow("name", self.name)
        form.addRow("from", self.start)
        form.addRow("to", self.end)
        form.addRow("summary uses", self.steady_kind)
        form.addRow("", self.steady_value)
        form.addRow(self.message)
        buttons = QtWidgets.QDialogButtonBox(QtWidgets.QDialogButtonBox.Ok | QtWidgets.QDialogButtonBox.Cancel)
        buttons.accepted.connect(self.accept)
        buttons.rejected.connect(self.reject)
        form.addRow(buttons)
        if condition is not None:
            self.name.setEditText(condition.name)
            self.steady_kind.setCurrentIndex([k for k, _ in STEADY_CHOICES].index(condition.steady.kind))
            if condition.steady.value:
                self.steady_value.setValue(condition.steady.value)
        self._steady_kind_changed()
        self.result_condition: Condition | None = None

    def _steady_kind_changed(self, *_args) -> None:
        kind = self.steady_kind.currentData()
        self.steady_value.setEnabled(kind in ("last_s", "last_beats"))
        self.steady_value.setSuffix(" s" if kind == "last_s" else " beats" if kind == "last_beats" else "")
        self.steady_value.setDecimals(0 if kind == "last_beats" else 1)

    def condition(self) -> Condition:
        """The condition the dialog describes; raises ConditionError when it is not valid."""
        name = self.name.currentText().strip()
        if name in self._taken:
            raise ConditionError(None, f"a condition is already named {name!r}", "choose another name")
        kind = self.steady_kind.currentData()
        value = self.steady_value.value() if kind in ("last_s", "last_beats") else 0.0
        return Condition(name, self.start.value(), self.end.value(), "s", SteadyState(kind, value))

    def accept(self) -> None:
        try:
            self.result_condition = self.condition()
        except ConditionError as exc:
            self.message.setText(exc.one_line())
            return
        super().accept()


class ConditionsPanel(QtWidgets.QWidget):
    """The recording's conditions with buttons to mark, edit and remove them."""

    marking_toggled = QtCore.Signal(bool)
    edit_requested = QtCore.Signal(int)
    remove_requested = QtCore.Signal(int)

    def __init__(self, parent: QtWidgets.QWidget | None = None) -> None:
        super().__init__(parent)
        self.setObjectName("conditions_panel")
        layout = QtWidgets.QVBoxLayout(self)
        layout.setContentsMargins(4, 4, 4, 4)
        self.list = QtWidgets.QListWidget()
        self.list.setObjectName("conditions_list")
        self.list.itemDoubleClicked.connect(lambda item: self.edit_requested.emit(self.list.row(item)))
        layout.addWidget(self.list, 1)
        row = QtWidgets.QHBoxLayout()
        self.mark_button = QtWidgets.QPushButton("Mark on overview")
        self.mark_button.setCheckable(True)
        self.mark_button.setToolTip("Then drag across the overview strip (or Shift-drag there at any time)")
        self.mark_button.toggled.connect(self.marking_toggled)
        edit = QtWidgets.QPushButton("Edit…")
        edit.clicked.connect(lambda: self.list.currentRow() >= 0 and self.edit_requested.emit(self.list.currentRow()))
        remove = QtWidgets.QPushButton("Remove")
        remove.clicked.connect(lambda: self.list.currentRow() >= 0 and self.remove_requested.emit(self.list.currentRow()))
        for b in (self.mark_button, edit, remove):
            row.addWidget(b)
        layout.addLayout(row)

    def show_conditions(self, conditions: Sequence[Condition], colours: Sequence[str]) -> None:
        self.list.clear()
        for c, colour in zip(conditions, colours):
            item = QtWidgets.QListWidgetItem(f"■ {c.name}   {describe_condition(c)}")
            item.setForeground(QtGui.QBrush(QtGui.QColor(colour)))
            item.setToolTip(c.text())
            self.list.addItem(item)

    def set_marking(self, on: bool) -> None:
        self.mark_button.blockSignals(True)
        self.mark_button.setChecked(on)
        self.mark_button.blockSignals(False)
