"""The window's views drawn from what it shows: the sweep, the beat under review, the beat table,
the conditions, their summaries and the figures.

Everything here reads the session (through :class:`~.state.WindowState`) and redraws; nothing
changes it. The summaries are the session's own job, run in the background and shown when
current; the overview follows the trace view a few times a second.
"""

from __future__ import annotations

import os

import numpy as np
from PySide6 import QtCore

from analysis import readouts
from analysis.readouts import recording_times_s

from .. import palette
from ..figures.figure_input import FigureInput, summary_beat_rows
from .feedback import Feedback
from .state import WindowState, WindowViews
from .quick_summary import quick_summaries
from .summary_job import start_summary
from .workers import JobRunner

__all__ = ["Display"]


def _short_names(paths: list[str]) -> list[str]:
    """File names, with as many of their folders as tell apart files of the same name (a study's
    ``NL-0417/baseline.abf`` and ``NL-0423/baseline.abf``)."""
    parts = [os.path.normpath(p).replace(os.sep, "/").split("/") for p in paths]
    depth = [1] * len(parts)
    while True:
        names = ["/".join(p[-d:]) for p, d in zip(parts, depth)]
        clash = {n for n in names if names.count(n) > 1}
        grow = [i for i, n in enumerate(names) if n in clash and depth[i] < len(parts[i])]
        if not grow:
            return names
        for i in grow:
            depth[i] += 1


