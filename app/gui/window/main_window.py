"""The main window: the recording, its beats, their review, conditions, figures and definitions.

Left, from the top: the whole-recording strip, the trace of the sweep under review, and below it
the beat table beside the figures. Right: the beat under review with its verdict, then tabs for
the conditions and their summary, the cursor readout and the definitions (settings).

The window builds the views and panels, and wires them to four controllers, each built with its
collaborators: :class:`~.display.Display` draws the state in the views, :class:`~.loading.Loader`
opens and analyses, :class:`~.reviewing.Reviewer` takes the verdicts and conditions, and
:class:`~.files.Files` saves, exports and recovers. They share one :class:`~.state.WindowState`.
"""

from __future__ import annotations

import os

import pyqtgraph as pg
from PySide6 import QtCore, QtGui, QtWidgets

from analysis.chunkpool import default_workers
from analysis.session import Session

from .. import palette
from ..dialogs.about import CAUTION, AboutDialog
from ..figures.plots import FiguresPanel
from ..panels.beat_card import BeatCard, ReasonBook, ReasonPicker
from ..panels.conditions import ConditionsPanel
from ..panels.cursors import CursorPanel
from ..panels.settings_form import SettingsForm
from ..panels.summary_panel import SummaryPanel
from ..views.beat_table import BeatFilterBar, BeatTableView
from ..views.derivative_strip import DerivativeStrip
from ..views.overview import OverviewStrip
from ..views.trace_view import TraceView
from .waiting import settle as _settle
from .waiting import wait_idle as _wait_idle
from .display import Display
from .feedback import Feedback
from .files import Files
from .loading import Loader
from .recent import RecentFiles, config_dir
from .reviewing import Reviewer
from .state import WindowState, WindowViews
from .study import StudyController
from .workers import JobRunner

__all__ = ["MainWindow"]

pg.setConfigOptions(antialias=False, foreground=palette.INK, background=palette.PAPER)


def _forward(controller: str, func):
    """A window method calling a controller's method of the same name (for the window's callers)."""
    name = func.__name__

    def method(self, *args, **kwargs):
        return getattr(getattr(self, controller), name)(*args, **kwargs)

    method.__name__ = method.__qualname__ = name
    method.__doc__ = func.__doc__
    return method


def _stacked(*widgets: QtWidgets.QWidget) -> QtWidgets.QWidget:
    """Widgets one above the other, without margins (a bar above a view)."""
    box = QtWidgets.QWidget()
    layout = QtWidgets.QVBoxLayout(box)
    layout.setContentsMargins(0, 0, 0, 0)
    layout.setSpacing(2)
    for w in widgets:
        layout.addWidget(w)
    return box


def _shown(name: str, owner: str = "state") -> property:
    """A read-only window attribute that is the state's (or the feedback's) own."""
    return property(lambda self: getattr(getattr(self, owner), name), doc=f"``{owner}.{name}``")


