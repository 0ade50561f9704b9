"""Work a session hands to another thread: pure jobs over immutable snapshots.

A :class:`~analysis.session.Session` is not thread-safe, yet summaries (with their ensemble beat
measured by the core) and re-analyses take long enough that an app must run them off its GUI
thread. Both go the same way:

1. On the session's thread, the session makes a job: :meth:`Session.summary_job` or
   :meth:`Session.settings_job`. The job is a snapshot of immutable inputs: beat tables (never
   changed in place; the session replaces them), frozen settings and conditions, a copy of the
   decision log, the recording (read-only) and the recording's facts as plain values.
2. Anywhere (a worker thread), ``result = job(progress=...)`` computes. It reads nothing of the
   session and writes nothing anywhere.
3. Back on the session's thread, :meth:`Session.set_summaries` or :meth:`Session.apply_settings`
   keeps the result only if the session has not moved on since the snapshot; a stale result is
   dropped (they return False) and the caller asks for a new job.

``progress(fraction, message)`` receives the fraction done (0 to 1, never decreasing) and what
is being done, in words a user reads in a status bar.
"""

from __future__ import annotations

import os
from dataclasses import dataclass, replace
from typing import Any, Callable, Sequence

import analysis.flags as flags
import analysis.pipeline as pipeline
from analysis.conditions import Condition
from analysis.decisions import DecisionLog
from analysis.flags import RecordingSweeps
from analysis.recording import Recording
from analysis.results import provenance_now
from analysis.session._types import (
    Entry,
    RecordingFacts,
    SettingsChange,
    cycle_measurer,
    is_event_warning,
    mV_scale,
    reviewed_table,
)
from analysis.stats import summarize
from analysis.table import BeatTable

__all__ = ["Progress", "SettingsJob", "SummaryJob"]

#: ``progress(fraction, message)``: fraction done in [0, 1], and what is being done.
Progress = Callable[[float, str], None]


def _quiet(_fraction: float, _message: str) -> None:
    return None


def summaries_of(
    beats: BeatTable, facts: RecordingFacts, conditions: Sequence[Condition], settings: Any,
    recording: Recording | None,
) -> list:
    """A recording's summaries from its reviewed table (see :func:`analysis.stats.summarize`).

    The ensemble beat reads the samples of ``recording`` (None: no ensemble beat) with the
    settings' own LJP subtracted, and is measured with the same settings as every beat.
    """

    source = measure = None
    ljp_mV = float(settings.preprocess.ljp_mV)
    if recording is not None and getattr(settings.summary, "ensemble", True):
        source = RecordingSweeps(recording, facts.channel, scale=mV_scale(facts.units), subtract_mV=ljp_mV)
        measure = cycle_measurer(settings, ljp_mV, facts.sampling_rate_hz)
    return summarize(
        beats, label=facts.label, sweep_starts_s=facts.sweep_starts_s, sweep_durations_s=facts.sweep_durations_s,
        conditions=conditions, settings=settings.summary, settings_hash=settings.short_hash(),
        ensemble_source=source, fs_hz=facts.sampling_rate_hz, measure_ensemble=measure,
    )


def _facts_copy(facts: RecordingFacts) -> RecordingFacts:
    return replace(facts, provenance=dict(facts.provenance))


@dataclass(frozen=True)
class SummaryJob:
    """Computes one recording's summaries from a snapshot (see :meth:`Session.summary_job`).

    Call it (``job()``) to get the list of :class:`analysis.stats.Summary`; hand the list to
    :meth:`Session.set_summaries`, which keeps it only while ``version`` is the recording's.

    Attributes
    ----------
    key : str
        The recording's key.
    version : int
        The recording's version when the snapshot was taken (every edit increments it).
    beats : BeatTable
        The reviewed table (decisions and conditions applied).
    facts : RecordingFacts
        A copy of the recording's facts (label, channel, units, geometry).
    conditions : tuple of Condition
    settings : Settings
    recording : Recording or None
        The samples for the ensemble beat (None when the source is missing, or the ensemble is
        switched off).
    """

    key: str
    version: int
    beats: BeatTable
    facts: RecordingFacts
    conditions: tuple[Condition, ...]
    settings: Any
    recording: Recording | None

    def __call__(self, progress: Progress | None = None) -> list:
        name = os.path.basename(self.facts.label)
        (progress or _quiet)(0.0, f"{name}: summarising")
        out = summaries_of(self.beats, self.facts, self.conditions, self.settings, self.recording)
        (progress or _quiet)(1.0, f"{name}: summarised")
        return out


@dataclass(frozen=True)
class SettingsItem:
    """One recording's part of a :class:`SettingsJob` (a snapshot; see its attributes there)."""

    key: str
    version: int
    scope: str
    settings: Any
    table: BeatTable
    warnings: tuple[str, ...]
    decisions: DecisionLog
    conditions: tuple[Condition, ...]
    facts: RecordingFacts
    channel: int | str
    recording: Recording | None
    #: What detection found for ``table`` (:attr:`analysis.pipeline.AnalysisResult.detections`),
    #: or None (then a measurement change detects again).
    detections: dict | None = None


#: Share of a recording's progress spent before its summaries, by scope.
_WORK_SHARE = {"detect": 0.85, "measure": 0.8, "events": 0.6, "rules": 0.3, "summary": 0.0}


