"""The main window: the recording, its beats, their review, conditions, figures and definitions.

Left, from the top: the whole-recording strip, the trace of the sweep under review, and below it
the beat table beside the figures. Right: the beat under review with its verdict, then tabs for
the conditions and their summary, the cursor readout and the definitions (settings).
"""

from __future__ import annotations

import os

import numpy as np
import pyqtgraph as pg
from PySide6 import QtCore, QtGui, QtWidgets

from analysis.readouts import recording_times_s
from analysis.session import Session

from .. import palette
from ..dialogs.about import CAUTION, AboutDialog
from ..views.beat_table import BeatTableView
from ..panels.conditions import ConditionsPanel
from ..panels.cursors import CursorPanel
from .files import FilesMixin
from .loading import LoadingMixin
from ..views.overview import OverviewStrip
from ..figures.plots import FigureInput, FiguresPanel, summary_beat_rows
from .recent import RecentFiles
from ..panels.beat_card import BeatCard, ReasonPicker
from .reviewing import ReviewMixin
from ..panels.settings_form import SettingsForm
from ..panels.summary_panel import SummaryPanel
from .summary_job import start_summary
from ..views.trace_view import TraceView
from .workers import JobRunner

__all__ = ["MainWindow"]

pg.setConfigOptions(antialias=False, foreground=palette.INK, background=palette.PAPER)


