"""``upstroke analyze FILE...``: detect and measure every beat, write the beats CSV.

The command runs in three steps, each its own function so that more outputs slot in beside the
CSV: :func:`~app.cli.options.settings_from_args` (defaults, ``--settings``, ``--ljp``),
:func:`analyse_files` (one :class:`analysis.pipeline.AnalysisResult` per file, in order; any bad
file stops the command before anything is written), and :func:`write_outputs` (one writer per
output option, each written to a temporary file in the target's folder and moved into place, so a
failure never leaves a partial file nor replaces a good one). :func:`report` prints a short
summary per file and the warnings.
"""

from __future__ import annotations

import argparse
import contextlib
import math
import os
import sys
from typing import Any, Callable, Sequence

import numpy as np

from analysis.columns import column
from analysis.errors import InputError
from analysis.settings import Settings

from .options import (
    add_results_arguments, parse_channel, parse_sweeps, parse_units, parse_workers, settings_from_args,
)
from .result_line import beat_counts, cl_and_rate_text, counts_text
from .review_outputs import locked_out, prepare, review, write_results, write_summary

__all__ = [
    "add_parser", "run", "analyse_files", "write_outputs", "summary_line", "OUTPUT_WRITERS",
]


class OutputError(InputError):
    """An output file cannot be written where the user asked."""


def add_parser(subparsers: Any) -> argparse.ArgumentParser:
    """Register ``analyze`` with the command line."""
    p = subparsers.add_parser(
        "analyze",
        help="detect and measure every beat; write the beats CSV",
        description="Detect every beat of current-clamp recordings and measure it (MDP, TOP, DDR, "
        "dV/dt max, peak, APA, APD20/50/90, cycle length) with the default or given settings; "
        "print a short summary per file. A research tool, not a medical device.",
    )
    p.add_argument("files", nargs="+", metavar="FILE", help="recordings (ABF, NWB or delimited text)")
    p.add_argument("--channel", type=parse_channel, metavar="NAME-or-INDEX",
                   help="the membrane-potential channel (default: the current-clamp channel)")
    p.add_argument("--sweeps", type=parse_sweeps, metavar="LIST", help="sweeps to analyse, e.g. 0-3,5 (default: all)")
    p.add_argument("--settings", metavar="FILE.toml", help="analysis settings (default: the published defaults)")
    p.add_argument("--ljp", type=float, metavar="MV",
                   help="liquid-junction potential to subtract, in mV (V_true = V_measured - LJP)")
    p.add_argument("--units", type=parse_units, action="append", default=[], metavar="CHANNEL=UNITS",
                   help="declare a channel's units when the file mislabels them, e.g. 0=mV (repeatable)")
    p.add_argument("--csv", metavar="BEATS.csv", help="write the beats table (one row per beat)")
    p.add_argument("--workers", type=parse_workers, metavar="N",
                   help="processes sharing the chunks of a long recording (Linux; default: every core, at most 4; "
                   "the results are the same with any number)")
    add_results_arguments(p)
    p.set_defaults(run=run)
    return p


def analyse_files(args: argparse.Namespace, settings: Settings, *, progress: Callable | None = None,
                  stream: Any = None) -> list:
    """Open and analyse each file in order; the first bad file raises (nothing written yet).

    ``progress(done, total)`` follows each file's analysis; without it, a progress bar per file
    is drawn on ``stream`` (default stderr) when that is a terminal, and cleared once the file
    is done, so that the summary lines stand alone.
    """
    from analysis import open_recording
    from analysis.chunkpool import default_workers
    from analysis.conditions import check_conditions
    from analysis.pipeline import analyze

    units = dict(args.units) if getattr(args, "units", None) else None
    workers = getattr(args, "workers", None) or default_workers()
    results = []
    conditions = list(getattr(args, "conditions", None) or [])
    for path in args.files:
        rec = open_recording(path, units=units)
        if conditions:  # a condition outside this recording stops the command before any analysis
            check_conditions(conditions, rec.sweep_starts_s,
                             [n / rec.sampling_rate_hz for n in rec.sweep_lengths], where=path)
        with _progress_bar(path, stream if stream is not None else sys.stderr, progress) as tick:
            results.append(analyze(rec, settings, channel=args.channel, sweeps=args.sweeps, progress=tick,
                                   label=path, workers=workers))
    return results


@contextlib.contextmanager
def _progress_bar(path: str, stream: Any, progress: Callable | None):
    """``progress`` itself when given; else a tqdm bar on ``stream`` (drawn on a terminal only)."""
    if progress is not None:
        yield progress
        return
    if not getattr(stream, "isatty", lambda: False)():
        # No terminal, no bar (as tqdm itself decides): tqdm is not even imported.
        yield lambda done, total: None
        return
    from tqdm import tqdm

    with tqdm(total=1, desc=os.path.basename(path), file=stream, disable=None, leave=False, dynamic_ncols=True,
              bar_format="{desc}: {percentage:3.0f}%|{bar}| {elapsed}<{remaining}") as bar:
        def tick(done: int, total: int) -> None:
            if bar.total != total:
                bar.total = total
            bar.update(done - bar.n)

        yield tick