@dataclass(frozen=True)
class SettingsJob:
    """Computes what new settings give, from a snapshot (see :meth:`Session.settings_job`).

    Call it (``job(progress=...)``) to get a :class:`~analysis.session.SettingsChange`;
    hand that to :meth:`Session.apply_settings`. What each recording recomputes is its scope
    (``items[i].scope``), from the settings sections that differ from the recording's own:

    * ``"none"``: nothing differs; nothing is computed.
    * ``"summary"`` (only the summary section differs): the summaries are computed again.
    * ``"rules"`` (the table's quality rules): the flagged table is re-flagged and the rejection
      rules applied again, without reading samples (:func:`analysis.flags.reapply_rules`; the
      events run again when the table cannot tell), then the summaries.
    * ``"events"`` (the trace's event settings): the events and quality rules run again on the
      beats already measured (nothing is detected or measured), then the summaries.
    * ``"measure"`` (measurement, or the artefact rule): the beats are measured again from the
      detections the table was made from (detected again when they are not known), then the
      events, rules and summaries.
    * ``"detect"`` (preprocess or detection): detection and measurement run again on the
      recording's analysed sweeps (its sweep selection; sweeps left out stay out), then the
      events and quality rules, then the summaries.

    Detection and measurement share a long sweep's chunks with ``workers`` processes, as the
    command line does. Summaries are computed from the decisions and conditions of the snapshot
    (not at all when ``summaries`` is False: the session computes them when next asked); if the
    user edits them before the change is applied, the summaries are dropped and computed again
    later.
    """

    settings: Any
    items: tuple[SettingsItem, ...]
    tolerance_s: float
    workers: int | None = None
    summaries: bool = True

    @property
    def scopes(self) -> dict[str, str]:
        return {it.key: it.scope for it in self.items}

    def __call__(self, progress: Progress | None = None) -> SettingsChange:
        report = progress or _quiet
        busy = [it for it in self.items if it.scope != "none"]
        tables, warnings, prov, summaries, versions, bases, found = {}, {}, {}, {}, {}, {}, {}
        report(0.0, "applying the settings" if busy else "settings unchanged")
        for i, it in enumerate(busy):
            lo, width = i / len(busy), 1.0 / len(busy)
            share = _WORK_SHARE[it.scope]

            def step(fraction: float, message: str, lo=lo, width=width, label=os.path.basename(it.facts.label)) -> None:
                report(lo + width * min(max(fraction, 0.0), 1.0), f"{label}: {message}")

            table, warn, dets = self._results(it, step, share)
            if it.scope not in ("summary", "none"):
                tables[it.key], warnings[it.key], prov[it.key] = table, warn, provenance_now()
            if dets is not None:
                found[it.key] = dets
            versions[it.key] = it.version
            if self.summaries or it.scope == "summary":
                step(share, "summarising")
                entry = Entry(info=it.facts, settings=self.settings, table=table, warnings=warn,
                              decisions=it.decisions, conditions=it.conditions)
                summaries[it.key] = summaries_of(reviewed_table(entry, self.tolerance_s), it.facts, it.conditions,
                                                 self.settings, it.recording)
            bases[it.key] = (it.settings, it.table)
            step(1.0, "done")
        report(1.0, "settings applied" if busy else "settings unchanged")
        return SettingsChange(self.settings, self.scopes, tables, warnings, prov, summaries, versions, bases, found)

    def _results(self, it: SettingsItem, step: Progress, share: float):
        """The recording's new automatic table, warnings and detections (None: unchanged)."""

        scope = it.scope
        if scope == "measure" and not it.detections:
            scope = "detect"  # the detections are not known: find them again
        if scope in ("detect", "measure"):
            message = "detecting and measuring beats" if scope == "detect" else "measuring beats"
            step(0.0, message)
            res = pipeline.analyze(it.recording, settings=self.settings, channel=it.channel, sweeps=it.facts.sweeps,
                          label=it.facts.label, workers=self.workers,
                          detections=it.detections if scope == "measure" else None,
                          progress=lambda done, total: step(share * (done / total if total else 1.0), message))
            return res.beats, tuple(res.warnings), res.detections or None
        kept = tuple(w for w in it.warnings if not is_event_warning(w))
        if scope == "rules":
            step(0.0, "applying the quality rules")
            again = flags.reapply_rules(it.table, self.settings.quality)
            if again is not None:
                return again[0], kept + tuple(again[1]), None
        if scope in ("rules", "events"):
            step(0.0, "running the events and quality rules")
            table, more = pipeline.flag_and_reject(it.table, it.recording, it.facts.channel, self.settings,
                                          scale=mV_scale(it.facts.units))
            return table, kept + tuple(more), None
        return it.table, it.warnings, None


def snapshot_summary(entry: Entry, key: str, beats: BeatTable, recording: Recording | None) -> SummaryJob:
    """A :class:`SummaryJob` over an entry's current state (call on the session's thread)."""
    wants_samples = getattr(entry.settings.summary, "ensemble", True)
    return SummaryJob(key, entry.version, beats, _facts_copy(entry.info), tuple(entry.conditions), entry.settings,
                      recording if wants_samples else None)


def snapshot_settings_item(entry: Entry, key: str, scope: str, recording: Recording | None) -> SettingsItem:
    """One recording's part of a :class:`SettingsJob` (call on the session's thread)."""
    channel = entry.requested_channel if entry.requested_channel is not None else entry.info.channel
    detected = entry.detected
    detections = detected[1] if detected is not None and detected[0] is entry.table else None
    return SettingsItem(key, entry.version, scope, entry.settings, entry.table, tuple(entry.warnings),
                        entry.decisions.copy(), tuple(entry.conditions), _facts_copy(entry.info), channel, recording,
                        detections)