class MainWindow(FilesMixin, LoadingMixin, ReviewMixin, QtWidgets.QMainWindow):
    """Upstroke's main window.

    Parameters
    ----------
    interactive : bool
        False for tests and screenshots: no modal dialogs (errors go to the status bar and
        :attr:`last_error`), no question on closing.
    """

    def __init__(self, *, interactive: bool = True) -> None:
        super().__init__()
        self.interactive = interactive
        self.setObjectName("main_window")
        self.setWindowTitle("Upstroke[*]")
        self.setAcceptDrops(True)
        self.runner = JobRunner(self)
        self.recent = RecentFiles()
        self.recording = None
        self.key: str | None = None
        self.origin: str | None = None
        self.results_path: str | None = None
        self.channel = 0
        self.sweep = -1
        self.current_row = -1
        self.journal = None
        self.last_error = ""
        self.last_readout = None
        self._label: str | None = None
        self._pending_conditions = ()
        self._beats = None
        self._levels = {}
        self._busy_reasons: set[str] = set()
        self._pending_settings = None
        self.summaries: list = []
        self._summaries_of: tuple[str, int] | None = None  # (recording, beats) the summaries shown are of
        self.bridge = None
        self._build_widgets()
        self._build_actions()
        self._set_session(Session(self.settings_form.settings))
        self._summary_timer = QtCore.QTimer(self, singleShot=True, interval=250, timeout=self._refresh_summary)
        self.resize(1600, 1000)
        self.status(CAUTION)

    # -- layout ---------------------------------------------------------------------------------
    def _build_widgets(self) -> None:
        self.overview = OverviewStrip()
        self.overview.setMinimumHeight(120)
        self.trace_view = TraceView()
        self.table = BeatTableView()
        self.figures = FiguresPanel()
        self.beat_card = BeatCard()
        self.cursor_panel = CursorPanel()
        self.conditions_panel = ConditionsPanel()
        self.summary_panel = SummaryPanel()
        self.settings_form = SettingsForm()
        self.reason_picker = ReasonPicker(self)

        bottom = QtWidgets.QSplitter(QtCore.Qt.Horizontal)
        bottom.addWidget(self.table)
        bottom.addWidget(self.figures)
        bottom.setSizes([640, 520])
        left = QtWidgets.QSplitter(QtCore.Qt.Vertical)
        left.addWidget(self.overview)
        left.addWidget(self.trace_view)
        left.addWidget(bottom)
        left.setSizes([150, 430, 330])
        left.setChildrenCollapsible(False)

        cond_page = QtWidgets.QWidget()
        cond_layout = QtWidgets.QVBoxLayout(cond_page)
        cond_layout.setContentsMargins(0, 0, 0, 0)
        cond_split = QtWidgets.QSplitter(QtCore.Qt.Vertical)
        cond_split.addWidget(self.conditions_panel)
        cond_split.addWidget(self.summary_panel)
        cond_split.setSizes([120, 480])
        cond_layout.addWidget(cond_split)
        self.side_tabs = QtWidgets.QTabWidget()
        self.side_tabs.setObjectName("side_tabs")
        self.side_tabs.addTab(cond_page, "Conditions")
        self.side_tabs.addTab(self.cursor_panel, "Cursors")
        self.side_tabs.addTab(self.settings_form, "Definitions")
        right = QtWidgets.QSplitter(QtCore.Qt.Vertical)
        right.addWidget(self.beat_card)
        right.addWidget(self.side_tabs)
        right.setSizes([230, 700])

        main = QtWidgets.QSplitter(QtCore.Qt.Horizontal)
        main.addWidget(left)
        main.addWidget(right)
        main.setSizes([1160, 440])
        main.setStretchFactor(0, 1)
        self.setCentralWidget(main)

        self.progress = QtWidgets.QProgressBar()
        self.progress.setMaximumWidth(220)
        self.progress.setVisible(False)
        self.statusBar().addPermanentWidget(self.progress)
        caution = QtWidgets.QLabel("research use only — not a medical device")
        caution.setToolTip(CAUTION)
        caution.setStyleSheet(f"color: {palette.ENVELOPE}; padding: 0 6px;")
        self.statusBar().addPermanentWidget(caution)

        self.trace_view.beat_clicked.connect(self.select_beat)
        self.trace_view.phases_toggled.connect(self.set_phases_visible)
        self.trace_view.cursors_toggled.connect(lambda on: self.set_cursors_visible(on))
        self.trace_view.cursors_finished.connect(self._on_cursors_finished)
        # The overview follows the trace view a few times a second, not on every frame of a pan:
        # redrawing both widgets each frame would halve the frame rate.
        self._overview_timer = QtCore.QTimer(self, singleShot=True, interval=60, timeout=self._sync_overview_window)
        self.trace_view.view_changed.connect(lambda *_a: self._overview_timer.isActive() or self._overview_timer.start())
        self.table.row_selected.connect(self.select_beat)
        self.overview.navigated.connect(self._on_overview_navigated)
        self.overview.clicked_at.connect(self._on_overview_clicked)
        self.overview.condition_marked.connect(self.mark_condition)
        self.beat_card.accept_clicked.connect(self.accept_current)
        self.beat_card.reject_clicked.connect(self.ask_reject_current)
        self.cursor_panel.toggled.connect(self.set_cursors_visible)
        self.cursor_panel.reject_between.connect(self.ask_reject_region)
        self.conditions_panel.marking_toggled.connect(self.overview.set_marking)
        self.conditions_panel.edit_requested.connect(self.edit_condition)
        self.conditions_panel.remove_requested.connect(self.remove_condition)
        self.settings_form.applied.connect(lambda settings, _changed: self.reanalyse(settings))
        self.reason_picker.picked.connect(self._on_reason_picked)

    def _toolbar(self) -> None:
        bar = self.addToolBar("Recording")
        bar.setObjectName("recording_bar")
        bar.setMovable(False)
        bar.addAction(self.act_open)
        bar.addAction(self.act_save)
        bar.addSeparator()
        self.recording_combo = QtWidgets.QComboBox()
        self.recording_combo.setMinimumContentsLength(18)
        self.recording_combo.setToolTip("Recordings of the results file")
        self.recording_combo.activated.connect(lambda i: self.select_recording(self.recording_combo.itemData(i)))
        self.channel_combo = QtWidgets.QComboBox()
        self.channel_combo.setToolTip("The channel analysed and shown (a membrane potential)")
        self.channel_combo.activated.connect(lambda i: self.change_channel(self.channel_combo.itemData(i)))
        self.sweep_spin = QtWidgets.QSpinBox()
        self.sweep_spin.setPrefix("sweep ")
        self.sweep_spin.setMinimumWidth(120)
        self.sweep_spin.valueChanged.connect(lambda v: self.set_sweep(v - 1))
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
        self.act_open = self._action(file_menu, "&Open…", self._open_dialog, K.StandardKey.Open, tip="Open a recording or a results file")
        self.recent_menu = file_menu.addMenu("Open &recent")
        from ..dialogs.recovery import add_recover_action

        self.act_recover = add_recover_action(file_menu, self)
        self.act_save = self._action(file_menu, "&Save results", self.save, K.StandardKey.Save, tip="Save results, decisions, conditions and settings (.h5)")
        self._action(file_menu, "Save results &as…", self.save_as, K.StandardKey.SaveAs)
        self.act_revert = self._action(file_menu, "Re&vert to saved results", self.revert_to_saved,
                                       tip="Drop every change since the results file was saved")
        file_menu.addSeparator()
        self._action(file_menu, "Export &beats CSV…", lambda: self._export_dialog("beats"))
        self._action(file_menu, "Export s&ummary CSV…", lambda: self._export_dialog("summary"))
        self._action(file_menu, "Export &figures…", lambda: self._export_dialog("figures"))
        file_menu.addSeparator()
        from ..dialogs.batch_dialog import add_batch_action

        add_batch_action(file_menu, self, settings_getter=lambda: self.settings_form.settings, on_saved=self.open_path)
        file_menu.addSeparator()
        self._action(file_menu, "&Quit", self.close, K.StandardKey.Quit)

        edit = self.menuBar().addMenu("&Edit")
        self.act_undo = self._action(edit, "&Undo", self.undo, K.StandardKey.Undo)
        self.act_redo = self._action(edit, "&Redo", self.redo, K.StandardKey.Redo)

        review = self.menuBar().addMenu("&Review")
        self._action(review, "&Next beat", self.next_beat, "N")
        self._action(review, "&Previous beat", self.previous_beat, "P")
        review.addSeparator()
        self._action(review, "&Accept beat", self.accept_current, "A")
        self._action(review, "&Reject beat…", self.ask_reject_current, "R")
        self._action(review, "Return beat to the &automatic verdict", self.clear_current, "E")
        self._action(review, "Reject beats &between cursors…", self.ask_reject_region, "Shift+R",
                     tip="Between the cursors when they are shown, else every beat in view")
        review.addSeparator()
        self.act_next_sweep = self._action(review, "Next s&weep", self.next_sweep, K.StandardKey.MoveToNextPage)
        self.act_prev_sweep = self._action(review, "Previous sw&eep", self.previous_sweep, K.StandardKey.MoveToPreviousPage)
        self.act_next_sweep.setIconText("sweep ▶")
        self.act_prev_sweep.setIconText("◀ sweep")
        review.addSeparator()
        self._action(review, "Mark a &condition on the overview", lambda: self.conditions_panel.mark_button.setChecked(True), "M")

        view = self.menuBar().addMenu("&View")
        self.act_phases = self._action(view, "&Phases", self.set_phases_visible, "H", checkable=True,
                                       tip="Wash the action-potential phases (4, 0, 1, 2, 3) behind the trace")
        self.act_cursors = self._action(view, "&Cursors", self.set_cursors_visible, "C", checkable=True,
                                        tip="Two cursors; their readout is in the Cursors tab")
        self.act_fit_y = self._action(view, "Fit &voltage", self.trace_view.fit_y, "Y", tip="Fit the voltage axis to what is in view")
        self.act_whole_sweep = self._action(view, "&Whole sweep", self.show_whole_sweep, "W", tip="Show the whole sweep")
        self._action(view, "&Zoom to beat", self.zoom_to_beat, "Z")

        help_menu = self.menuBar().addMenu("&Help")
        self._action(help_menu, "&Keyboard", self._show_keys)
        self._action(help_menu, "&About Upstroke", lambda: AboutDialog(self).exec())
        self._toolbar()
        self._fill_recent_menu()

    # -- status, errors, progress -----------------------------------------------------------------
    def status(self, text: str) -> None:
        self.statusBar().showMessage(text, 0)

    def show_error(self, text: str) -> None:
        self.last_error = text
        self.status(text)
        if self.interactive:
            QtWidgets.QMessageBox.warning(self, "Upstroke", text)

    def _busy(self, what: str, on: bool) -> None:
        (self._busy_reasons.add if on else self._busy_reasons.discard)(what)
        self.progress.setVisible(bool(self._busy_reasons))
        if on:
            self.progress.setRange(0, 0)
            self.progress.setFormat(what)

    def _on_progress(self, fraction: float, text: str) -> None:
        if fraction > 0:
            self.progress.setRange(0, 1000)
            self.progress.setValue(int(fraction * 1000))
        self.progress.setFormat(f"{text} %p%" if fraction > 0 else text)

    def _job_failed(self, message: str, user_error: bool) -> None:
        self._busy_reasons.clear()
        self.progress.setVisible(False)
        self.show_error(message.splitlines()[0] if user_error else f"internal error, please report it: {message}")

    # -- refreshing views -------------------------------------------------------------------------
    def _beats_hidden(self) -> None:
        """The trace without beats (a channel that is not the analysed one)."""
        self.trace_view.set_beats(None)
        self.beat_card.show_beat(None, -1)

    def _forget_beats(self) -> None:
        """Another recording is about to be shown: no beat of the one before stays in the table,
        selected, highlighted, in the beat card or in the figures; its own beats select one when
        they come."""
        self.current_row = -1
        self._beats = None
        self.table.set_table(None)
        self.trace_view.set_current_beat(-1)
        self.beat_card.show_beat(None, -1)
        self.figures.set_input(None)

    def _refresh_all(self) -> None:
        self._refresh_beats()
        self._refresh_conditions()

    def _refresh_beats(self) -> None:
        if self.key is None or self.session.info(self.key).channel != self.channel:
            return
        self._beats = self.session.beats(self.key)
        self.trace_view.set_offset(self.ljp_mV())
        self.trace_view.set_beats(self._beats)
        self.table.set_table(self._beats)
        b = self._beats
        if len(b):
            starts = self.session.info(self.key).sweep_starts_s
            self.overview.set_rate(recording_times_s(b, starts), np.asarray(b["rate_bpm"], float), np.asarray(b["accepted"]))
        if not (0 <= self.current_row < len(b)):
            self.current_row = -1
            rows = self._sweep_rows()
            if rows.size:
                # The sweep's first beat measured whole: its very first has no diastole before it.
                self.current_row = int(rows[min(1, rows.size - 1)])
        if self.current_row >= 0:
            self.select_beat(self.current_row, follow=False)
        else:
            self.table.clearSelection()
            self.beat_card.show_beat(None, -1)
        self._summary_timer.start()

    def _refresh_conditions(self) -> None:
        if self.key is None:
            return
        conds = self.session.conditions(self.key)
        colours = [palette.condition_colour(i) for i in range(len(conds))]
        self.conditions_panel.show_conditions(conds, colours)
        info = self.session.info(self.key)
        spans = [(c.name, *c.span_s(info.sweep_starts_s, info.sweep_durations_s), col) for c, col in zip(conds, colours)]
        self.overview.set_conditions(spans, [])
        self._summary_timer.start()

    def _refresh_summary(self) -> None:
        """Summarise the conditions with the session's own job in the background; the session
        keeps only a current result, so the newest change wins."""
        if self.key is None:
            return
        session = self.session
        start_summary(self.runner, session, self.key,
                      lambda key, summaries, s=session: s is self.session and self._show_summaries(key, summaries),
                      lambda line, s=session: s is self.session and self.status(f"summaries failed: {line}"))

    def _show_summaries(self, key: str, summaries: list) -> None:
        if key != self.key:
            return  # another recording is shown now
        self.summaries = summaries
        self._summaries_of = (key, len(self._beats)) if self._beats is not None else None
        conds = self.session.conditions(self.key)
        colours = {c.name: palette.condition_colour(i) for i, c in enumerate(conds)}
        values = [s.values for s in summaries]
        self.summary_panel.show_summaries(values, colours)
        info = self.session.info(self.key)
        spans = [(c.name, *c.span_s(info.sweep_starts_s, info.sweep_durations_s), colours[c.name]) for c in conds]
        steady = [(float(v["window_start_s"]), float(v["window_end_s"]), colours.get(str(v["condition"]), palette.TRACE))
                  for v in values if v.get("condition") in colours and np.isfinite(float(v["window_start_s"]))]
        self.overview.set_conditions(spans, steady)
        self.figures.set_input(self._figure_input())

    def _figure_input(self) -> FigureInput | None:
        if self.key is None or self.recording is None or self._beats is None:
            return None
        conds = self.session.conditions(self.key)
        groups = [(c.name, palette.condition_colour(i)) for i, c in enumerate(conds)]
        if "condition" not in self._beats or np.any(np.asarray(self._beats["condition"]) == ""):
            groups.append(("", palette.TRACE))
        info = self.session.info(self.key)
        spans = [(c.name, *c.span_s(info.sweep_starts_s, info.sweep_durations_s), col) for c, (_n, col) in zip(conds, groups)]
        # The aligned beats are the summaries' (each condition's steady-state window). Between a
        # change and its summary job's result, the summaries shown stand in if they are of this
        # table; the result redraws the figures. Nothing is summarised here, on the GUI thread.
        summaries = self.session.cached_summaries(self.key)
        if summaries is None and self._summaries_of == (self.key, len(self._beats)):
            summaries = self.summaries
        rows = None if summaries is None else summary_beat_rows(self._beats, summaries, info.sweep_starts_s)
        return FigureInput(self.recording, self._beats, channel=self.channel, offset_mV=self.ljp_mV(),
                           groups=groups, spans=spans, current_row=self.current_row,
                           measurement=self.session.settings(self.key).measurement, summary_rows=rows)

    def _on_decisions_changed(self, key: str, rows: list) -> None:
        if key == self.key:
            self._refresh_beats()

    def _on_conditions_changed(self, key: str) -> None:
        if key == self.key:
            self._refresh_beats()
            self._refresh_conditions()

    def _on_results_changed(self, key: str) -> None:
        if key == self.key and self._beats is not None:
            self._refresh_all()

    def _update_history_actions(self) -> None:
        s = self.session
        self.act_undo.setEnabled(s.can_undo)
        self.act_redo.setEnabled(s.can_redo)
        self.act_undo.setText(f"&Undo {s.undo_text.lower()}" if s.can_undo else "&Undo")
        self.act_redo.setText(f"&Redo {s.redo_text.lower()}" if s.can_redo else "&Redo")
        self.setWindowModified(s.modified)
        self.act_revert.setEnabled(bool(self.results_path) and s.modified)

    def _autosave(self, event: str, key: str, _rows: list) -> None:
        if event in ("decisions_changed", "conditions_changed", "settings_changed") and key and key == self.key and self.journal:
            try:
                self.journal.write(self.session)
            except OSError as exc:
                self.status(f"autosave failed: {exc}")
            else:
                self.journaled_keys.add(key)

    def _fill_channel_combo(self, recording) -> None:
        self.channel_combo.clear()
        for i, ch in enumerate(recording.channels):
            self.channel_combo.addItem(f"{ch.name} [{ch.units}]", i)
        self.channel_combo.setCurrentIndex(self.channel)

    def _fill_recording_combo(self) -> None:
        self.recording_combo.clear()
        for key in self.session.recordings:
            self.recording_combo.addItem(os.path.basename(self.session.label(key)), key)
        if self.key in self.session.recordings:
            self.recording_combo.setCurrentIndex(self.session.recordings.index(self.key))

    def _fill_recent_menu(self) -> None:
        self.recent_menu.clear()
        for path in self.recent.existing():
            self.recent_menu.addAction(os.path.basename(path), lambda p=path: self.open_path(p)).setToolTip(path)
        self.recent_menu.setEnabled(bool(self.recent_menu.actions()))

    # -- view helpers ---------------------------------------------------------------------------
    def set_phases_visible(self, on: bool) -> None:
        self.trace_view.set_phases_visible(on)
        self.act_phases.setChecked(on)

    def show_whole_sweep(self) -> None:
        if self.recording is not None:
            self.trace_view.show_span(0.0, self.levels(self.sweep).duration_s)

    def zoom_to_beat(self) -> None:
        if self._beats is not None and self.current_row >= 0:
            t = float(self._beats["t_upstroke_s"][self.current_row])
            cl = float(self._beats["cl_ms"][self.current_row]) / 1e3
            cl = cl if np.isfinite(cl) else 1.0
            self.trace_view.show_span(t - 0.7 * cl, t + 0.7 * cl)

    def _show_keys(self) -> None:
        rows = "".join(f"<tr><td><b>{k}</b></td><td>{w}</td></tr>" for k, w in self.shortcut_table())
        QtWidgets.QMessageBox.information(self, "Keyboard", f"<table cellspacing=6>{rows}</table>")

    # -- closing --------------------------------------------------------------------------------
    def closeEvent(self, event: QtGui.QCloseEvent) -> None:  # noqa: N802
        if not self._confirm_discard():
            event.ignore()
            return
        self.runner.cancel_all()
        self.runner.wait(5000)
        event.accept()

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
