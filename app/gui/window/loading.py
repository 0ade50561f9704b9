"""Opening recordings and results files, analysing off the GUI thread, re-analysing.

A recording's first sweep is drawn as soon as its header is read (the samples stay in the file,
memory-mapped, until drawn); detection and measurement then run in the thread pool with a
progress bar, and the beats appear when they are done. The envelopes that let the overview strip
show the whole recording are built the same way. A settings change is the session's own work
(:meth:`~analysis.session.Session.settings_job`): made here, computed in a worker with its
progress shown, applied back here.
"""

from __future__ import annotations

import os
from typing import Callable, Sequence

from PySide6 import QtCore

from analysis.chunkpool import default_workers
from analysis.conditions import Condition
from analysis.errors import InputError
from analysis.recording import Recording
from analysis.session import Session

from ..views.trace_data import recording_envelope
from .autosave import Journal
from .display import Display
from .feedback import Feedback
from .session_bridge import SessionBridge
from .state import WindowState, WindowViews
from .workers import Job, JobRunner

__all__ = ["Loader", "RESULTS_EXTENSIONS"]

RESULTS_EXTENSIONS = (".h5", ".hdf5")


def _analyze(recording: Recording, settings, channel, label, report, cancelled):
    """The core's analysis, reporting its progress (samples worked) as a fraction."""
    from analysis.pipeline import analyze

    report(0.0, "detecting and measuring beats")
    return analyze(recording, settings=settings, channel=channel, label=label,
                   progress=lambda done, total: report(done / total if total else 1.0, "detecting and measuring beats"))