class MainWindow(QtWidgets.QMainWindow):
    """Upstroke's main window.

    Parameters
    ----------
    interactive : bool
        False for tests and screenshots: no modal dialogs (errors go to the status bar and
        :attr:`last_error`), no question on closing.
    """

    def __init__(self, *, interactive: bool = True) -> None:
        super().__init__()
        self.setObjectName("main_window")
        self.setWindowTitle("Upstroke[*]")
        self.setAcceptDrops(True)
        self.runner = JobRunner(self)
        self.recent = RecentFiles()
        self.feedback = Feedback(self, interactive=interactive)
        self.progress = self.feedback.progress
        self.views = self._build_views()
        self.state = WindowState(Session(self.settings_form.settings, workers=default_workers()))
        self.display = Display(self.state, self.views, self.runner, self.feedback, self)
        self.loader = Loader(self.state, self.views, self.display, self.runner, self.feedback, self,
                             history_changed=self.update_history_actions, set_title=self.setWindowTitle)
        self.review = Reviewer(self.state, self.views, self.display, self.feedback, self)
        self.files = Files(self.state, self.views, self.loader, self.display, self.feedback, self.recent, self,
                           recent_changed=self._fill_recent_menu)
        self._build_layout()
        self._build_actions()
        self._wire()
        self.study = StudyController(self, self.state, self.runner, self.feedback, select_recording=self._show_study_recording,
                                     make_action=self._action)
        self.loader.session_listeners.append(self.study.session_changed)
        self.loader.recording_listeners.append(self.study.recording_shown)
        self.loader.set_session(self.state.session)
        self.resize(1600, 1000)
        self.status(CAUTION)

    # -- layout ---------------------------------------------------------------------------------
    def _build_views(self) -> WindowViews:
        self.overview = OverviewStrip()
        self.overview.setMinimumHeight(120)
        self.trace_view = TraceView()
        self.dvdt_strip = DerivativeStrip()
        self.dvdt_strip.link_to(self.trace_view.getPlotItem())
        self.table = BeatTableView()
        self.table_filter = BeatFilterBar()
        self.figures = FiguresPanel()
        self.beat_card = BeatCard()
        self.cursor_panel = CursorPanel()
        self.conditions_panel = ConditionsPanel()
        self.summary_panel = SummaryPanel()
        self.settings_form = SettingsForm()
        self.reason_picker = ReasonPicker(self, book=ReasonBook(config_dir()))
        self.recording_combo = QtWidgets.QComboBox()
        self.recording_combo.setMinimumContentsLength(18)
        self.recording_combo.setToolTip("Recordings of the results file")
        self.channel_combo = QtWidgets.QComboBox()
        self.channel_combo.setToolTip("The channel analysed and shown (a membrane potential)")
        self.sweep_spin = QtWidgets.QSpinBox()
        self.sweep_spin.setPrefix("sweep ")
        self.sweep_spin.setMinimumWidth(120)
        return WindowViews(
            trace_view=self.trace_view, dvdt_strip=self.dvdt_strip, overview=self.overview, table=self.table, figures=self.figures,
            beat_card=self.beat_card, cursor_panel=self.cursor_panel, conditions_panel=self.conditions_panel,
            summary_panel=self.summary_panel, settings_form=self.settings_form, reason_picker=self.reason_picker,
            recording_combo=self.recording_combo, channel_combo=self.channel_combo, sweep_spin=self.sweep_spin,
        )

    def _build_layout(self) -> None:
        bottom = QtWidgets.QSplitter(QtCore.Qt.Horizontal)
        bottom.addWidget(_stacked(self.table_filter, self.table))
        bottom.addWidget(self.figures)
        bottom.setSizes([460, 560])
        left = QtWidgets.QSplitter(QtCore.Qt.Vertical)
        left.addWidget(self.overview)
        left.addWidget(self.trace_view)
        left.addWidget(self.dvdt_strip)
        left.addWidget(bottom)
        left.setSizes([130, 400, 110, 300])
        left.setChildrenCollapsible(False)

        # The summary has a tab of its own: at 1366x768 it fits there without scrolling.
        self.side_tabs = QtWidgets.QTabWidget()
        self.side_tabs.setObjectName("side_tabs")
        self.side_tabs.addTab(self.summary_panel, "Summary")
        self.side_tabs.addTab(self.conditions_panel, "Conditions")
        self.side_tabs.addTab(self.cursor_panel, "Gates")
        self.side_tabs.addTab(self.settings_form, "Definitions")
        right = QtWidgets.QSplitter(QtCore.Qt.Vertical)
        right.addWidget(self.beat_card)
        right.addWidget(self.side_tabs)
        right.setSizes([200, 700])

        main = QtWidgets.QSplitter(QtCore.Qt.Horizontal)
        main.addWidget(left)
        main.addWidget(right)
        main.setSizes([1160, 440])
        main.setStretchFactor(0, 1)
        self.setCentralWidget(main)

    def _wire(self) -> None:
        """Every view's and panel's signal to the controller that acts on it, in one place."""
        display, review, loader = self.display, self.review, self.loader
        self.trace_view.beat_clicked.connect(display.select_beat)
        self.trace_view.phases_toggled.connect(self.set_phases_visible)
        self.trace_view.cursors_toggled.connect(lambda on: self.set_cursors_visible(on))
        self.trace_view.cursors_finished.connect(review.on_cursors_finished)
        self.trace_view.view_changed.connect(display.follow_trace_view)
        self.trace_view.view_changed.connect(self.dvdt_strip.follow)
        self.table.row_selected.connect(display.select_beat)
        self.table_filter.filter_chosen.connect(self.table.beat_model.set_filter)
        self.overview.navigated.connect(display.on_overview_navigated)
        self.overview.clicked_at.connect(display.on_overview_clicked)
        self.overview.condition_marked.connect(review.mark_condition)
        self.beat_card.accept_clicked.connect(review.accept_current)
        self.beat_card.reject_clicked.connect(review.ask_reject_current)
        self.cursor_panel.toggled.connect(self.set_cursors_visible)
        self.cursor_panel.reject_between.connect(review.ask_reject_region)
        self.conditions_panel.marking_toggled.connect(self.overview.set_marking)
        self.conditions_panel.edit_requested.connect(review.edit_condition)
        self.conditions_panel.remove_requested.connect(review.remove_condition)
        self.settings_form.applied.connect(lambda settings, _changed: loader.reanalyse(settings))
        self.reason_picker.picked.connect(review.on_reason_picked)
        self.recording_combo.activated.connect(lambda i: loader.select_recording(self.recording_combo.itemData(i)))
        self.channel_combo.activated.connect(lambda i: loader.change_channel(self.channel_combo.itemData(i)))
        self.sweep_spin.valueChanged.connect(lambda v: display.set_sweep(v - 1))

    def _toolbar(self) -> None:
        bar = self.addToolBar("Recording")
        bar.setObjectName("recording_bar")
        bar.setMovable(False)
        bar.addAction(self.act_open)
        bar.addAction(self.act_save)
        bar.addSeparator()
        for label, widget in (("recording", self.recording_combo), ("channel", self.channel_combo)):
            bar.addWidget(QtWidgets.QLabel(f" {label} "))
            bar.addWidget(widget)
        bar.addSeparator()
        bar.addAction(self.act_prev_sweep)
        bar.addWidget(self.sweep_spin)
        bar.addAction(self.act_next_sweep)
        bar.addSeparator()
        for act in (self.act_phases, self.act_cursors, self.act_fit_y, self.act_whole_sweep):
            bar.addAction(act)

    def _action(self, menu: QtWidgets.QMenu, text: str, slot, shortcut=None, *, checkable=False, tip="") -> QtGui.QAction:
        action = QtGui.QAction(text, self)
        if shortcut is not None:
            action.setShortcut(QtGui.QKeySequence(shortcut))
            action.setShortcutContext(QtCore.Qt.WindowShortcut)
        action.setCheckable(checkable)
        if tip:
            action.setToolTip(tip)
            action.setStatusTip(tip)
        action.triggered.connect(slot)
        menu.addAction(action)
        return action

    def _build_actions(self) -> None:
        K = QtGui.QKeySequence
        file_menu = self.menuBar().addMenu("&File")
        self.act_open = self._action(file_menu, "&Open…", self.files.open_dialog, K.StandardKey.Open, tip="Open a recording or a results file")
        self.recent_menu = file_menu.addMenu("Open &recent")
        from ..dialogs.recovery import add_recover_action

        self.act_recover = add_recover_action(file_menu, self)
        self.act_save = self._action(file_menu, "&Save results", self.files.save, K.StandardKey.Save, tip="Save results, decisions, conditions and settings (.h5)")
        self._action(file_menu, "Save results &as…", self.files.save_as, K.StandardKey.SaveAs)
        self.act_revert = self._action(file_menu, "Re&vert to saved results", self.files.revert_to_saved,
                                       tip="Drop every change since the results file was saved")
        file_menu.addSeparator()
        self._action(file_menu, "Export &beats CSV…", lambda: self.files.export_dialog("beats"))
        self._action(file_menu, "Export s&ummary CSV…", lambda: self.files.export_dialog("summary"))
        self._action(file_menu, "Export &figures…", lambda: self.files.export_dialog("figures"))
        file_menu.addSeparator()
        from ..dialogs.batch_dialog import add_batch_action

        add_batch_action(file_menu, self, settings_getter=lambda: self.settings_form.settings, on_saved=self.files.open_path)
        file_menu.addSeparator()
        self._action(file_menu, "&Quit", self.close, K.StandardKey.Quit)

        edit = self.menuBar().addMenu("&Edit")
        self.act_undo = self._action(edit, "&Undo", self.review.undo, K.StandardKey.Undo)
        self.act_redo = self._action(edit, "&Redo", self.review.redo, K.StandardKey.Redo)

        review = self.menuBar().addMenu("&Review")
        self._action(review, "&Next beat", self.review.next_beat, "N")
        self._action(review, "&Previous beat", self.review.previous_beat, "P")
        self._action(review, "Next beat needing a &look", self.review.next_waiting, "Shift+N",
                     tip="Waiting for review, or flagged and not yet reviewed")
        self._action(review, "Previous beat needing a l&ook", self.review.previous_waiting, "Shift+P")
        self._action(review, "Next &unreviewed beat", self.review.next_unreviewed, "U",
                     tip="The next beat you have given no verdict")
        review.addSeparator()
        self._action(review, "&Accept beat", self.review.accept_current, "A")
        self._action(review, "&Reject beat…", self.review.ask_reject_current, "R")
        self._action(review, "Return beat to the &automatic verdict", self.review.clear_current, "E")
        self._action(review, "Reject beats &inside the gates…", self.review.ask_reject_region, "Shift+R",
                     tip="Between the gates when they are shown, else every beat in view")
        review.addSeparator()
        self.act_next_sweep = self._action(review, "Next s&weep", self.display.next_sweep, K.StandardKey.MoveToNextPage)
        self.act_prev_sweep = self._action(review, "Previous sw&eep", self.display.previous_sweep, K.StandardKey.MoveToPreviousPage)
        self.act_next_sweep.setIconText("sweep ▶")
        self.act_prev_sweep.setIconText("◀ sweep")
        review.addSeparator()
        self._action(review, "Mark a &condition on the overview", lambda: self.conditions_panel.mark_button.setChecked(True), "M")

        view = self.menuBar().addMenu("&View")
        self.act_phases = self._action(view, "&Phases", self.set_phases_visible, "H", checkable=True,
                                       tip="Wash the action-potential phases (4, 0, 1, 2, 3) behind the trace")
        self.act_cursors = self._action(view, "&Gates", self.set_cursors_visible, "G", checkable=True,
                                        tip="Two gate lines bounding a stretch of trace; its readout is in the Gates tab")
        self.act_fit_y = self._action(view, "Fit &voltage", self.trace_view.fit_y, "Y", tip="Fit the voltage axis to what is in view")
        self.act_whole_sweep = self._action(view, "&Whole sweep", self.display.show_whole_sweep, "W", tip="Show the whole sweep")
        self._action(view, "&Zoom to beat", self.display.zoom_to_beat, "Z")

        help_menu = self.menuBar().addMenu("&Help")
        self._action(help_menu, "&Keyboard", self._show_keys)
        self._action(help_menu, "&About Upstroke", lambda: AboutDialog(self).exec())
        self._toolbar()
        self._fill_recent_menu()

    def _show_study_recording(self, key: str) -> None:
        self.loader.select_recording(key)
        self.display.fill_recording_combo()

    # -- status, errors, history ------------------------------------------------------------------
    def status(self, text: str) -> None:
        self.feedback.status(text)

    def show_error(self, text: str) -> None:
        self.feedback.show_error(text)

    @property
    def interactive(self) -> bool:
        """False for tests and screenshots (see the class)."""
        return self.feedback.interactive

    @interactive.setter
    def interactive(self, on: bool) -> None:
        self.feedback.interactive = on

    def update_history_actions(self) -> None:
        s = self.state.session
        self.act_undo.setEnabled(s.can_undo)
        self.act_redo.setEnabled(s.can_redo)
        self.act_undo.setText(f"&Undo {s.undo_text.lower()}" if s.can_undo else "&Undo")
        self.act_redo.setText(f"&Redo {s.redo_text.lower()}" if s.can_redo else "&Redo")
        self.setWindowModified(s.modified)
        self.act_revert.setEnabled(bool(self.state.results_path) and s.modified)

    def _fill_recent_menu(self) -> None:
        self.recent_menu.clear()
        for path in self.recent.existing():
            self.recent_menu.addAction(os.path.basename(path), lambda p=path: self.files.open_path(p)).setToolTip(path)
        self.recent_menu.setEnabled(bool(self.recent_menu.actions()))

    # -- view helpers ---------------------------------------------------------------------------
    def set_phases_visible(self, on: bool) -> None:
        self.trace_view.set_phases_visible(on)
        self.act_phases.setChecked(on)

    def set_cursors_visible(self, on: bool) -> None:
        if not on:
            self.trace_view.set_readout_text("")
        self.trace_view.set_cursors_visible(on)
        self.cursor_panel.set_cursors_shown(on)
        self.act_cursors.setChecked(on)

    def _show_keys(self) -> None:
        rows = "".join(f"<tr><td><b>{k}</b></td><td>{w}</td></tr>" for k, w in self.shortcut_table())
        QtWidgets.QMessageBox.information(self, "Keyboard", f"<table cellspacing=6>{rows}</table>")

    def shortcut_table(self) -> list[tuple[str, str]]:
        """(keys, what) for every action that has a shortcut."""
        out = []
        for action in self.findChildren(QtGui.QAction):
            seq = action.shortcut().toString(QtGui.QKeySequence.NativeText)
            if seq:
                out.append((seq, action.text().replace("&", "").rstrip("…")))
        return sorted(set(out), key=lambda x: x[1])

    # -- files dropped on the window --------------------------------------------------------------
    def dragEnterEvent(self, event: QtGui.QDragEnterEvent) -> None:  # noqa: N802
        self.files.drag_enter(event)

    def dropEvent(self, event: QtGui.QDropEvent) -> None:  # noqa: N802
        self.files.drop(event)

    # -- closing --------------------------------------------------------------------------------
    def closeEvent(self, event: QtGui.QCloseEvent) -> None:  # noqa: N802
        if not self.files.confirm_discard():
            event.ignore()
            return
        self.runner.cancel_all()
        self.runner.wait(5000)
        event.accept()

    # -- waiting (tests, screenshots) ---------------------------------------------------------
    def settle(self, timeout_ms: int = 120_000) -> bool:
        """Run pending delayed refreshes now and wait for every background job, until neither
        is left (a finished analysis schedules a summary, which is a job of its own; a change
        to a study's review, the study's tables)."""
        settled = _settle(self.display, self.runner, timeout_ms)
        while settled and self.study.flush():
            settled = _settle(self.display, self.runner, timeout_ms)
        return settled

    def wait_idle(self, timeout_ms: int = 120_000) -> bool:
        """Process events until no background job is left (or the timeout)."""
        return _wait_idle(self.runner, timeout_ms)

    # -- screenshots ----------------------------------------------------------------------------
    def render_png(self, path: str | os.PathLike, *, size: tuple[int, int] = (1600, 1000)) -> str:
        """Render the window at a given size to PNG (offscreen works)."""
        self.resize(*size)
        self.show()
        QtWidgets.QApplication.processEvents()
        self.figures.redraw()
        QtWidgets.QApplication.processEvents()
        image = self.grab()
        path = os.fspath(path)
        # Through a temporary file and a rename: a failed write never leaves half a PNG.
        tmp = os.path.join(os.path.dirname(os.path.abspath(path)), f".{os.path.basename(path)}.tmp-{os.getpid()}.png")
        try:
            if not image.save(tmp, "PNG"):
                raise OSError(f"{path}: cannot write the screenshot")
            os.replace(tmp, path)
        finally:
            if os.path.exists(tmp):
                os.remove(tmp)
        return path

    # -- what the window shows, and what its controllers do, for the window's callers ------------
    session = _shown("session")
    key = _shown("key")
    recording = _shown("recording")
    channel = _shown("channel")
    sweep = _shown("sweep")
    current_row = _shown("current_row")
    beats = _shown("beats")
    summaries = _shown("summaries")
    last_readout = _shown("last_readout")
    origin = _shown("origin")
    results_path = _shown("results_path")
    journal = _shown("journal")
    bridge = _shown("bridge")
    last_error = _shown("last_error", "feedback")
    levels = _forward("state", WindowState.levels)
    ljp_mV = _forward("state", WindowState.ljp_mV)
    set_sweep = _forward("display", Display.set_sweep)
    select_beat = _forward("display", Display.select_beat)
    show_whole_sweep = _forward("display", Display.show_whole_sweep)
    zoom_to_beat = _forward("display", Display.zoom_to_beat)
    open_recording_file = _forward("loader", Loader.open_recording_file)
    open_results = _forward("loader", Loader.open_results)
    select_recording = _forward("loader", Loader.select_recording)
    change_channel = _forward("loader", Loader.change_channel)
    reanalyse = _forward("loader", Loader.reanalyse)
    next_beat = _forward("review", Reviewer.next_beat)
    previous_beat = _forward("review", Reviewer.previous_beat)
    next_waiting = _forward("review", Reviewer.next_waiting)
    previous_waiting = _forward("review", Reviewer.previous_waiting)
    next_unreviewed = _forward("review", Reviewer.next_unreviewed)
    accept_current = _forward("review", Reviewer.accept_current)
    reject_current = _forward("review", Reviewer.reject_current)
    clear_current = _forward("review", Reviewer.clear_current)
    region_rows = _forward("review", Reviewer.region_rows)
    reject_region = _forward("review", Reviewer.reject_region)
    undo = _forward("review", Reviewer.undo)
    redo = _forward("review", Reviewer.redo)
    mark_condition = _forward("review", Reviewer.mark_condition)
    add_condition = _forward("review", Reviewer.add_condition)
    set_steady_state = _forward("review", Reviewer.set_steady_state)
    open_path = _forward("files", Files.open_path)
    save = _forward("files", Files.save)
    save_as = _forward("files", Files.save_as)
    save_results = _forward("files", Files.save_results)
    revert_to_saved = _forward("files", Files.revert_to_saved)
    export_beats_csv = _forward("files", Files.export_beats_csv)
    export_summary_csv = _forward("files", Files.export_summary_csv)
    export_figures = _forward("files", Files.export_figures)
    recoverable_reviews = _forward("files", Files.recoverable_reviews)
    offer_recovery = _forward("files", Files.offer_recovery)
