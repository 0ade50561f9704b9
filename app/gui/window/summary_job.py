"""Condition summaries computed off the GUI thread by the session's own summary jobs.

A summary includes an ensemble-averaged beat measured by the core, which takes long enough to
make the window stutter after every verdict if done on the GUI thread. The session is not
thread-safe, so the work goes in three steps (:mod:`analysis.session._jobs`):

1. on the GUI thread, :meth:`Session.summary_job` takes a snapshot of immutable inputs;
2. a worker of the thread pool computes it;
3. back on the GUI thread, :meth:`Session.set_summaries` keeps the result only if nothing has
   changed since the snapshot. A stale result is dropped without being shown: the change that
   made it stale has scheduled a summary of its own.

Summaries the session already holds (computed with a settings change, or by an earlier job with
nothing edited since) are shown at once, without a job.
"""

from __future__ import annotations

from typing import Callable

from analysis.session import Session

from .workers import Job, JobRunner

__all__ = ["start_summary"]


def start_summary(
    runner: JobRunner, session: Session, key: str, shown: Callable[[str, list], None],
    failed: Callable[[str], None] | None = None,
) -> Job | None:
    """Summarise a recording in the background and call ``shown(key, summaries)`` with the result.

    Parameters
    ----------
    runner : JobRunner
    session : Session
    key : str
        The recording.
    shown : callable
        Called on the GUI thread with the session's summaries, once they are current (never with
        a stale result).
    failed : callable or None
        Called with the first line of the error when the summary fails.

    Returns
    -------
    Job or None
        The job started, or None when the session's summaries were current and shown at once.
    """
    cached = session.cached_summaries(key)
    if cached is not None:
        shown(key, cached)
        return None
    job = session.summary_job(key)
    worker = Job(lambda report, cancelled: job(report), "summary")

    def finished(summaries: list) -> None:
        if session.set_summaries(job, summaries):
            shown(key, summaries)

    worker.signals.finished.connect(finished)
    if failed is not None:
        worker.signals.failed.connect(lambda message, _user: failed(message.splitlines()[0]))
    runner.start(worker)
    return worker