class Loader:
    """Opening, analysing and re-analysing: what the window shows comes in here.

    Parameters
    ----------
    state : WindowState
    views : WindowViews
    display : Display
        Draws what is loaded.
    runner : JobRunner
        Runs the analyses, the envelopes and the settings jobs.
    feedback : Feedback
    parent : QObject
        Owner of the session's Qt bridge (the window).
    history_changed : callable
        Called when the session's undo history changes (and with each new session).
    set_title : callable
        Called with the window's title when a recording is shown.
    """

    def __init__(self, state: WindowState, views: WindowViews, display: Display, runner: JobRunner,
                 feedback: Feedback, parent: QtCore.QObject, *, history_changed: Callable[[], None],
                 set_title: Callable[[str], None]) -> None:
        self.state = state
        self.views = views
        self.display = display
        self.runner = runner
        self.feedback = feedback
        self.parent = parent
        self.history_changed = history_changed
        self.set_title = set_title
        #: Called with each new session, and with the key of each recording shown (the study's
        #: grid follows both).
        self.session_listeners: list[Callable[[Session], None]] = []
        self.recording_listeners: list[Callable[[str | None], None]] = []

    # -- sessions ------------------------------------------------------------------------------
    def set_session(self, session: Session) -> None:
        if self.state.bridge is not None:
            self.state.bridge.detach()
        self.state.session = session
        self.state.journaled_keys = set()
        self.state.bridge = SessionBridge(session, self.parent)
        self.state.bridge.decisions_changed.connect(self.display.on_decisions_changed)
        self.state.bridge.conditions_changed.connect(self.display.on_conditions_changed)
        self.state.bridge.results_changed.connect(self.display.on_results_changed)
        self.state.bridge.history_changed.connect(self.history_changed)
        self.state.bridge.warning.connect(lambda _k, text: self.feedback.status(f"warning: {text}"))
        self.state.bridge.changed.connect(self._autosave)
        self.history_changed()
        for listener in self.session_listeners:
            listener(session)

    # -- opening -------------------------------------------------------------------------------
    def open_recording_file(self, recording: Recording, *, origin: str | None = None, label: str | None = None,
                            conditions: Sequence[Condition] = (), result=None) -> None:
        """Show a recording at once and analyse it in the background.

        ``result`` is an :class:`~analysis.pipeline.AnalysisResult` already computed for this
        recording with the form's settings (for example by a batch); it is used instead.
        """
        self.runner.cancel_all()
        self.set_session(Session(self.views.settings_form.settings, workers=default_workers()))
        self.state.key = None
        self.display.forget_beats()
        # A recording opened on its own has no results file yet: saving asks where (it must not
        # write over the results file shown before).
        self.state.results_path = None
        self.state.origin = origin or recording.source_path or label or "recording"
        self.state.recording = recording
        self.state.label = label
        self.state.pending_conditions = tuple(conditions)
        cc = recording.current_clamp_channels()
        self.state.channel = cc[0] if cc else 0
        self._show_recording(recording)
        if result is not None:
            self.state.channel = int(result.channel)
            self._analysis_done(recording, result.settings, self.state.channel, result, busy=False)
        else:
            self._start_analysis(recording, self.state.channel)

    def open_results(self, path: str, *, session: Session | None = None) -> None:
        """Open a results file: its recordings, decisions, conditions and settings.

        ``session`` is the file already read by :meth:`Session.open` (so that a caller can
        check the file opens before it lets go of anything).
        """
        self.runner.cancel_all()
        session = Session.open(path) if session is None else session
        self.set_session(session)
        self.state.origin = path
        self.state.results_path = path
        for w in session.open_warnings:
            self.feedback.status(w)
        if not session.recordings:
            self.feedback.show_error(f"{path}: the results file holds no recordings; analyse one and save it")
            return
        self.display.fill_recording_combo()
        self.select_recording(session.recordings[0])

    def select_recording(self, key: str) -> None:
        """Show one recording of the session, its first measured beat selected."""
        self.display.forget_beats()
        self.state.key = key
        info = self.state.session.info(key)
        self.views.settings_form.show_settings(self.state.session.settings(key))
        self.state.channel = info.channel
        try:
            self.state.recording = self.state.session.recording(key)
        except InputError as exc:
            self.state.recording = None
            self.feedback.show_error(exc.one_line() + " (the results are shown; traces need the recording)")
        if self.state.recording is not None:
            self._show_recording(self.state.recording)
        self._after_results(restore=True)

    # -- showing samples -----------------------------------------------------------------------
    def _show_recording(self, recording: Recording) -> None:
        self.state.levels_cache = {}
        self.display.fill_channel_combo(recording)
        self.views.sweep_spin.blockSignals(True)
        self.views.sweep_spin.setRange(1, recording.n_sweeps)
        self.views.sweep_spin.setValue(1)
        self.views.sweep_spin.setSuffix(f" / {recording.n_sweeps}")
        self.views.sweep_spin.blockSignals(False)
        durations = [n / recording.sampling_rate_hz for n in recording.sweep_lengths]
        self.views.overview.set_recording_geometry(recording.sweep_starts_s, durations)
        self.state.sweep = -1
        self.display.set_sweep(0)
        name = self.state.label or (os.path.basename(recording.source_path) if recording.source_path else "recording")
        self.set_title(f"{name}[*] — Upstroke")
        self._start_envelopes(recording)

    def _start_envelopes(self, recording: Recording) -> None:
        channel = self.state.channel
        levels = [self.state.levels(i) for i in range(recording.n_sweeps)]

        def build(report, cancelled):
            for i, lv in enumerate(levels):
                if not lv.envelope_ready and not lv.build_envelope(cancelled=cancelled):
                    return None
                report((i + 1) / len(levels), "reading the whole recording")
            return recording_envelope(levels, list(recording.sweep_starts_s))

        job = Job(build, "envelope")
        job.signals.finished.connect(lambda env, r=recording, c=channel: self._envelope_ready(r, c, env))
        self.runner.start(job)

    def _envelope_ready(self, recording: Recording, channel: int, envelope) -> None:
        if envelope is None or recording is not self.state.recording or channel != self.state.channel:
            return
        self.views.overview.set_envelope(*envelope)
        self.views.trace_view.refresh_samples()

    # -- analysis ------------------------------------------------------------------------------
    def _start_analysis(self, recording: Recording, channel: int) -> None:
        settings = self.views.settings_form.settings
        label = self.state.label
        job = Job(lambda report, cancelled: _analyze(recording, settings, channel, label, report, cancelled), "analysis")
        job.signals.progress.connect(self.feedback.on_progress)
        job.signals.finished.connect(lambda result, r=recording, s=settings, c=channel: self._analysis_done(r, s, c, result))
        job.signals.failed.connect(self.feedback.job_failed)
        self.feedback.busy("analysing", True)
        self.runner.start(job)

    def _analysis_done(self, recording: Recording, settings, channel: int, result, busy: bool = True) -> None:
        if busy:
            self.feedback.busy("analysing", False)
        if recording is not self.state.recording or int(result.channel) != self.state.channel:
            return  # the user has moved on to another file or channel
        key = self.state.session.add(recording, settings=settings, channel=channel, result=result,
                                     label=self.state.label, conditions=self.state.pending_conditions, keep_review=False)
        self.state.key = key
        self.state.channel = int(result.channel)
        self.display.fill_recording_combo()
        self.feedback.status(f"{len(self.state.session.beats(key))} beats found; "
                             + (f"{len(result.warnings)} warning(s)" if result.warnings else "no warnings"))
        self._after_results(restore=True)
        pending, self.state.pending_settings = self.state.pending_settings, None
        if pending is not None and pending != self.state.session.settings(key):
            self.reanalyse(pending)

    def _after_results(self, *, restore: bool) -> None:
        """Everything that follows new results: autosave restore, tables, views."""
        key = self.state.key
        self.state.journal = Journal(self.state.origin or key, key)
        if restore and self.state.journal.exists():
            self._restore_review(self.state.journal)
        self.display.refresh_all()
        for listener in self.recording_listeners:
            listener(key)

    # -- autosave restore ----------------------------------------------------------------------
    def journal_follows(self, results_path: str) -> None:
        """After a save, journal later changes under the results file: reopening that file (or
        recovering at start) then finds them."""
        self.state.origin = results_path
        if self.state.key is not None:
            self.state.journal = Journal(results_path, self.state.key)

    def _restore_review(self, journal: Journal) -> None:
        """Replay an unsaved review onto the recording shown.

        Settings differing from the session's are re-analysed first by the session's settings
        job in a worker (the window stays responsive, with the progress shown, and edits wait),
        then the conditions and verdicts are replayed here. The journal is not rewritten until
        the whole review is back.
        """
        try:
            review = journal.review()
        except InputError as exc:
            self.feedback.status(exc.one_line())
            return
        if review is None:
            return
        if review.settings == self.state.session.settings(journal.key):
            self._replay_review(self.state.session, journal, review, settings_changed=False)
            return
        self.feedback.status("restoring the unsaved review: re-analysing with its settings")
        self._run_settings_job(review.settings, lambda session, change: self._restore_done(session, journal, review, change),
                               what="restoring")

    def _restore_done(self, session: Session, journal: Journal, review, change) -> None:
        if session is not self.state.session or journal is not self.state.journal:
            return  # another file was opened meanwhile: the journal stays for next time
        with journal.replaying(session):
            if not session.apply_settings(change):
                self._restore_review(journal)  # prepared from a state since left: again
                return
            session.default_settings = change.settings
            self.views.settings_form.show_settings(session.settings(journal.key))
            self._replay_review(session, journal, review, settings_changed=True)
        pending, self.state.pending_settings = self.state.pending_settings, None
        if pending is not None and pending != session.settings(journal.key):
            self.reanalyse(pending)

    def _replay_review(self, session: Session, journal: Journal, review, *, settings_changed: bool) -> None:
        try:
            report = journal.replay(session, review, settings_changed=settings_changed)
        except InputError as exc:
            self.feedback.status(f"the autosaved review could not be restored ({exc.one_line()}); it was kept")
            return
        self.state.journaled_keys.add(journal.key)
        if report is not None:
            self.feedback.status(report.text())
        self.display.refresh_all()

    def reanalyse(self, settings) -> None:
        """Re-analyse with new settings off the GUI thread; only what the change affects reruns.

        The session does all of it (:meth:`~analysis.session.Session.settings_job`): the job, a
        snapshot, is made here; a worker computes it (a summary-only change summarises again, a
        quality change re-runs the events and quality rules, a preprocess, detection or
        measurement change re-analyses the recording's analysed sweeps), with its progress in the
        status bar; the session applies the result back here, as one undo step.
        """
        if self.feedback.busy_reasons & {"analysing", "re-analysing", "restoring"}:
            # One analysis at a time: the newest settings run when the current one is done.
            self.state.pending_settings = settings
            self.feedback.status("settings noted: they apply when the analysis running now has finished")
            return
        if self.state.key is None:
            self.state.session.default_settings = settings
            return
        self._run_settings_job(settings, self._reanalysis_done)

    def _run_settings_job(self, settings, done, what: str = "re-analysing") -> bool:
        """Start the session's settings job for the recording shown; ``done(session, change)``
        runs on the GUI thread with its result. False when the job cannot be made."""
        session, key = self.state.session, self.state.key
        try:
            # The summaries follow in their own background job (summary_job): the beats, flags
            # and rejections show as soon as the stage the change reran is done.
            job = session.settings_job(settings, [key], summaries=False)
        except InputError as exc:  # the source has gone: the results stay as they are
            self.feedback.show_error(exc.one_line() + " (re-analysis needs the recording)")
            self.views.settings_form.show_settings(session.settings(key))
            return False
        worker = Job(lambda report, cancelled: job(report), "reanalysis")
        worker.signals.progress.connect(self.feedback.on_progress)
        worker.signals.finished.connect(lambda change, s=session, w=what: (self.feedback.busy(w, False), done(s, change)))
        worker.signals.failed.connect(self.feedback.job_failed)
        self.feedback.busy(what, True)
        self.runner.start(worker)
        return True

    def _reanalysis_done(self, session: Session, change) -> None:
        if session is not self.state.session:
            return
        pending, self.state.pending_settings = self.state.pending_settings, None
        if not session.apply_settings(change):
            # Prepared from a state the session has since left: prepare it again.
            self.reanalyse(pending if pending is not None else change.settings)
            return
        session.default_settings = change.settings
        scope = change.scopes.get(self.state.key, "none")
        self.feedback.status({"none": "settings unchanged", "summary": "summaries updated",
                              "rules": "quality rules applied again", "events": "events and quality rules re-run",
                              "measure": "beats measured again", "detect": "beats detected and measured again"}.get(scope, scope))
        self.display.refresh_all()
        if pending is not None and pending != change.settings:
            self.reanalyse(pending)

    def change_channel(self, channel: int) -> None:
        """Show another channel of the recording, analysed when it holds a membrane potential.

        The channel the session analysed shows its beats again at once; another current-clamp
        channel is analysed (replacing the recording's results); any other channel (a command
        current, a temperature) is shown as a trace without beats.
        """
        rec = self.state.recording
        if rec is None or channel == self.state.channel:
            return
        self.state.channel = int(channel)
        self.state.levels_cache = {}
        self.state.sweep = -1
        self.display.set_sweep(0)
        self._start_envelopes(rec)
        analysed = self.state.key is not None and self.state.session.info(self.state.key).channel == self.state.channel
        if analysed:
            self.display.refresh_all()
        elif self.state.channel in rec.current_clamp_channels():
            self._start_analysis(rec, self.state.channel)
        else:
            self.display.beats_hidden()
            ch = rec.channels[self.state.channel]
            self.feedback.status(f"channel {ch.name} [{ch.units}] is not a membrane potential: shown without beats")
        self.views.channel_combo.setCurrentIndex(self.state.channel)

    # -- autosave ------------------------------------------------------------------------------
    def _autosave(self, event: str, key: str, _rows: list) -> None:
        st = self.state
        if event in ("decisions_changed", "conditions_changed", "settings_changed") and key and key == st.key and st.journal:
            try:
                st.journal.write(st.session)
            except OSError as exc:
                self.feedback.status(f"autosave failed: {exc}")
            else:
                st.journaled_keys.add(key)
