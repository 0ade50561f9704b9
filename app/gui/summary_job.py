"""Condition summaries computed off the GUI thread from a snapshot of the session.

A summary includes an ensemble-averaged beat measured by the core, which takes long enough to
make the window stutter after every verdict if done on the GUI thread. The session itself is not
thread-safe, so :func:`summary_work` takes what a summary needs from it on the GUI thread (the
reviewed table, conditions, settings, geometry; all immutable) and returns a function that a
worker runs with the core's :func:`analysis.summary.summarize`, exactly as the session does.
"""

from __future__ import annotations

from typing import Callable

from analysis.errors import RecordingError
from analysis.recording import Recording
from analysis.session import Session

__all__ = ["summary_work"]


def summary_work(session: Session, key: str) -> Callable[..., list]:
    """A function ``fn(report, cancelled) -> list of Summary`` for the recording ``key``."""
    from analysis.ensemble import measure_cycle
    from analysis.pipeline import analyze
    from analysis.summary import summarize

    beats = session.beats(key)
    info = session.info(key)
    settings = session.settings(key)
    conditions = session.conditions(key)
    ljp = float(settings.preprocess.ljp_mV)
    try:
        recording = session.recording(key) if getattr(settings.summary, "ensemble", True) else None
    except RecordingError:
        recording = None
    fs = info.sampling_rate_hz

    def source(sweep: int):
        return recording.sweep(int(sweep), info.channel) - ljp

    def analyze_trace(v_mV, fs_hz):
        # The averaged cycle is already corrected; the analysis subtracts the LJP once more.
        return analyze(Recording.from_array(v_mV + ljp, fs_hz, units="mV"), settings=settings, channel=0).beats

    def measure(v):
        return measure_cycle(v, fs, analyze_trace, cycle_samples=v.size // 3)

    def work(report, cancelled):
        report(0.0, "summarising")
        return summarize(
            beats, label=info.label, sweep_starts_s=info.sweep_starts_s, sweep_durations_s=info.sweep_durations_s,
            conditions=conditions, settings=settings.summary, settings_hash=settings.short_hash(),
            ensemble_source=source if recording is not None else None, fs_hz=fs,
            measure_ensemble=measure if recording is not None else None,
        )

    return work
