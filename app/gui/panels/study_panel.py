"""The study's two panels: the grid of its recordings, and the comparison across its cells.

:class:`StudyPanel` is the grid (:class:`~app.gui.views.study_grid.StudyGridView`) under a line
that counts what is left to review, with buttons to step through the recordings.
:class:`ComparisonPanel` is the comparison figure with the choice of its parameters and its
export. Both show what they are given and report requests with Qt signals; the study controller
(:mod:`app.gui.window.study`) acts on them.
"""

from __future__ import annotations

import os
from collections.abc import Sequence

from PySide6 import QtCore, QtWidgets

from analysis.columns import column
from analysis.errors import InputError
from analysis.stats import PARAMETERS

from .. import palette
from ..figures.comparison_plot import DEFAULT_PARAMETERS, ComparisonFigure, columns_for
from ..figures.comparison_plot import ComparisonPanel as PanelData
from ..figures.figure_export import export_figure
from ..views.study_grid import GridEntry, StudyGridView

__all__ = ["ComparisonPanel", "StudyPanel", "progress_text"]


def _count(n: int, noun: str) -> str:
    """``n`` and its noun, plural unless there is one ("1 cell", "3 cells")."""
    return f"{n} {noun}" if n == 1 else f"{n} {noun}s"


def progress_text(entries: Sequence[GridEntry]) -> str:
    """The line above the grid: recordings, beats to review and where."""
    shown = [e for e in entries if e.key is not None]
    waiting = [e for e in shown if e.n_to_review > 0]
    to_review = sum(e.n_to_review for e in waiting)
    cells = len({e.cell for e in entries})
    conditions = len({e.condition for e in entries})
    head = f"{_count(cells, 'cell')} × {_count(conditions, 'condition')}, {_count(len(shown), 'recording')}"
    if not shown:
        return head
    if not waiting:
        return f"{head}; no beat waiting for review"
    return f"{head}; {_count(to_review, 'beat')} to review in {_count(len(waiting), 'recording')}"


class StudyPanel(QtWidgets.QWidget):
    """The grid of a study's recordings with its progress line and stepping buttons.

    Signals
    -------
    recording_chosen(str)
        A square was chosen (click or Return): its recording's session key.
    step_requested(int)
        +1 / -1: the next or previous recording; +2: the next one with beats to review.
    """

    recording_chosen = QtCore.Signal(str)
    step_requested = QtCore.Signal(int)

    def __init__(self, parent: QtWidgets.QWidget | None = None) -> None:
        super().__init__(parent)
        self.setObjectName("study_panel")
        layout = QtWidgets.QVBoxLayout(self)
        layout.setContentsMargins(4, 4, 4, 4)
        layout.setSpacing(4)
        self.title = QtWidgets.QLabel("")
        self.title.setWordWrap(True)
        self.title.setStyleSheet(f"color: {palette.INK}; font-weight: bold;")
        self.title.setTextInteractionFlags(QtCore.Qt.TextSelectableByMouse)
        self.progress = QtWidgets.QLabel("")
        self.progress.setWordWrap(True)
        self.progress.setStyleSheet(f"color: {palette.ENVELOPE};")
        layout.addWidget(self.title)
        layout.addWidget(self.progress)
        buttons = QtWidgets.QHBoxLayout()
        self.previous_button = self._button("◀ recording", "The previous recording of the study", -1)
        self.next_button = self._button("recording ▶", "The next recording of the study", +1)
        self.waiting_button = self._button("to review ▶▶", "The next recording with beats waiting for review", +2)
        for b in (self.previous_button, self.next_button, self.waiting_button):
            buttons.addWidget(b)
        buttons.addStretch(1)
        layout.addLayout(buttons)
        self.grid = StudyGridView()
        self.grid.recording_chosen.connect(self.recording_chosen)
        layout.addWidget(self.grid, 1)
        self.legend = QtWidgets.QLabel(
            "Each square: beats the summary uses, and beats waiting for review. Click a square or press "
            "Return to open its recording.")
        self.legend.setWordWrap(True)
        self.legend.setStyleSheet(f"color: {palette.ENVELOPE}; font-size: 8.5pt;")
        layout.addWidget(self.legend)

    def _button(self, text: str, tip: str, step: int) -> QtWidgets.QToolButton:
        b = QtWidgets.QToolButton()
        b.setText(text)
        b.setToolTip(tip)
        b.setAutoRaise(True)
        b.clicked.connect(lambda: self.step_requested.emit(step))
        return b

    def show_study(self, name: str, entries: Sequence[GridEntry], *, conditions: Sequence[str] = (),
                   cells: Sequence[str] = (), about: str = "") -> None:
        """A study's squares, newly opened; ``about`` is the title's tooltip."""
        self.title.setText(name)
        self.title.setToolTip(about or name)
        self.grid.set_entries(entries, conditions=conditions, cells=cells)
        self.progress.setText(progress_text(entries))

    def update_counts(self, entries: Sequence[GridEntry]) -> None:
        """New counts after a verdict (the grid keeps its layout and focus)."""
        self.grid.update_entries(entries)
        self.progress.setText(progress_text(self.grid.grid_model.entries_in_order()))

    def set_current(self, key: str | None) -> None:
        self.grid.set_current(key)


