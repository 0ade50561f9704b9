"""The study in the main window: its grid of recordings and the comparison across its cells.

A results file that holds a study layout (``upstroke batch ... --out`` with a pattern or a
sheet) opens as a study: beside the trace, a dock shows the grid of cells x conditions, and a
second dock (a tab behind it, or wherever the user drags it) the comparison figure. Choosing a
square opens its recording in the trace view; the window stays on the study, and the review
goes into the session, saved to the same results file (the layout is written back with it).

Keyboard (Study menu): Ctrl+PgDown / Ctrl+PgUp the next / previous recording of the study,
Ctrl+Shift+PgDown the next one with beats waiting for review, G the grid (arrows move, Return
opens). These leave the review's own keys alone (sweeps are PgDown / PgUp).

After every change to the review, the grid's counts and the figure follow: the changed
recordings' summaries are the session's own jobs, run in the background
(:func:`~.summary_job.start_summary`), and the tables are the core's
(:mod:`analysis.study`), computed once every summary is current.
"""

from __future__ import annotations

import os
from collections.abc import Callable

from PySide6 import QtCore, QtGui, QtWidgets

from analysis.errors import InputError
from analysis.results import atomic_output, read_study, write_study
from analysis.session import Session
from analysis.study import StudyLayout, table_csv

from .. import palette
from ..panels.study_panel import ComparisonPanel, StudyPanel
from ..views.study_grid import GridEntry
from .feedback import Feedback
from .state import WindowState
from .study_data import (
    StudyTables,
    comparison_panels,
    grid_entries,
    missing_summaries,
    recording_keys,
    study_inputs,
    study_tables,
)
from .summary_job import start_summary
from .workers import Job, JobRunner

__all__ = ["REFRESH_MS", "StudyController"]

#: How long after a change the study's tables are brought up to date (the summary of the
#: recording shown, started by the window after the same change, is usually done by then).
REFRESH_MS = 600

#: Events of the session after which the study's counts and figure change.
_CHANGES = ("decisions_changed", "conditions_changed", "results_changed", "recording_added", "settings_changed")


