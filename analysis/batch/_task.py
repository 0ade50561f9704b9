"""The work of one batch task, and its round trip to plain values.

A worker analyses one recording through a :class:`~analysis.session.Session` (the very path
``upstroke analyze`` takes), computes its summaries there (the ensemble-averaged beat needs the
samples, which stay on the worker) and flattens the resulting
:class:`~analysis.results.StoredRecording` into plain values: numpy arrays, strings, numbers. The
caller rebuilds the StoredRecording with :func:`stored_from_outcome` and alone writes the file.
"""

from __future__ import annotations

import dataclasses
from typing import Any

import numpy as np

from analysis.batch._types import FileOutcome, FileTask
from analysis.conditions import parse_condition
from analysis.decisions import DecisionLog
from analysis.pipeline import analyze
from analysis.readers import open_recording
from analysis.results import RecordingFacts, StoredRecording
from analysis.session import Session, stored_recordings
from analysis.settings import Settings
from analysis.table import BeatTable

__all__ = ["run_task", "stored_from_outcome"]

# Fields of StoredRecording that travel as they are (plain values): the recording's facts and these.
_PLAIN = (
    *(f.name for f in dataclasses.fields(RecordingFacts)),
    "ljp_mV", "settings_json", "settings_schema", "settings_hash", "warnings",
)


def run_task(task: FileTask) -> FileOutcome:
    """Analyse the task's recording; raises :class:`~analysis.errors.InputError` for a bad file.

    The steps are those of ``upstroke analyze``: open (with any units declared), analyse with the
    file labelled as given, then the session's view and summaries.
    """

    settings = Settings.from_dict(task.settings) if task.settings is not None else Settings()
    rec = open_recording(task.open_path, units=dict(task.units) if task.units else None)
    result = analyze(rec, settings, channel=task.channel, sweeps=task.sweeps, label=task.path)
    session = Session(settings)
    session.add(
        rec, settings=settings, channel=task.channel, sweeps=task.sweeps, label=task.path,
        conditions=[parse_condition(c) for c in task.conditions], result=result,
    )
    stored = stored_recordings(session)[0]
    return FileOutcome(
        index=task.index, path=task.path, columns=stored.beats.columns(), warnings=list(stored.warnings),
        meta=_flatten(stored),
    )


def _flatten(stored: StoredRecording) -> dict[str, Any]:
    meta: dict[str, Any] = {name: getattr(stored, name) for name in _PLAIN}
    meta["decisions"] = stored.decisions.columns()
    meta["conditions"] = [c.text() for c in stored.conditions]
    meta["summary"] = {k: np.asarray(v) for k, v in stored.summary.items()}
    meta["ensembles"] = [(np.asarray(v, dtype=np.float64), float(fs), float(t0)) for v, fs, t0 in stored.ensembles]
    meta["format"] = stored.reader
    meta["n_sweeps"] = len(stored.sweep_lengths)
    return meta


def stored_from_outcome(outcome: FileOutcome) -> StoredRecording:
    """The :class:`~analysis.results.StoredRecording` a successful task described."""

    if not outcome.ok:
        raise ValueError(f"{outcome.path} has no results: {outcome.reason}")
    meta = outcome.meta
    kwargs = {name: meta[name] for name in _PLAIN}
    kwargs["sweeps"] = None if meta["sweeps"] is None else tuple(meta["sweeps"])
    kwargs["warnings"] = tuple(meta["warnings"])
    return StoredRecording(
        **kwargs,
        beats=BeatTable(outcome.columns),
        decisions=DecisionLog.from_columns(meta["decisions"]),
        conditions=tuple(parse_condition(c) for c in meta["conditions"]),
        summary=dict(meta["summary"]),
        ensembles=list(meta["ensembles"]),
    )


def _fields() -> tuple[str, ...]:
    return tuple(f.name for f in dataclasses.fields(StoredRecording))
