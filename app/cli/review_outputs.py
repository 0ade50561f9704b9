"""The results-file side of ``upstroke analyze``: ``--out``, ``--summary-csv`` and ``--condition``.

:func:`review` puts the analysed files into a :class:`analysis.session.Session`: a new one, or the
one saved in the ``--out`` file when it exists (a recording of the same source replaces the
saved one and keeps its review decisions, matched by upstroke time, and its conditions unless
``--condition`` gives new ones; other recordings are added after those already there). The
results then carry the session's view of each table (conditions filled in, decisions applied),
so the beats CSV, the summary CSV and the results file all say the same, and ``upstroke export``
of the results file reproduces analyze's CSVs byte for byte.

Conditions on the command line
------------------------------
``--condition NAME=START-END[,steady=RULE]``, repeatable, applies to every file given:

* ``--condition baseline=0-60s --condition drug=60-180s --condition washout=180s-end``
  (seconds from the start of the recording; every range needs a unit, ``s`` or ``min``:
  ``1min-3min``; ``0-60`` without one is refused);
* ``--condition drug=sweeps:4-7`` (inclusive sweep numbers, for episodic files);
* ``,steady=RULE`` chooses the condition's steady-state window for its summary: ``auto`` (the
  suggested steady state, the default), ``all``, ``last30s``, ``last2min`` or ``last20beats``.
"""

from __future__ import annotations

import argparse
import contextlib
import os
from typing import Iterator, Sequence

from analysis.errors import InputError

__all__ = ["Reviewed", "locked_out", "prepare", "review", "write_results", "write_summary"]


class Reviewed(list):
    """The analysis results of one command, with the session that holds them (``.session``)."""

    session = None
    keys: list[str] = []
    kept: dict[str, int] = {}


def _check_outputs(args: argparse.Namespace) -> None:
    paths = [p for p in (getattr(args, "csv", None), getattr(args, "summary_csv", None), getattr(args, "out", None)) if p]
    if len({os.path.abspath(p) for p in paths}) != len(paths):
        raise InputError(paths[-1], "is given for two outputs", "give each output its own file")
    inputs = {os.path.abspath(f) for f in args.files}
    for p in paths:
        if os.path.abspath(p) in inputs:
            raise InputError(p, "is one of the recordings", "give another name for the output")
        if not os.path.isdir(os.path.dirname(os.path.abspath(p))):
            raise InputError(p, "the output folder does not exist", "create it or write elsewhere")


def _wanted(args: argparse.Namespace) -> bool:
    return bool(getattr(args, "out", None) or getattr(args, "summary_csv", None) or getattr(args, "conditions", None))


def prepare(args: argparse.Namespace):
    """Check the outputs and open an existing ``--out`` file, before any analysis runs.

    Returns the saved session (or None), so that a wrong output path or a damaged, foreign or
    newer results file stops the command at once, with nothing written.
    """
    if not _wanted(args):
        return None
    _check_outputs(args)
    out = getattr(args, "out", None)
    if out and os.path.exists(out):
        from analysis.session import Session

        args.out_seen = _signature(out)
        return Session.open(out)  # a damaged or foreign file stops here: it is never replaced
    return None


def _signature(path: str) -> tuple[int, int, int] | None:
    try:
        st = os.stat(path)
    except OSError:
        return None
    return (st.st_ino, st.st_size, st.st_mtime_ns)


@contextlib.contextmanager
def locked_out(args: argparse.Namespace, saved=None) -> Iterator:
    """Hold the ``--out`` file's write lock while the session is completed and written.

    Yields the saved session to add to: the one :func:`prepare` read, or the file read again
    when another writer replaced it in the meantime (so that what it added is kept). Without
    ``--out`` nothing is locked.
    """
    out = getattr(args, "out", None)
    if not out:
        yield saved
        return
    from analysis.results import results_lock

    from .options import lock_notice

    with results_lock(out, wait_s=getattr(args, "lock_wait", None), notify=lock_notice(args.command)):
        if not os.path.exists(out):
            yield None if getattr(args, "out_seen", None) else saved
            return
        if saved is None or _signature(out) != getattr(args, "out_seen", None):
            from analysis.session import Session

            saved = Session.open(out)
        yield saved


def review(args: argparse.Namespace, results: Sequence, settings, saved=None) -> Sequence:
    """Put the results into a session when ``--out``, ``--summary-csv`` or ``--condition`` asks.

    Parameters
    ----------
    args, results, settings
        The command's arguments, its analysis results (in file order) and settings.
    saved : Session or None
        The session :func:`prepare` read from an existing ``--out`` file.

    Returns
    -------
    sequence
        The results unchanged when no option asks for a session; otherwise a :class:`Reviewed`
        list whose results' ``beats`` are the session's reviewed tables.
    """
    if not _wanted(args):
        return results
    from analysis.session import Session

    conditions = list(getattr(args, "conditions", []) or [])
    if saved is not None:
        session = saved
        session.default_settings = settings
    else:
        session = Session(settings)
    reviewed = Reviewed(results)
    reviewed.session = session
    reviewed.kept = {}
    reviewed.keys = []
    for r, path in zip(results, args.files):
        key = session.add(
            r.recording, settings=r.settings, channel=args.channel, sweeps=args.sweeps, label=path,
            conditions=conditions, result=r,
        )
        reviewed.keys.append(key)
        n_kept = len(session.decisions(key))
        if n_kept:
            reviewed.kept[path] = n_kept
        r.beats = session.beats(key)
    return reviewed


def write_summary(results: Sequence, path: str) -> None:
    """Write the summary CSV of the session :func:`review` built to ``path`` (a temporary file the command moves into place)."""
    from analysis.stats import summary_csv

    with open(path, "w", encoding="utf-8", newline="") as fh:
        fh.write(summary_csv(results.session.summary_table(results.keys)))


def write_results(results: Sequence, path: str) -> None:
    """Save the session :func:`review` built to ``path`` (a temporary file the command moves into place)."""
    from analysis.session import save_session

    save_session(results.session, path, atomic=False)
    for label, n in results.kept.items():
        print(f"{label}: kept its {n} saved review decision(s)")