class ComparisonPanel(QtWidgets.QWidget):
    """The comparison figure, the parameters it shows, and its export."""

    parameters_changed = QtCore.Signal(tuple)

    def __init__(self, parent: QtWidgets.QWidget | None = None) -> None:
        super().__init__(parent)
        self.setObjectName("comparison_panel")
        layout = QtWidgets.QVBoxLayout(self)
        layout.setContentsMargins(2, 2, 2, 2)
        layout.setSpacing(2)
        bar = QtWidgets.QHBoxLayout()
        self.choose_button = QtWidgets.QToolButton()
        self.choose_button.setText("Parameters")
        self.choose_button.setToolTip("Which parameters have a panel")
        self.choose_button.setPopupMode(QtWidgets.QToolButton.InstantPopup)
        menu = QtWidgets.QMenu(self.choose_button)
        self.parameter_actions: dict[str, object] = {}
        for name, _stem, _unit in PARAMETERS:
            act = menu.addAction(column(name).axis_label)
            act.setCheckable(True)
            act.setChecked(name in DEFAULT_PARAMETERS)
            act.toggled.connect(self._parameters_toggled)
            self.parameter_actions[name] = act
        self.choose_button.setMenu(menu)
        self.export_button = QtWidgets.QToolButton()
        self.export_button.setText("Export figure…")
        self.export_button.setToolTip("Save the comparison figure as PNG or SVG")
        self.export_button.clicked.connect(self._export_dialog)
        self.note = QtWidgets.QLabel("")
        self.note.setMinimumWidth(10)
        self.note.setStyleSheet(f"color: {palette.ENVELOPE}; font-size: 8.5pt;")
        bar.addWidget(self.choose_button)
        bar.addWidget(self.note, 1)
        bar.addWidget(self.export_button)
        layout.addLayout(bar)
        self.figure = ComparisonFigure()
        self.figure.setObjectName("figure_comparison")
        layout.addWidget(self.figure, 1)
        self._panels: tuple[PanelData, ...] = ()
        self._dirty = False

    @property
    def parameters(self) -> tuple[str, ...]:
        """The parameters chosen, in the catalogue's order."""
        return tuple(name for name, act in self.parameter_actions.items() if act.isChecked())

    def set_parameters(self, names: Sequence[str]) -> None:
        for name, act in self.parameter_actions.items():
            act.blockSignals(True)
            act.setChecked(name in names)
            act.blockSignals(False)
        self._parameters_toggled()

    def _parameters_toggled(self, *_args) -> None:
        self.parameters_changed.emit(self.parameters)

    def show_panels(self, panels: Sequence[PanelData], note: str = "") -> None:
        """New data; drawn now when visible, else when next shown."""
        self._panels = tuple(panels)
        self.note.setText(note)
        self._dirty = True
        if self.isVisible():
            self.redraw()

    def redraw(self) -> None:
        self.figure.columns = columns_for(max(self.figure.width(), 300), len(self._panels))
        self.figure.draw(self._panels)
        self._dirty = False

    def showEvent(self, event) -> None:
        super().showEvent(event)
        if self._dirty:
            self.redraw()

    def resizeEvent(self, event) -> None:
        super().resizeEvent(event)
        if self._panels and not self._dirty:
            self.figure.set_columns(columns_for(max(self.figure.width(), 300), len(self._panels)))

    def export(self, path: str | os.PathLike, *, width_px: int = 1600) -> str:
        """Write the figure (all the panels chosen) to PNG or SVG."""
        if self._dirty:
            self.redraw()
        return export_figure(self.figure, path, width_px=width_px)

    def _export_dialog(self) -> None:
        path, _ = QtWidgets.QFileDialog.getSaveFileName(self, "Export comparison figure", "comparison.png",
                                                        "PNG image (*.png);;SVG drawing (*.svg)")
        if path:
            if not os.path.splitext(path)[1]:
                path += ".png"
            try:
                self.export(path)
            except (InputError, ValueError, OSError) as exc:
                QtWidgets.QMessageBox.warning(self, "Export figure", str(exc))
