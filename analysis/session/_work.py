"""Re-analysis and summaries of a :class:`~analysis.session.Session`, as jobs off its thread.

The methods here make the pure jobs of :mod:`analysis.session._jobs` from the session's state,
run them on the spot where a caller wants a plain call (:meth:`SessionWork.set_settings`,
:meth:`SessionWork.summaries`), and apply their results when the session has not moved on.
:class:`~analysis.session.Session` inherits them; they live here so that each module stays small.
"""

from __future__ import annotations

from typing import Any, Sequence

import numpy as np

from analysis.errors import RecordingError
from analysis.session._commands import SettingsCommand
from analysis.session._jobs import (
    Progress,
    SettingsJob,
    SummaryJob,
    snapshot_settings_item,
    snapshot_summary,
)
from analysis.session._types import SettingsChange
from analysis.session._types import scope as change_scope
from analysis.stats import summary_columns

__all__ = ["SessionWork"]


class SessionWork:
    """Settings changes and summaries for :class:`~analysis.session.Session` (a mixin)."""

    # -- settings ----------------------------------------------------------------------------
    def settings_job(self, settings: Any, keys: Sequence[str] | None = None, *, summaries: bool = True) -> SettingsJob:
        """A snapshot that computes what new settings give, for running in a worker thread.

        Per recording (``keys``, default all) the settings' scope says what is recomputed; the
        settings are per recording, and what they affect is exactly this (see
        :class:`~analysis.session.SettingsJob`):

        * a summary-only change recomputes the summaries;
        * a change of the table's quality rules re-flags the table without reading samples;
        * a change of the trace's event settings re-runs the events and quality rules on the
          beats already measured;
        * a measurement change (or the artefact rule's) measures the beats again from their
          detections (:func:`analysis.pipeline.stage_of_change` names the stage of each field);
        * a preprocess or detection change re-runs detection and measurement of the recording's
          analysed sweeps (its selection, see :meth:`set_sweeps`);
        each followed by the later stages, the summaries last (unless ``summaries`` is False:
        the session then computes them when next asked, see :meth:`summary_job`).

        Call it on the session's thread; the job holds immutable inputs only, so the session may
        go on changing while it runs. Hand its result to :meth:`apply_settings`.

        Raises
        ------
        RecordingError
            When a recording to re-analyse cannot be opened from its source.
        """
        keys = list(self._entries) if keys is None else list(keys)
        items = []
        for key in keys:
            e = self._entry(key)
            scope = change_scope(e.settings, settings)
            rec = None
            if scope in ("detect", "measure", "events", "rules"):
                rec = self.recording(key)
            elif scope == "summary":
                try:
                    rec = self.recording(key)
                except RecordingError:
                    rec = None  # summaries without their ensemble beat
            items.append(snapshot_settings_item(e, key, scope, rec))
        return SettingsJob(settings, tuple(items), self.match_tolerance_s, getattr(self, "workers", None), summaries)

    def prepare_settings(
        self, settings: Any, keys: Sequence[str] | None = None, *, progress: Progress | None = None,
    ) -> SettingsChange:
        """Compute the results and summaries new settings give, without changing the session.

        The same as ``settings_job(settings, keys)(progress)`` (see :meth:`settings_job` for
        exactly what is recomputed), in one call on the session's thread. An app runs the two
        halves apart: the job made on its GUI thread, called in a worker.

        Parameters
        ----------
        settings : Settings
        keys : sequence of str or None
            The recordings to change (None: all).
        progress : callable or None
            ``progress(fraction, message)``: the fraction done (0 to 1) and what is being done.
        """
        return self.settings_job(settings, keys)(progress)

    def apply_settings(self, change: SettingsChange) -> bool:
        """Apply prepared settings, results and summaries (one undo step).

        Returns
        -------
        bool
            False when the change is stale and was dropped: a recording's settings or automatic
            table are no longer those it was prepared from (another settings change, a sweep
            selection, an undo came in between). Prepare it again. True otherwise.
        """
        keys = [k for k, s in change.scopes.items() if s != "none" and k in self._entries]
        for k in keys:
            base = change.bases.get(k)
            e = self._entries[k]
            if base is not None and (base[1] is not e.table or base[0] != e.settings):
                return False
        if keys:
            self._run(SettingsCommand(self, change, keys))
        return True

    def set_settings(self, settings: Any, keys: Sequence[str] | None = None) -> dict[str, str]:
        """Change the settings of some (default: all) recordings and re-analyse what they affect.

        Decisions stay on the beats that still exist (matched by upstroke time). One undo step.

        Returns
        -------
        dict of str to str
            Per recording, what was recomputed (see :class:`SettingsChange`).
        """
        change = self.prepare_settings(settings, keys)
        self.apply_settings(change)
        return change.scopes

    # -- summaries ---------------------------------------------------------------------------
    def summaries(self, key: str) -> list:
        """The recording's summaries (:class:`analysis.stats.Summary`), cached until a change."""
        e = self._entry(key)
        if e.summaries is None:
            e.summaries = self.summary_job(key)()
        return e.summaries

    def cached_summaries(self, key: str) -> list | None:
        """The recording's summaries if they are up to date, else None (nothing is computed)."""
        return self._entry(key).summaries

    def summary_job(self, key: str) -> SummaryJob:
        """A snapshot that computes a recording's summaries, for running in a worker thread.

        The job holds immutable inputs (the reviewed table, conditions, settings, the
        recording's facts and the recording for the ensemble beat), so the session may go on
        changing meanwhile. Hand the result back with :meth:`set_summaries`, which keeps it only
        if nothing changed since.
        """
        e = self._entry(key)
        rec = None
        if getattr(e.settings.summary, "ensemble", True):
            try:
                rec = self.recording(key)
            except RecordingError:
                rec = None
        return snapshot_summary(e, key, self.beats(key), rec)

    def set_summaries(self, job: SummaryJob, summaries: list) -> bool:
        """Keep the summaries a :meth:`summary_job` computed; False (and dropped) when stale."""
        e = self._entries.get(job.key)
        if e is None or e.version != job.version:
            return False
        e.summaries = summaries
        return True

    def summary_table(self, keys: Sequence[str] | None = None) -> dict[str, np.ndarray]:
        """The summaries of several recordings (all by default) as summary-CSV columns."""

        keys = list(self._entries) if keys is None else list(keys)
        return summary_columns([s for k in keys for s in self.summaries(k)])