def _write_csv(results: Sequence, path: str) -> None:
    # ``path`` is the temporary file write_outputs moves into place.
    from analysis.table import BeatTable

    table = BeatTable.concat([r.beats for r in results])
    with open(path, "w", encoding="utf-8", newline="") as fh:
        table.to_csv(fh)


#: ``(argument name, writer(results, path))`` for each output option, in the order written.
def _write_summary(results: Sequence, path: str) -> None:
    write_summary(results, path)


def _write_results(results: Sequence, path: str) -> None:
    write_results(results, path)


OUTPUT_WRITERS: list[tuple[str, Callable[[Sequence, str], None]]] = [
    ("csv", _write_csv), ("summary_csv", _write_summary), ("out", _write_results),
]


def write_outputs(args: argparse.Namespace, results: Sequence) -> list[str]:
    """Write every output the arguments ask for, all or none; returns the paths written.

    Each writer writes to a temporary file beside its target; the targets are replaced only
    once every output is complete, so a failure in any (a full disk) leaves all as they were.
    """
    from analysis.results import atomic_outputs

    targets = []
    inputs = {os.path.abspath(f) for f in getattr(args, "files", ())}
    for name, writer in OUTPUT_WRITERS:
        path = getattr(args, name, None)
        if not path:
            continue
        if os.path.abspath(path) in inputs:
            raise OutputError(path, "is one of the recordings", "give another name for the output")
        folder = os.path.dirname(os.path.abspath(path))
        if not os.path.isdir(folder):
            raise OutputError(path, "the output folder does not exist", "create it or write elsewhere")
        if os.path.isdir(path):
            raise OutputError(path, "is a folder", "give a file name")
        targets.append((path, writer))
    current = targets[0][0] if targets else None
    try:
        with atomic_outputs([p for p, _ in targets]) as temps:
            for (path, writer), tmp in zip(targets, temps):
                current = path
                writer(results, tmp)
    except PermissionError:
        raise OutputError(current, "cannot be written (permission denied)", "choose a folder you can write to") from None
    return [p for p, _ in targets]


def _mean(values: np.ndarray) -> float:
    v = np.asarray(values, dtype=np.float64)
    v = v[np.isfinite(v)]
    return float(v.mean()) if v.size else math.nan


def summary_line(result) -> str:
    """``FILE: N beats (U used, R rejected, W waiting for review) in S sweeps; mean CL ... ms (... bpm), ...``.

    Means are over the beats the summaries use (accepted, not ``no_diastole`` or ``truncated``:
    :func:`analysis.stats.eligible_mask`); the rate is 60000 / the mean CL printed beside it.
    """
    from analysis.stats import eligible_mask

    b = result.beats
    n = len(b)
    label = b["file"][0] if n else (result.recording.source_path or "recording")
    if n == 0:
        return f"{label}: no beats found (channel {result.channel} {result.channel_name})"
    clean = eligible_mask(b)
    n_sweeps = len(np.unique(b["sweep"]))

    def said(name: str, digits: int = 1) -> str:
        m = _mean(b[name][clean])
        return f"{column(name).label} " + (f"{m:.{digits}f} {column(name).unit}" if math.isfinite(m) else "n/a")

    return (
        f"{label}: {counts_text(beat_counts(b))} in {n_sweeps} sweep{'s' * (n_sweeps != 1)}; "
        f"mean {cl_and_rate_text(_mean(b['cl_ms'][clean]), column('cl_ms').label)}, {said('mdp_mV')}, "
        f"{said('dvdt_max_V_per_s')}"
    )


def report(results: Sequence, written: Sequence[str], *, out=None, err=None) -> None:
    """Print the summaries (stdout) and the warnings (stderr)."""
    out = out or sys.stdout
    err = err or sys.stderr
    for r in results:
        print(summary_line(r), file=out)
        label = r.beats["file"][0] if len(r.beats) else (r.recording.source_path or "recording")
        for w in r.warnings:
            print(f"upstroke analyze: warning: {label}: {w}", file=err)
    for path in written:
        print(f"wrote {path}", file=out)


def run(args: argparse.Namespace) -> int:
    """Analyse the files and write the outputs; 0 on success (bad input raises InputError)."""
    settings = settings_from_args(args)
    saved = prepare(args)  # checks the outputs and reads an existing --out file before analysing
    results = analyse_files(args, settings)
    with locked_out(args, saved) as saved:  # one writer of the --out file at a time
        results = review(args, results, settings, saved)  # --out, --summary-csv, --condition
        written = write_outputs(args, results)
    report(results, written)
    return 0