class Display:
    """Draws the state in the views.

    After a review key the full summaries (ensemble beats included, off the GUI thread) wait
    :attr:`ENSEMBLE_DELAY_MS` for the next key; after any other change, :attr:`SUMMARY_DELAY_MS`.

    Parameters
    ----------
    state : WindowState
    views : WindowViews
    runner : JobRunner
        Runs the summary jobs.
    feedback : Feedback
    parent : QObject
        Owner of the refresh timers (the window).
    """

    SUMMARY_DELAY_MS = 250
    ENSEMBLE_DELAY_MS = 1200

    def __init__(self, state: WindowState, views: WindowViews, runner: JobRunner, feedback: Feedback,
                 parent: QtCore.QObject) -> None:
        self.state = state
        self.views = views
        self.runner = runner
        self.feedback = feedback
        self.summary_timer = QtCore.QTimer(parent, singleShot=True, interval=self.SUMMARY_DELAY_MS,
                                           timeout=self.refresh_summary)
        # The overview follows the trace view a few times a second, not on every frame of a pan:
        # redrawing both widgets each frame would halve the frame rate.
        self._rate_stale = False
        #: True while a verdict is given on a beat the review then moves on from: the beat card
        #: is filled for the next beat only (see :meth:`refresh_verdicts`).
        self.moving_on = False
        self.overview_timer = QtCore.QTimer(parent, singleShot=True, interval=60, timeout=self.sync_overview_window)

    # -- sweeps --------------------------------------------------------------------------------
    def set_sweep(self, sweep: int) -> None:
        """Show a sweep of the recording."""
        st, v = self.state, self.views
        if st.recording is None:
            return
        sweep = int(np.clip(sweep, 0, st.recording.n_sweeps - 1))
        if sweep == st.sweep:
            return
        st.sweep = sweep
        ch = st.recording.channels[st.channel]
        offset = st.ljp_mV() if st.beats is not None else 0.0
        v.trace_view.set_sweep(st.levels(sweep), label=ch.name, units=ch.units, offset_mV=offset)
        v.dvdt_strip.set_sweep(st.levels(sweep), units=ch.units)
        v.trace_view.set_beats(st.beats)
        v.sweep_spin.blockSignals(True)
        v.sweep_spin.setValue(sweep + 1)
        v.sweep_spin.blockSignals(False)
        self.sync_overview_window()

    def next_sweep(self) -> None:
        self.set_sweep(self.state.sweep + 1)

    def previous_sweep(self) -> None:
        self.set_sweep(self.state.sweep - 1)

    def sync_overview_window(self, *_args) -> None:
        st = self.state
        if st.recording is None:
            return
        start = st.recording.sweep_starts_s[st.sweep]
        x0, x1 = self.views.trace_view.x_range()
        self.views.overview.set_window(start + max(0.0, x0), start + min(x1, st.levels(st.sweep).duration_s))

    def follow_trace_view(self, *_args) -> None:
        """The trace view moved: the overview follows shortly."""
        self.overview_timer.isActive() or self.overview_timer.start()

    def on_overview_navigated(self, a: float, b: float) -> None:
        st = self.state
        if st.recording is None:
            return
        sweep = st.sweep_at((a + b) / 2)
        if sweep != st.sweep:
            self.set_sweep(sweep)
        start = st.recording.sweep_starts_s[st.sweep]
        self.views.trace_view.show_span(a - start, b - start)

    def on_overview_clicked(self, t: float) -> None:
        st = self.state
        if st.recording is None:
            return
        self.set_sweep(st.sweep_at(t))
        start = st.recording.sweep_starts_s[st.sweep]
        x0, x1 = self.views.trace_view.x_range()
        half = (x1 - x0) / 2
        self.views.trace_view.show_span(t - start - half, t - start + half)

    def show_whole_sweep(self) -> None:
        if self.state.recording is not None:
            self.views.trace_view.show_span(0.0, self.state.levels(self.state.sweep).duration_s)

    def zoom_to_beat(self) -> None:
        st = self.state
        if st.table is not None and st.current_row >= 0:
            t = float(st.table["t_upstroke_s"][st.current_row])
            cl = float(st.table["cl_ms"][st.current_row]) / 1e3
            cl = cl if np.isfinite(cl) else 1.0
            self.views.trace_view.show_span(t - 0.7 * cl, t + 0.7 * cl)

    # -- the beat under review -------------------------------------------------------------------
    def select_beat(self, row: int, *, follow: bool = True) -> None:
        """Make a beat (row of the reviewed table) the one under review, in every view."""
        st, v = self.state, self.views
        b = st.beats
        if b is None or not (0 <= row < len(b)):
            return
        st.current_row = int(row)
        sweep = int(b["sweep"][row])
        if sweep != st.sweep:
            self.set_sweep(sweep)
        v.trace_view.set_current_beat(row, follow=follow)
        v.table.select_table_row(row)
        rows = st.sweep_rows()
        pos = int(np.flatnonzero(rows == row)[0]) if row in rows else 0
        v.beat_card.show_beat(b, row, len(rows), pos)
        self.show_overlay(row)
        v.figures.set_current_row(row)

    def show_overlay(self, row: int) -> None:
        """The beat under review over its condition's mean beat (its summary's ensemble)."""
        st = self.state
        b = st.table
        if b is None or st.recording is None or not (0 <= row < len(b)):
            self.views.beat_card.overlay.blank()
            return
        name = str(b["condition"][row]) if "condition" in b else ""
        ens = next((s.ensemble for s in st.summaries
                    if str(s.values["condition"]) == name and s.ensemble is not None and s.ensemble.v_mV.size), None)
        before_ms, after_ms = (-1e3 * ens.t0_s, 1e3 * float(ens.t_s[-1])) if ens is not None else (250.0, 500.0)
        one = readouts.aligned_beats(st.recording, b, np.array([row]), channel=st.channel, offset_mV=st.ljp_mV(),
                                     before_ms=before_ms, after_ms=after_ms)
        beat = (one.t_ms, one.traces[0]) if one.rows.size else None
        mean = (1e3 * ens.t_s, ens.v_mV) if ens is not None else None
        note = f"mean of {ens.n_beats}" if ens is not None else "mean: after the summary"
        self.views.beat_card.overlay.draw(beat, mean, note)

    def beats_hidden(self) -> None:
        """The trace without beats (a channel that is not the analysed one)."""
        self.views.trace_view.set_beats(None)
        self.views.beat_card.show_beat(None, -1)

    def forget_beats(self) -> None:
        """Another recording is about to be shown: no beat of the one before stays in the table,
        selected, highlighted, in the beat card or in the figures; its own beats select one when
        they come."""
        v = self.views
        self.state.current_row = -1
        self.state.table = None
        v.table.set_table(None)
        v.trace_view.set_current_beat(-1)
        v.beat_card.show_beat(None, -1)
        v.figures.set_input(None)

    # -- refreshing from the session -------------------------------------------------------------
    def refresh_all(self) -> None:
        self.refresh_beats()
        self.refresh_conditions()

    def refresh_beats(self) -> None:
        st, v = self.state, self.views
        if st.key is None or st.session.info(st.key).channel != st.channel:
            return
        st.table = st.session.beats(st.key)
        v.trace_view.set_offset(st.ljp_mV())
        v.trace_view.set_beats(st.table)
        v.table.set_table(st.table)
        b = st.table
        if len(b):
            self._show_rate(b)
        if not (0 <= st.current_row < len(b)):
            st.current_row = -1
            rows = st.sweep_rows()
            if rows.size:
                # The sweep's first beat measured whole: its very first has no diastole before it.
                st.current_row = int(rows[min(1, rows.size - 1)])
        if v.figures.input is None:
            # The first beats of a recording; afterwards the figures follow the summaries.
            v.figures.set_input(self.figure_input())
        if st.current_row >= 0:
            self.select_beat(st.current_row, follow=False)
        else:
            v.table.clearSelection()
            v.beat_card.show_beat(None, -1)
        self.schedule_summary()

    def refresh_conditions(self) -> None:
        st = self.state
        if st.key is None:
            return
        conds = st.session.conditions(st.key)
        colours = [palette.condition_colour(i) for i in range(len(conds))]
        self.views.conditions_panel.show_conditions(conds, colours)
        info = st.session.info(st.key)
        spans = [(c.name, *c.span_s(info.sweep_starts_s, info.sweep_durations_s), col) for c, col in zip(conds, colours)]
        self.views.overview.set_conditions(spans, [])
        self.schedule_summary()

    def schedule_summary(self, delay_ms: int | None = None) -> None:
        """Summarise (in the background) once nothing else has changed for a while."""
        self.summary_timer.start(self.SUMMARY_DELAY_MS if delay_ms is None else int(delay_ms))

    def refresh_summary(self) -> None:
        """Summarise the conditions with the session's own job in the background; the session
        keeps only a current result, so the newest change wins."""
        st = self.state
        if st.key is None:
            return
        session = st.session
        start_summary(self.runner, session, st.key,
                      lambda key, summaries, s=session: s is st.session and self.show_summaries(key, summaries),
                      lambda line, s=session: s is st.session and self.feedback.status(f"summaries failed: {line}"))

    def show_summaries(self, key: str, summaries: list) -> None:
        st, v = self.state, self.views
        if key != st.key:
            return  # another recording is shown now
        st.summaries_of = (key, len(st.table)) if st.table is not None else None
        values, colours = self._show_summary_values(summaries, set())
        info = st.session.info(st.key)
        conds = st.session.conditions(st.key)
        spans = [(c.name, *c.span_s(info.sweep_starts_s, info.sweep_durations_s), colours[c.name]) for c in conds]
        steady = [(float(x["window_start_s"]), float(x["window_end_s"]), colours.get(str(x["condition"]), palette.TRACE))
                  for x in values if x.get("condition") in colours and np.isfinite(float(x["window_start_s"]))]
        v.overview.set_conditions(spans, steady)
        if 0 <= st.current_row < len(st.table if st.table is not None else ()):
            self.show_overlay(st.current_row)
        if self._rate_stale and st.table is not None:
            self._rate_stale = False
            self._show_rate(st.table)
        before, data = v.figures.input, self.figure_input()
        # The same beats with new verdicts (a review in progress): one redraw when it pauses.
        reviewing = (before is not None and data is not None and before.recording is data.recording
                     and len(before.beats) == len(data.beats))
        v.figures.set_input(data, defer=reviewing)

    def _show_rate(self, b) -> None:
        starts = self.state.session.info(self.state.key).sweep_starts_s
        self.views.overview.set_rate(recording_times_s(b, starts), np.asarray(b["rate_bpm"], float), np.asarray(b["accepted"]))

    def _show_summary_values(self, summaries: list, updating: set[str]) -> tuple[list, dict]:
        st = self.state
        st.summaries = summaries
        colours = {c.name: palette.condition_colour(i) for i, c in enumerate(st.session.conditions(st.key))}
        values = [s.values for s in summaries]
        self.views.summary_panel.show_summaries(values, colours, updating=updating)
        return values, colours

    def figure_input(self) -> FigureInput | None:
        st = self.state
        if st.key is None or st.recording is None or st.table is None:
            return None
        conds = st.session.conditions(st.key)
        groups = [(c.name, palette.condition_colour(i)) for i, c in enumerate(conds)]
        if "condition" not in st.table or np.any(np.asarray(st.table["condition"]) == ""):
            groups.append(("", palette.TRACE))
        info = st.session.info(st.key)
        spans = [(c.name, *c.span_s(info.sweep_starts_s, info.sweep_durations_s), col) for c, (_n, col) in zip(conds, groups)]
        # The aligned beats are the summaries' (each condition's steady-state window). Between a
        # change and its summary job's result, the summaries shown stand in if they are of this
        # table; the result redraws the figures. Nothing is summarised here, on the GUI thread.
        summaries = st.session.cached_summaries(st.key)
        if summaries is None and st.summaries_of == (st.key, len(st.table)):
            summaries = st.summaries
        rows = None if summaries is None else summary_beat_rows(st.table, summaries, info.sweep_starts_s)
        return FigureInput(st.recording, st.table, channel=st.channel, offset_mV=st.ljp_mV(),
                           groups=groups, spans=spans, current_row=st.current_row,
                           measurement=st.session.settings(st.key).measurement, summary_rows=rows)

    def on_decisions_changed(self, key: str, rows: list) -> None:
        if key == self.state.key:
            self.refresh_verdicts(rows)

    def refresh_verdicts(self, rows: list) -> None:
        """Verdicts changed on some beats (a review key): their rows in the table, their marks
        on the trace, the beat card and the summary of their conditions change now; the
        ensemble beats and the figures follow once the review pauses, saying they are updating."""
        st, v = self.state, self.views
        if st.key is None or st.session.info(st.key).channel != st.channel or st.table is None:
            return
        st.table = b = st.session.beats(st.key)
        v.trace_view.set_beats(b)
        v.table.set_table(b, changed=rows)
        self._rate_stale = True  # the overview's rate strip follows with the summaries
        if 0 <= st.current_row < len(b) and not self.moving_on:
            where = st.sweep_rows()
            v.beat_card.show_beat(b, st.current_row, len(where), int(np.searchsorted(
                np.asarray(b["t_upstroke_s"])[where], b["t_upstroke_s"][st.current_row])))
        if st.summaries and st.summaries_of == (st.key, len(b)):
            summaries, updating = quick_summaries(st.session, st.key, b, st.summaries, rows)
            if updating:
                self._show_summary_values(summaries, updating)
        v.figures.mark_updating()
        self.schedule_summary(self.ENSEMBLE_DELAY_MS)

    def on_conditions_changed(self, key: str) -> None:
        if key == self.state.key:
            self.refresh_beats()
            self.refresh_conditions()

    def on_results_changed(self, key: str) -> None:
        if key == self.state.key and self.state.table is not None:
            self.refresh_all()

    # -- toolbar lists ---------------------------------------------------------------------------
    def fill_channel_combo(self, recording) -> None:
        combo = self.views.channel_combo
        combo.clear()
        for i, ch in enumerate(recording.channels):
            combo.addItem(f"{ch.name} [{ch.units}]", i)
        combo.setCurrentIndex(self.state.channel)

    def fill_recording_combo(self) -> None:
        st, combo = self.state, self.views.recording_combo
        combo.clear()
        labels = [st.session.label(key) for key in st.session.recordings]
        for key, name in zip(st.session.recordings, _short_names(labels)):
            combo.addItem(name, key)
        if st.key in st.session.recordings:
            combo.setCurrentIndex(st.session.recordings.index(st.key))
