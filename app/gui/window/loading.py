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
from pathlib import Path
from typing import Sequence

from analysis import open_recording
from analysis.conditions import Condition
from analysis.errors import InputError
from analysis.recording import Recording
from analysis.session import Session

from .autosave import Journal, PendingReview, pending_reviews
from .session_bridge import SessionBridge
from ..views.trace_data import SweepLevels, recording_envelope
from .workers import Job

__all__ = ["LoadingMixin", "RESULTS_EXTENSIONS"]

RESULTS_EXTENSIONS = (".h5", ".hdf5")


def _analyze(recording: Recording, settings, channel, label, report, cancelled):
    """The core's analysis, reporting its progress (samples worked) as a fraction."""
    from analysis.pipeline import analyze

    report(0.0, "detecting and measuring beats")
    return analyze(recording, settings=settings, channel=channel, label=label,
                   progress=lambda done, total: report(done / total if total else 1.0, "detecting and measuring beats"))


class LoadingMixin:
    """Opening, analysing and re-analysing for :class:`~app.gui.main_window.MainWindow`."""

    # -- sessions ------------------------------------------------------------------------------
    def _set_session(self, session: Session) -> None:
        if getattr(self, "bridge", None) is not None:
            self.bridge.detach()
        self.session = session
        #: Recordings whose journal this window wrote or replayed: their review is the session's.
        self.journaled_keys: set[str] = set()
        self.bridge = SessionBridge(session, self)
        self.bridge.decisions_changed.connect(self._on_decisions_changed)
        self.bridge.conditions_changed.connect(self._on_conditions_changed)
        self.bridge.results_changed.connect(self._on_results_changed)
        self.bridge.history_changed.connect(self._update_history_actions)
        self.bridge.warning.connect(lambda _k, text: self.status(f"warning: {text}"))
        self.bridge.changed.connect(self._autosave)
        self._update_history_actions()

    # -- opening -------------------------------------------------------------------------------
    def open_path(self, path: str | os.PathLike, *, conditions: Sequence[Condition] = ()) -> bool:
        """Open a recording (analysed in the background) or a results file. False on bad input."""
        path = os.fspath(path)
        if not self._confirm_discard():
            return False
        try:
            if Path(path).suffix.lower() in RESULTS_EXTENSIONS:
                self.open_results(path)
            else:
                self.open_recording_file(open_recording(path), origin=path, conditions=conditions)
        except InputError as exc:
            self.show_error(exc.one_line())
            return False
        self.recent.add(path)
        self._fill_recent_menu()
        return True

    def open_recording_file(self, recording: Recording, *, origin: str | None = None, label: str | None = None,
                            conditions: Sequence[Condition] = (), result=None) -> None:
        """Show a recording at once and analyse it in the background.

        ``result`` is an :class:`~analysis.pipeline.AnalysisResult` already computed for this
        recording with the form's settings (for example by a batch); it is used instead.
        """
        self.runner.cancel_all()
        self._set_session(Session(self.settings_form.settings))
        self.key = None
        self._forget_beats()
        # A recording opened on its own has no results file yet: saving asks where (it must not
        # write over the results file shown before).
        self.results_path = None
        self.origin = origin or recording.source_path or label or "recording"
        self.recording = recording
        self._label = label
        self._pending_conditions = tuple(conditions)
        cc = recording.current_clamp_channels()
        self.channel = cc[0] if cc else 0
        self._show_recording(recording)
        if result is not None:
            self.channel = int(result.channel)
            self._analysis_done(recording, result.settings, self.channel, result, busy=False)
        else:
            self._start_analysis(recording, self.channel)

    def open_results(self, path: str, *, session: Session | None = None) -> None:
        """Open a results file: its recordings, decisions, conditions and settings.

        ``session`` is the file already read by :meth:`Session.open` (so that a caller can
        check the file opens before it lets go of anything).
        """
        self.runner.cancel_all()
        session = Session.open(path) if session is None else session
        self._set_session(session)
        self.origin = path
        self.results_path = path
        for w in session.open_warnings:
            self.status(w)
        if not session.recordings:
            self.show_error(f"{path}: the results file holds no recordings; analyse one and save it")
            return
        self._fill_recording_combo()
        self.select_recording(session.recordings[0])

    def recoverable_reviews(self, *, skip: Sequence[str | os.PathLike] = ()) -> list[PendingReview]:
        """The unsaved reviews that can be reopened, newest first: every journal in the autosave
        folder whose recording or results file is still there, less those of the ``skip`` origins."""
        skipped = {os.path.abspath(os.fspath(p)) for p in skip}
        return [p for p in pending_reviews() if p.origin not in skipped and os.path.exists(p.origin)]

    def offer_recovery(self, *, choose=None, skip: Sequence[str | os.PathLike] = ()) -> PendingReview | None:
        """Offer the reviews a crash or a kill left unsaved, and reopen the one chosen.

        At start, and from File > Recover unsaved review… (:func:`~app.gui.recovery.add_recover_action`).

        Parameters
        ----------
        choose : callable or None
            ``choose(pending) -> PendingReview or None`` picks one; None asks the user in an
            interactive window (:func:`~app.gui.recovery.ask_recovery`, where journals can also
            be discarded) and keeps them all otherwise.
        skip : sequence of paths
            Origins not to offer: the file the app was started on, or the file shown now (its
            journal is the review on screen); their reviews come back anyway.

        Returns
        -------
        PendingReview or None
            The review reopened. Its recording (or results file) is opened as usual and the
            journal replayed once the analysis is done; journals whose origin is gone are kept.
        """
        pending = self.recoverable_reviews(skip=skip)
        if not pending:
            return None
        if choose is not None:
            choice = choose(pending)
        elif self.interactive:
            from ..dialogs.recovery import ask_recovery

            choice = ask_recovery(self, pending)
        else:
            choice = None
        if choice is None:
            left = [p for p in pending if p.path.exists()]
            if left:
                self.status(f"{len(left)} unsaved review(s) kept; File > Recover unsaved review… (or opening "
                            "the file again) recovers one")
            return None
        if not self.open_path(choice.origin):
            return None
        if choice.key in self.session.recordings and choice.key != self.key:
            self.select_recording(choice.key)  # a results file: the recording the review was of
        return choice

    def select_recording(self, key: str) -> None:
        """Show one recording of the session, its first measured beat selected."""
        self._forget_beats()
        self.key = key
        info = self.session.info(key)
        self.settings_form.show_settings(self.session.settings(key))
        self.channel = info.channel
        try:
            self.recording = self.session.recording(key)
        except InputError as exc:
            self.recording = None
            self.show_error(exc.one_line() + " (the results are shown; traces need the recording)")
        if self.recording is not None:
            self._show_recording(self.recording)
        self._after_results(restore=True)

    # -- showing samples -----------------------------------------------------------------------
    def _show_recording(self, recording: Recording) -> None:
        self._levels: dict[int, SweepLevels] = {}
        self._fill_channel_combo(recording)
        self.sweep_spin.blockSignals(True)
        self.sweep_spin.setRange(1, recording.n_sweeps)
        self.sweep_spin.setValue(1)
        self.sweep_spin.setSuffix(f" / {recording.n_sweeps}")
        self.sweep_spin.blockSignals(False)
        durations = [n / recording.sampling_rate_hz for n in recording.sweep_lengths]
        self.overview.set_recording_geometry(recording.sweep_starts_s, durations)
        self.sweep = -1
        self.set_sweep(0)
        name = self._label or (os.path.basename(recording.source_path) if recording.source_path else "recording")
        self.setWindowTitle(f"{name}[*] — Upstroke")
        self._start_envelopes(recording)

    def levels(self, sweep: int) -> SweepLevels:
        """Drawable samples of a sweep of the shown channel (made on first use)."""
        if sweep not in self._levels:
            self._levels[sweep] = SweepLevels(self.recording, sweep, self.channel)
        return self._levels[sweep]

    def _start_envelopes(self, recording: Recording) -> None:
        channel = self.channel
        levels = [self.levels(i) for i in range(recording.n_sweeps)]

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
        if envelope is None or recording is not self.recording or channel != self.channel:
            return
        self.overview.set_envelope(*envelope)
        self.trace_view.refresh_samples()

    # -- analysis ------------------------------------------------------------------------------
    def _start_analysis(self, recording: Recording, channel: int) -> None:
        settings = self.settings_form.settings
        label = self._label
        job = Job(lambda report, cancelled: _analyze(recording, settings, channel, label, report, cancelled), "analysis")
        job.signals.progress.connect(self._on_progress)
        job.signals.finished.connect(lambda result, r=recording, s=settings, c=channel: self._analysis_done(r, s, c, result))
        job.signals.failed.connect(self._job_failed)
        self._busy("analysing", True)
        self.runner.start(job)

    def _analysis_done(self, recording: Recording, settings, channel: int, result, busy: bool = True) -> None:
        if busy:
            self._busy("analysing", False)
        if recording is not self.recording or int(result.channel) != self.channel:
            return  # the user has moved on to another file or channel
        key = self.session.add(recording, settings=settings, channel=channel, result=result, label=self._label,
                               conditions=self._pending_conditions, keep_review=False)
        self.key = key
        self.channel = int(result.channel)
        self._fill_recording_combo()
        self.status(f"{len(self.session.beats(key))} beats found; " + (f"{len(result.warnings)} warning(s)" if result.warnings else "no warnings"))
        self._after_results(restore=True)
        pending, self._pending_settings = self._pending_settings, None
        if pending is not None and pending != self.session.settings(key):
            self.reanalyse(pending)

    def _after_results(self, *, restore: bool) -> None:
        """Everything that follows new results: autosave restore, tables, views."""
        key = self.key
        self.journal = Journal(self.origin or key, key)
        if restore and self.journal.exists():
            self._restore_review(self.journal)
        self._refresh_all()

    # -- autosave restore ----------------------------------------------------------------------
    def _journal_follows(self, results_path: str) -> None:
        """After a save, journal later changes under the results file: reopening that file (or
        recovering at start) then finds them."""
        self.origin = results_path
        if self.key is not None:
            self.journal = Journal(results_path, self.key)

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
            self.status(exc.one_line())
            return
        if review is None:
            return
        if review.settings == self.session.settings(journal.key):
            self._replay_review(self.session, journal, review, settings_changed=False)
            return
        self.status("restoring the unsaved review: re-analysing with its settings")
        self._run_settings_job(review.settings, lambda session, change: self._restore_done(session, journal, review, change),
                               what="restoring")

    def _restore_done(self, session: Session, journal: Journal, review, change) -> None:
        if session is not self.session or journal is not self.journal:
            return  # another file was opened meanwhile: the journal stays for next time
        with journal.replaying(session):
            if not session.apply_settings(change):
                self._restore_review(journal)  # prepared from a state since left: again
                return
            session.default_settings = change.settings
            self.settings_form.show_settings(session.settings(journal.key))
            self._replay_review(session, journal, review, settings_changed=True)
        pending, self._pending_settings = self._pending_settings, None
        if pending is not None and pending != session.settings(journal.key):
            self.reanalyse(pending)

    def _replay_review(self, session: Session, journal: Journal, review, *, settings_changed: bool) -> None:
        try:
            report = journal.replay(session, review, settings_changed=settings_changed)
        except InputError as exc:
            self.status(f"the autosaved review could not be restored ({exc.one_line()}); it was kept")
            return
        self.journaled_keys.add(journal.key)
        if report is not None:
            self.status(report.text())
        self._refresh_all()

    def reanalyse(self, settings) -> None:
        """Re-analyse with new settings off the GUI thread; only what the change affects reruns.

        The session does all of it (:meth:`~analysis.session.Session.settings_job`): the job, a
        snapshot, is made here; a worker computes it (a summary-only change summarises again, a
        quality change re-runs the events and quality rules, a preprocess, detection or
        measurement change re-analyses the recording's analysed sweeps), with its progress in the
        status bar; the session applies the result back here, as one undo step.
        """
        if self._busy_reasons & {"analysing", "re-analysing", "restoring"}:
            # One analysis at a time: the newest settings run when the current one is done.
            self._pending_settings = settings
            self.status("settings noted: they apply when the analysis running now has finished")
            return
        if self.key is None:
            self.session.default_settings = settings
            return
        self._run_settings_job(settings, self._reanalysis_done)

    def _run_settings_job(self, settings, done, what: str = "re-analysing") -> bool:
        """Start the session's settings job for the recording shown; ``done(session, change)``
        runs on the GUI thread with its result. False when the job cannot be made."""
        session, key = self.session, self.key
        try:
            job = session.settings_job(settings, [key])
        except InputError as exc:  # the source has gone: the results stay as they are
            self.show_error(exc.one_line() + " (re-analysis needs the recording)")
            self.settings_form.show_settings(session.settings(key))
            return False
        worker = Job(lambda report, cancelled: job(report), "reanalysis")
        worker.signals.progress.connect(self._on_progress)
        worker.signals.finished.connect(lambda change, s=session, w=what: (self._busy(w, False), done(s, change)))
        worker.signals.failed.connect(self._job_failed)
        self._busy(what, True)
        self.runner.start(worker)
        return True

    def _reanalysis_done(self, session: Session, change) -> None:
        if session is not self.session:
            return
        pending, self._pending_settings = self._pending_settings, None
        if not session.apply_settings(change):
            # Prepared from a state the session has since left: prepare it again.
            self.reanalyse(pending if pending is not None else change.settings)
            return
        session.default_settings = change.settings
        scope = change.scopes.get(self.key, "none")
        self.status({"none": "settings unchanged", "summary": "summaries updated",
                     "events": "events and quality rules re-run", "analysis": "beats detected and measured again"}.get(scope, scope))
        self._refresh_all()
        if pending is not None and pending != change.settings:
            self.reanalyse(pending)

    def change_channel(self, channel: int) -> None:
        """Show another channel of the recording, analysed when it holds a membrane potential.

        The channel the session analysed shows its beats again at once; another current-clamp
        channel is analysed (replacing the recording's results); any other channel (a command
        current, a temperature) is shown as a trace without beats.
        """
        rec = self.recording
        if rec is None or channel == self.channel:
            return
        self.channel = int(channel)
        self._levels = {}
        self.sweep = -1
        self.set_sweep(0)
        self._start_envelopes(rec)
        analysed = self.key is not None and self.session.info(self.key).channel == self.channel
        if analysed:
            self._refresh_all()
        elif self.channel in rec.current_clamp_channels():
            self._start_analysis(rec, self.channel)
        else:
            self._beats_hidden()
            ch = rec.channels[self.channel]
            self.status(f"channel {ch.name} [{ch.units}] is not a membrane potential: shown without beats")
        self.channel_combo.setCurrentIndex(self.channel)

    # -- waiting (tests, screenshots) ---------------------------------------------------------
    def settle(self, timeout_ms: int = 120_000) -> bool:
        """Run pending delayed refreshes now and wait for every background job, until neither
        is left (a finished analysis schedules a summary, which is a job of its own)."""
        from PySide6 import QtCore

        timer = QtCore.QElapsedTimer()
        timer.start()
        while True:
            if self._summary_timer.isActive():
                self._summary_timer.stop()
                self._refresh_summary()
            if not self.wait_idle(max(1, timeout_ms - timer.elapsed())):
                return False
            if self._overview_timer.isActive():
                self._overview_timer.stop()
                self._sync_overview_window()
            if not self._summary_timer.isActive() and not self.runner.busy():
                return True

    def wait_idle(self, timeout_ms: int = 120_000) -> bool:
        """Process events until no background job is left (or the timeout)."""
        from PySide6 import QtCore, QtWidgets

        timer = QtCore.QElapsedTimer()
        timer.start()
        app = QtWidgets.QApplication.instance()
        while timer.elapsed() < timeout_ms:
            app.processEvents(QtCore.QEventLoop.AllEvents, 50)
            if not self.runner.busy():
                app.processEvents()
                if not self.runner.busy():
                    return True
            QtCore.QThread.msleep(5)
        return False