class StudyController:
    """The study's docks, their data and their keyboard.

    Parameters
    ----------
    window : QMainWindow
        Where the docks and the Study menu go.
    state : WindowState
    runner : JobRunner
        Runs the summary jobs.
    feedback : Feedback
    select_recording : callable
        ``select_recording(key)`` shows a recording of the session (the loader's).
    make_action : callable
        ``make_action(menu, text, slot, shortcut, tip=...)`` adds an action to a menu, as the
        window makes its own (shortcuts for the whole window).
    """

    def __init__(self, window: QtWidgets.QMainWindow, state: WindowState, runner: JobRunner, feedback: Feedback,
                 *, select_recording: Callable[[str], None], make_action: Callable[..., QtGui.QAction]) -> None:
        self.window = window
        self.make_action = make_action
        self.state = state
        self.runner = runner
        self.feedback = feedback
        self.select_recording = select_recording
        self.layout: StudyLayout | None = None
        self.tables: StudyTables | None = None
        self.name = ""
        self._session: Session | None = None
        self._first_shown = False
        self._version = 0  # of the tables asked for; an older result is dropped
        self._waiting: set[str] = set()  # recordings whose summary job runs
        self._connections: list = []
        self.panel = StudyPanel()
        self.comparison = ComparisonPanel()
        self.grid_dock = self._dock("study_dock", "Study", self.panel)
        self.comparison_dock = self._dock("comparison_dock", "Comparison across cells", self.comparison)
        window.addDockWidget(QtCore.Qt.LeftDockWidgetArea, self.grid_dock)
        window.tabifyDockWidget(self.grid_dock, self.comparison_dock)
        self.grid_dock.raise_()
        for dock in (self.grid_dock, self.comparison_dock):
            dock.visibilityChanged.connect(lambda on, d=dock: on and QtCore.QTimer.singleShot(0, self.window, lambda: self._fit_docks(d)))
        self.timer = QtCore.QTimer(window, singleShot=True, interval=REFRESH_MS, timeout=self.refresh)
        self.panel.recording_chosen.connect(self.choose)
        self.panel.step_requested.connect(self.step)
        self.comparison.parameters_changed.connect(lambda _names: self.redraw_comparison())
        self._build_menu()
        self._show_docks(False)

    def _dock(self, name: str, title: str, widget: QtWidgets.QWidget) -> QtWidgets.QDockWidget:
        dock = QtWidgets.QDockWidget(title, self.window)
        dock.setObjectName(name)
        dock.setWidget(widget)
        dock.setAllowedAreas(QtCore.Qt.AllDockWidgetAreas)
        dock.setStyleSheet(f"QDockWidget {{ color: {palette.INK}; }}")
        return dock

    def _build_menu(self) -> None:
        bar = self.window.menuBar()
        menu = QtWidgets.QMenu("&Study", self.window)
        help_menu = next((a for a in bar.actions() if a.text().replace("&", "") == "Help"), None)
        if help_menu is not None:
            bar.insertMenu(help_menu, menu)
        else:
            bar.addMenu(menu)
        self.menu = menu
        def action(text: str, slot, shortcut: str | None = None, tip: str = "") -> QtGui.QAction:
            return self.make_action(menu, text, slot, shortcut, tip=tip)

        self.act_next = action("&Next recording of the study", lambda: self.step(+1), "Ctrl+PgDown",
                               "The next square of the grid (cell by cell, each through its conditions)")
        self.act_previous = action("&Previous recording of the study", lambda: self.step(-1), "Ctrl+PgUp")
        self.act_waiting = action("Next recording &waiting for review", lambda: self.step(+2), "Ctrl+Shift+PgDown",
                                  "The next recording with beats waiting for review")
        self.act_grid = action("&Go to the grid", self.focus_grid, "Ctrl+G", "Show the study's grid and move the keyboard to it")
        menu.addSeparator()
        self.act_compare = action("Show the &comparison across cells", self.show_comparison)
        self.act_export = action("&Export the comparison figure…", self.comparison._export_dialog)
        self.act_table_csv = action("Export the cell × condition &table CSV…", lambda: self._export_csv_dialog("table"),
                                    tip="One row per cell and condition: the tidy table for statistics software")
        self.act_compare_csv = action("Export the c&omparison CSV…", lambda: self._export_csv_dialog("comparison"),
                                      tip="Each condition against the baseline, per cell and per group, with paired tests")
        menu.addSeparator()
        menu.addAction(self.grid_dock.toggleViewAction())
        menu.addAction(self.comparison_dock.toggleViewAction())
        self._study_actions = (self.act_next, self.act_previous, self.act_waiting, self.act_grid, self.act_compare,
                               self.act_export, self.act_table_csv, self.act_compare_csv)

    def _show_docks(self, on: bool) -> None:
        self.grid_dock.setVisible(on)
        self.comparison_dock.setVisible(on)
        for act in self._study_actions:
            act.setEnabled(on)
        self.menu.menuAction().setVisible(on)
        if on:
            self.grid_dock.raise_()
            QtCore.QTimer.singleShot(0, self.window, lambda: self._fit_docks(self.grid_dock))

    def _fit_docks(self, shown: QtWidgets.QDockWidget) -> None:
        """The grid takes a quarter of the window; the comparison, when its tab is raised, half
        of it (its panels need the room; the trace stays beside it)."""
        if self.layout is None or shown.isFloating():
            return
        w = self.window.width()
        if shown is self.grid_dock:
            grid = self.panel.grid
            wanted = grid.verticalHeader().sizeHint().width() + grid.horizontalHeader().length() + 30
            width = max(300, min(wanted, w // 3))
        else:
            width = max(520, w // 2)
        self.window.resizeDocks([shown], [width], QtCore.Qt.Horizontal)

    # -- following the window's session -----------------------------------------------------------
    def session_changed(self, session: Session) -> None:
        """A new session in the window: a results file with a study layout opens the study."""
        for signal, slot in self._connections:
            signal.disconnect(slot)
        self._connections = []
        self._session = session
        self._waiting = set()
        bridge = self.state.bridge
        if bridge is not None:
            self._connections = [(bridge.changed, self._on_change), (bridge.saved, self._on_saved)]
            for signal, slot in self._connections:
                signal.connect(slot)
        layout = None
        if session.path:
            try:
                layout = read_study(session.path)
            except InputError as exc:
                self.feedback.status(f"{exc.one_line()} (opened as plain recordings)")
        if layout is None:
            self.close_study()
        else:
            self.open_study(layout, name=os.path.basename(session.path))

    def recording_shown(self, key: str | None) -> None:
        """The window shows another recording: outline its square, draw its cell darker."""
        if self.layout is None:
            return
        if self._first_shown:
            # A study opens on its first square (the results file's first recording may be another).
            self._first_shown = False
            order = self.order()
            if order and key != order[0]:
                QtCore.QTimer.singleShot(0, self.window, lambda k=order[0]: self.choose(k))
        self.panel.set_current(key)
        entry = self._entry_of(key)
        if entry is not None:
            self.window.setWindowTitle(f"{entry.cell} · {entry.condition} ({entry.file}) — {self.name}[*] — Upstroke")
        self.redraw_comparison()

    # -- the study -----------------------------------------------------------------------------
    def open_study(self, layout: StudyLayout, *, name: str = "") -> None:
        """Show a study of the session's recordings."""
        self.layout = layout
        self.name = name or "study"
        self.tables = None
        self._first_shown = True
        # Until the core's tables come (they wait for every summary), each square says so.
        keys = self._keys()
        waiting = [GridEntry(e.cell, e.condition, e.group, key=keys.get(e.file), label=e.file, ready=False)
                   for e in layout.entries]
        self.panel.show_study(self.name, waiting, conditions=layout.conditions, cells=layout.cells, about=self._about())
        self.panel.progress.setText("summarising the study's recordings…")
        self._show_docks(True)
        self.refresh()

    def _about(self) -> str:
        return f"{self.layout.describe()}\n{self.layout.source}\nfolder: {self.layout.root}"

    def close_study(self) -> None:
        self.layout = None
        self.tables = None
        self.timer.stop()
        self._show_docks(False)

    def refresh(self) -> None:
        """Bring the grid and the figure up to date: start the summaries that are not current,
        and once all are, take the core's tables."""
        session = self._session
        if self.layout is None or session is None or session is not self.state.session:
            return
        study_keys = list(dict.fromkeys(self._keys().values()))
        missing = [k for k in missing_summaries(session, study_keys) if k not in self._waiting]
        for key in missing:
            self._waiting.add(key)
            start_summary(self.runner, session, key, lambda k, _s, s=session: self._summary_done(s, k),
                          lambda line, k=key, s=session: self._summary_failed(s, k, line))
        if missing_summaries(session, study_keys):
            return  # the last summary to arrive refreshes again
        # The core's tables in a worker: the first comparison imports scipy.stats, which takes
        # seconds, and a large study's tables take a moment too.
        self._version += 1
        version, layout = self._version, self.layout
        keys, summaries = study_inputs(session, layout)
        job = Job(lambda _report, _cancelled: study_tables(layout, keys, summaries), "study tables")
        job.signals.finished.connect(lambda tables, v=version: self._tables_done(v, tables))
        job.signals.failed.connect(lambda message, _user: self.feedback.status(
            f"the study's tables failed: {message.splitlines()[0]}"))
        self.runner.start(job)

    def _tables_done(self, version: int, tables: StudyTables) -> None:
        if version != self._version or self.layout is None:
            return  # a newer change has asked for newer tables
        first = self.tables is None
        self.tables = tables
        entries = grid_entries(tables)
        if first:
            self.panel.show_study(self.name, entries, conditions=self.layout.conditions, cells=self.layout.cells,
                                  about=self._about())
            if not self.grid_dock.visibleRegion().isEmpty():  # the grid's tab is the one raised
                QtCore.QTimer.singleShot(0, self.window, lambda: self._fit_docks(self.grid_dock))
        else:
            self.panel.update_counts(entries)
        self.panel.set_current(self.state.key)
        self.redraw_comparison()

    def flush(self) -> bool:
        """Bring the tables up to date now if a refresh is pending; True when one was (tests,
        screenshots: the window's ``settle`` waits for what it started)."""
        if not self.timer.isActive():
            return False
        self.timer.stop()
        self.refresh()
        return True

    def _keys(self) -> dict[str, str]:
        return recording_keys(self._session, self.layout) if self._session is not None and self.layout else {}

    def _summary_done(self, session: Session, key: str) -> None:
        self._waiting.discard(key)
        if session is self._session:
            self.timer.start()

    def _summary_failed(self, session: Session, key: str, line: str) -> None:
        self._waiting.discard(key)
        if session is self._session:
            self.feedback.status(f"the study's summary of {session.label(key)} failed: {line}")

    def _on_change(self, event: str, _key: str, _rows: list) -> None:
        if self.layout is not None and event in _CHANGES:
            self.timer.start()

    def _on_saved(self, path: str) -> None:
        """The session was saved: the results file keeps the study's layout too."""
        if self.layout is None:
            return
        try:
            if read_study(path) is None:
                write_study(path, self.layout)
        except InputError as exc:
            self.feedback.show_error(f"{exc.one_line()} (the review is saved; the study's layout is not)")

    def redraw_comparison(self) -> None:
        if self.tables is None:
            return
        cell = self._cell_of(self.state.key)
        groups = [g for g in self.layout.groups]
        colours = {g: palette.condition_colour(i) for i, g in enumerate(groups)} if len(groups) > 1 else {}
        panels = comparison_panels(self.tables, self.comparison.parameters, current_cell=cell, colours=colours)
        n_cells = len(self.layout.cells)
        note = f"{n_cells} cells, each paired with its own {self.layout.baseline}"
        self.comparison.show_panels(panels, note)

    def _entry_of(self, key: str | None):
        """The layout's entry of a recording of the session (None when not in the study)."""
        if key is None or self.layout is None:
            return None
        file = next((f for f, k in self._keys().items() if k == key), None)
        return next((e for e in self.layout.entries if e.file == file), None) if file else None

    def _cell_of(self, key: str | None) -> str:
        entry = self._entry_of(key)
        return entry.cell if entry is not None else ""

    def export_csv(self, what: str, path: str | os.PathLike) -> str:
        """Write the study's ``"table"`` (one row per cell x condition) or ``"comparison"`` as CSV,
        as the review stands (the core's :func:`analysis.study.table_csv`; all or nothing)."""
        if self.tables is None:
            raise InputError(os.fspath(path), "the study's tables are not ready yet", "wait for the summaries, then export")
        columns = self.tables.table if what == "table" else self.tables.comparison
        with atomic_output(path) as tmp, open(tmp, "w", encoding="utf-8", newline="") as fh:
            fh.write(table_csv(columns))
        return os.fspath(path)

    def _export_csv_dialog(self, what: str) -> None:
        stem = os.path.splitext(self.name)[0]
        path, _ = QtWidgets.QFileDialog.getSaveFileName(self.window, f"Export the study's {what} CSV",
                                                        f"{stem}_{what}.csv", "CSV (*.csv)")
        if path:
            try:
                self.feedback.status(f"wrote {self.export_csv(what, path)}")
            except (OSError, InputError) as exc:
                self.feedback.show_error(str(exc))

    # -- moving through the study ----------------------------------------------------------------
    def order(self) -> list[str]:
        """The study's recordings in the grid's order: cell by cell, each through its conditions."""
        if self.layout is None:
            return []
        keys = self._keys()
        out = []
        for cell in self.panel.grid.grid_model.cells or self.layout.cells:
            for condition in self.layout.conditions:
                for entry in self.layout.entries_of(cell, condition):
                    if entry.file in keys and keys[entry.file] not in out:
                        out.append(keys[entry.file])
        return out

    def choose(self, key: str) -> None:
        """Show a recording of the study (the grid stays)."""
        if key == self.state.key or key not in self.state.session.recordings:
            self.panel.set_current(self.state.key)
            return
        self.select_recording(key)

    def step(self, how: int) -> None:
        """+1 / -1: the next or previous recording; +2: the next one with beats waiting for review."""
        order = self.order()
        if not order:
            return
        here = order.index(self.state.key) if self.state.key in order else -1
        if how == 2:
            waiting = {e.key for e in self.panel.grid.grid_model.entries_in_order() if e.n_to_review > 0}
            ahead = order[here + 1:] + order[:here + 1]
            target = next((k for k in ahead if k in waiting), None)
            if target is None:
                self.feedback.status("no recording of the study has beats waiting for review")
                return
        else:
            target = order[(here + how) % len(order)] if here >= 0 else order[0]
        self.choose(target)

    def focus_grid(self) -> None:
        if self.layout is None:
            return
        self.grid_dock.show()
        self.grid_dock.raise_()
        self.panel.grid.setFocus(QtCore.Qt.ShortcutFocusReason)

    def show_comparison(self) -> None:
        if self.layout is None:
            return
        self.comparison_dock.show()
        self.comparison_dock.raise_()
