"""``upstroke export RESULTS.h5 [--csv BEATS.csv] [--summary-csv SUMMARY.csv] [--figures DIR] [study options]``.

Writes tables (and figures) from a saved results file with the review decisions applied, without
the source recordings: the beats CSV as ``upstroke analyze --csv`` writes it (for a results file
that analyze wrote and nobody reviewed since, byte for byte the same), the summary CSV (one row
per file x sweep group x condition, as saved), and with ``--figures`` one SVG per recording of
its per-beat time courses (rate, APD90, DDR, MDP; accepted beats filled, rejected ones open,
conditions shaded). For a study (a results file that ``upstroke batch --layout/--sheet`` wrote):
``--study-csv`` (one row per cell x condition), ``--compare`` (each condition against the
baseline, per cell and per group with paired tests) and ``--compare-figures DIR`` (one SVG and
one PNG per group). Without an output option it lists what the file holds.

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
from .study_outputs import add_table_options, check_request, comparison_figures, study_tables, with_study_columns

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
    add_table_options(p, figures=True)
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


def _describe(session, results: str, layout=None) -> list[str]:
    lines = [f"{results}: {len(session.recordings)} recording(s)"]
    if layout is not None:
        lines.append(f"  study: {layout.describe()}")
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
    from analysis.results import atomic_outputs, load_results
    from analysis.session import Session

    from analysis.results import read_study

    session = Session.open(args.results)
    for w in session.open_warnings:
        print(f"upstroke export: warning: {w}", file=sys.stderr)
    layout = read_study(args.results)
    check_request(layout, args, args.results)
    outputs: list[tuple[str, str | bytes]] = []
    files = [p for p in (args.csv, args.summary_csv, args.study_csv, args.compare) if p]
    for path in files:
        _check_target(path, args.results)
    if len(set(map(os.path.abspath, files))) != len(files):
        raise ExportError(files[0], "two table options name the same file", "give every output its own file")
    folders = [d for d in (args.figures, args.compare_figures) if d]
    for folder in folders:
        if os.path.exists(folder) and not os.path.isdir(folder):
            raise ExportError(folder, "exists and is not a folder", "give a folder for the figures")
        if not os.path.isdir(os.path.dirname(os.path.abspath(folder))):
            raise ExportError(folder, "its parent folder does not exist", "create it or write elsewhere")
    # Build everything before writing anything.
    if args.csv:
        text = beats_csv(session)
        outputs.append((args.csv, with_study_columns(text, layout) if layout is not None else text))
    if args.summary_csv:
        outputs.append((args.summary_csv, summary_text(session)))
    if args.figures:
        outputs.extend((os.path.join(args.figures, name), svg) for name, svg in _figures(session))
    if layout is not None and (args.study_csv or args.compare or args.compare_figures):
        stored = load_results(args.results, verify_sources=False)
        outputs += study_tables(layout, stored, args)
        if args.compare_figures:
            outputs += comparison_figures(layout, stored, args.compare_figures)
    if not outputs:
        print("\n".join(_describe(session, args.results, layout)))
        return 0
    made = [d for d in dict.fromkeys(folders) if not os.path.isdir(d)]
    try:
        for folder in made:
            os.makedirs(folder)
        # All or none: the targets are replaced only once every output is written.
        with atomic_outputs([path for path, _ in outputs]) as temps:
            for (path, content), tmp in zip(outputs, temps):
                if isinstance(content, bytes):
                    with open(tmp, "wb") as fh:
                        fh.write(content)
                else:
                    with open(tmp, "w", encoding="utf-8", newline="") as fh:
                        fh.write(content)
    except BaseException:
        for folder in made:
            shutil.rmtree(folder, ignore_errors=True)
        raise
    for path, _ in outputs:
        print(f"wrote {path}")
    return 0
