"""``upstroke export RESULTS.h5 [--csv BEATS.csv] [--summary-csv SUMMARY.csv] [--figures DIR]``.

Writes tables (and figures) from a saved results file with the review decisions applied, without
the source recordings: the beats CSV as ``upstroke analyze --csv`` writes it (for a results file
that analyze wrote and nobody reviewed since, byte for byte the same), the summary CSV (one row
per file x sweep group x condition, as saved), and with ``--figures`` one SVG per recording of
its per-beat time courses (rate, APD90, DDR, MDP; accepted beats filled, rejected ones open,
conditions shaded). Without an output option it lists what the file holds.

Every output is built in memory first, then written to a temporary file beside its target; the
targets are replaced only once all are written, so a failure leaves no partial file, replaces no
good one, and writes none of the others (a figures folder it created is removed again).
"""

from __future__ import annotations

import argparse
import os
import re
import shutil
import sys
from typing import Any

import numpy as np

from analysis.errors import InputError

from .result_line import beat_counts, counts_text

__all__ = ["add_parser", "run", "figure_name", "beats_csv", "summary_text"]


class ExportError(InputError):
    """An export output cannot be written where the user asked."""


def add_parser(subparsers: Any) -> argparse.ArgumentParser:
    """Register ``export`` with the command line."""
    p = subparsers.add_parser(
        "export",
        help="tables and figures from a saved results file, review decisions applied",
        description="Write the beats CSV, the summary CSV and per-recording SVG figures from a "
        "results file (.h5) written by upstroke analyze --out, upstroke batch or the desktop app. "
        "Review decisions and conditions are applied; the source recordings are not needed. "
        "Without an output option, list what the file holds.",
    )
    p.add_argument("results", metavar="RESULTS.h5", help="the results file")
    p.add_argument("--csv", metavar="BEATS.csv", help="write the beats table (one row per beat)")
    p.add_argument("--summary-csv", dest="summary_csv", metavar="SUMMARY.csv",
                   help="write the summaries (one row per file x sweep group x condition)")
    p.add_argument("--figures", metavar="DIR",
                   help="write one SVG per recording of its per-beat time courses into DIR (created if missing)")
    p.set_defaults(run=run)
    return p


def beats_csv(session) -> str:
    """The beats CSV of every recording of a session, in order (decisions applied)."""
    return session.all_beats().to_csv()


def summary_text(session) -> str:
    """The summary CSV of every recording of a session."""
    from analysis.stats import summary_csv

    return summary_csv(session.summary_table())


def figure_name(index: int, label: str) -> str:
    """A safe file name for a recording's figure: ``01-cell07-time-course.svg``."""
    stem = os.path.splitext(os.path.basename(label.replace("\\", "/")))[0] or "recording"
    stem = re.sub(r"[^A-Za-z0-9._-]+", "_", stem).strip("._") or "recording"
    return f"{index + 1:02d}-{stem}-time-course.svg"


def _figures(session) -> list[tuple[str, str]]:
    from app.svg import time_course_svg

    out = []
    for i, key in enumerate(session.recordings):
        info = session.info(key)
        spans = [(c.name, *c.span_s(info.sweep_starts_s, info.sweep_durations_s)) for c in session.conditions(key)]
        svg = time_course_svg(
            session.beats(key), title=info.label, sweep_starts_s=info.sweep_starts_s, condition_spans=spans,
        )
        out.append((figure_name(i, info.label), svg))
    return out


def _check_target(path: str, results: str) -> None:
    if os.path.abspath(path) == os.path.abspath(results):
        raise ExportError(path, "is the results file itself", "give another file name for the output")
    if os.path.isdir(path):
        raise ExportError(path, "is a folder", "give a file name")
    if not os.path.isdir(os.path.dirname(os.path.abspath(path))):
        raise ExportError(path, "the output folder does not exist", "create it or write elsewhere")


def _describe(session, results: str) -> list[str]:
    lines = [f"{results}: {len(session.recordings)} recording(s)"]
    for key in session.recordings:
        b = session.beats(key)
        reviewed = int(np.asarray(b["reviewed"]).sum()) if len(b) else 0
        conds = ", ".join(c.name for c in session.conditions(key)) or "none"
        lines.append(
            f"  {session.label(key)}: {counts_text(beat_counts(b))}, {reviewed} decided in review, "
            f"conditions: {conds}, settings {session.settings(key).short_hash()}"
        )
    return lines


def run(args: argparse.Namespace) -> int:
    """Export what the options ask for; 0 on success (bad input raises InputError, exit 2)."""
    from analysis.results import atomic_outputs
    from analysis.session import Session

    session = Session.open(args.results)
    for w in session.open_warnings:
        print(f"upstroke export: warning: {w}", file=sys.stderr)
    outputs: list[tuple[str, str]] = []
    for path in (args.csv, args.summary_csv):
        if path:
            _check_target(path, args.results)
    if args.csv and args.summary_csv and os.path.abspath(args.csv) == os.path.abspath(args.summary_csv):
        raise ExportError(args.csv, "is given for both --csv and --summary-csv", "give two different files")
    if args.figures and os.path.exists(args.figures) and not os.path.isdir(args.figures):
        raise ExportError(args.figures, "exists and is not a folder", "give a folder for --figures")
    if args.figures and not os.path.isdir(os.path.dirname(os.path.abspath(args.figures))):
        raise ExportError(args.figures, "its parent folder does not exist", "create it or write elsewhere")
    # Build everything before writing anything.
    if args.csv:
        outputs.append((args.csv, beats_csv(session)))
    if args.summary_csv:
        outputs.append((args.summary_csv, summary_text(session)))
    if args.figures:
        outputs.extend((os.path.join(args.figures, name), svg) for name, svg in _figures(session))
    if not outputs:
        print("\n".join(_describe(session, args.results)))
        return 0
    made = bool(args.figures) and not os.path.isdir(args.figures)
    try:
        if made:
            os.makedirs(args.figures)
        # All or none: the targets are replaced only once every output is written.
        with atomic_outputs([path for path, _ in outputs]) as temps:
            for (path, text), tmp in zip(outputs, temps):
                with open(tmp, "w", encoding="utf-8", newline="") as fh:
                    fh.write(text)
    except BaseException:
        if made:
            shutil.rmtree(args.figures, ignore_errors=True)
        raise
    for path, _ in outputs:
        print(f"wrote {path}")
    return 0
