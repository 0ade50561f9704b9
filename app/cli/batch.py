"""``upstroke batch``: analyse many recordings in parallel into one results file.

Recordings are found recursively in the folders and glob patterns given, analysed one task per
file on local cores (a process pool) or on a running Dask distributed cluster (``--scheduler``),
and written by this process alone, in input order, to the results file and the CSV tables. A file
that fails is listed at the end with its reason and the exit status is 2; the good results are
saved all the same. Ctrl-C stops the workers and writes nothing.
"""

from __future__ import annotations

import argparse
import os
import signal
import sys
from contextlib import contextmanager
from typing import Iterator

from .options import (
    add_lock_wait_argument, lock_notice, parse_channel, parse_condition_arg, parse_sweeps, parse_units, parse_workers,
    settings_from_args,
)
from .result_line import counts_text
from .study_outputs import (
    add_layout_options, add_table_options, check_request, layout_from_args, report_layout, study_tables, tasks_conditions,
    with_study_columns,
)

__all__ = ["add_parser", "run"]

EPILOG = """\
examples:
  upstroke batch recordings/ --out study.h5 --csv beats.csv
  upstroke batch 'day*/cell*.abf' --out study.h5 --workers 4
  upstroke batch /shared/screen --out screen.h5 --scheduler tcp://10.0.0.5:8786
  upstroke batch study/ --out study.h5 --layout '{cell}/{condition}.abf' \
      --condition-order baseline,UP-113,washout --study-csv cells.csv --compare compare.csv
  upstroke batch study/ --out study.h5 --sheet study/sheet.csv --group-from drug

Folders are searched recursively for files with a recording extension; quote glob patterns
(use ** to reach into subfolders). With --scheduler every worker must see the files at the same
absolute paths (a shared file system) and have Upstroke installed.
"""


def add_parser(subparsers: argparse._SubParsersAction) -> argparse.ArgumentParser:
    parser = subparsers.add_parser(
        "batch",
        help="analyse many recordings in parallel (local cores or a Dask cluster)",
        description="Analyse every recording found in folders or glob patterns, in parallel, "
        "into one results file, with the same results as `upstroke analyze` on the same files.",
        epilog=EPILOG,
        formatter_class=argparse.RawDescriptionHelpFormatter,
    )
    parser.add_argument("sources", nargs="+", metavar="FOLDER-or-GLOB", help="folders, glob patterns or files")
    parser.add_argument("--out", required=True, metavar="RESULTS.h5", help="the results file to write (HDF5)")
    parser.add_argument("--csv", metavar="BEATS.csv", help="also write every beat of every file as CSV")
    parser.add_argument("--summary-csv", metavar="SUMMARY.csv", help="also write the per-file summaries as CSV")
    parser.add_argument("--condition", dest="conditions", type=parse_condition_arg, action="append", default=[],
                        metavar="NAME=START-END[,steady=RULE]",
                        help="name a stretch of every file, as for `upstroke analyze` (repeatable)")
    parser.add_argument("--settings", metavar="FILE.toml", help="analysis settings (default: the published defaults)")
    parser.add_argument("--channel", type=parse_channel, metavar="NAME-or-INDEX",
                        help="the membrane-potential channel in every file (default: each file's current-clamp channel)")
    parser.add_argument("--sweeps", type=parse_sweeps, metavar="LIST", help="sweeps to analyse in every file, e.g. 0-3,5")
    parser.add_argument("--ljp", type=float, metavar="MV",
                        help="liquid-junction potential to subtract, in mV (V_true = V_measured - LJP)")
    parser.add_argument("--units", type=parse_units, action="append", default=[], metavar="CHANNEL=UNITS",
                        help="declare a channel's units when the files mislabel them, e.g. 0=mV (repeatable)")
    where = parser.add_mutually_exclusive_group()  # local processes or a cluster's workers, not both
    where.add_argument("--workers", type=parse_workers, metavar="N",
                        help=f"local worker processes (default: every core, here {os.cpu_count()})")
    where.add_argument("--scheduler", metavar="ADDRESS",
                        help="send the work to a running Dask scheduler, e.g. tcp://10.0.0.5:8786 "
                        '(needs pip install "upstroke[cluster]")')
    add_lock_wait_argument(parser)
    add_layout_options(parser)
    add_table_options(parser, figures=False)
    parser.add_argument("--quiet", action="store_true", help="no progress bar")
    parser.set_defaults(run=run)
    return parser


@contextmanager
def _sigterm_as_interrupt() -> Iterator[None]:
    # A cluster job killed by its queue gets SIGTERM: treat it as Ctrl-C so the workers stop and
    # no partial output stays behind.
    def handler(signum, frame):  # noqa: ARG001 - signal handler signature
        raise KeyboardInterrupt

    try:
        previous = signal.signal(signal.SIGTERM, handler)
    except ValueError:  # not the main thread
        yield
        return
    try:
        yield
    finally:
        signal.signal(signal.SIGTERM, previous)


def run(args: argparse.Namespace) -> int:
    """Find, analyse and save; 0 when every file was analysed, 2 when some failed, 1 on a fault."""
    from tqdm import tqdm

    from analysis.batch import find_recordings, make_tasks, prepare_existing, run_batch, save_batch
    from analysis.results import results_lock

    settings = settings_from_args(args)
    outputs = [p for p in (args.out, args.csv, args.summary_csv, args.study_csv, args.compare) if p]
    _check_outputs(outputs)
    if not (args.layout or args.sheet):
        check_request(None, args, None)  # study outputs without a study: before any search
    paths = find_recordings(args.sources, exclude=outputs)
    layout = layout_from_args(args, paths)
    conditions = tuple(c.text() for c in args.conditions)
    study_conditions: dict = {}
    if layout is not None:
        paths, study_conditions = tasks_conditions(layout, paths)
        if conditions:  # stretches the user named within every file win over the whole file
            study_conditions = {}
    check_request(layout, args, None)
    kept = prepare_existing(args.out, paths, conditions)  # a damaged results file stops here
    kept.update(study_conditions)
    tasks = make_tasks(
        paths, settings=settings, channel=args.channel, sweeps=args.sweeps, units=args.units or None,
        conditions=conditions, file_conditions=kept,
    )
    with _sigterm_as_interrupt():
        with tqdm(total=len(tasks), unit="file", desc="upstroke batch", file=sys.stderr,
                  disable=args.quiet, dynamic_ncols=True) as bar:
            found = [0]  # beats so far, counted as each file arrives

            def on_done(outcome, done, total):
                found[0] += len(next(iter(outcome.columns.values()), ()))
                bar.set_postfix_str(f"{os.path.basename(outcome.path)}, {found[0]} beats", refresh=False)
                bar.update(1)

            result = run_batch(tasks, workers=args.workers, scheduler=args.scheduler, on_done=on_done)
        saved = None
        if result.succeeded:
            # One writer of the results file at a time: save_batch reads it again under the lock.
            with results_lock(args.out, wait_s=args.lock_wait, notify=lock_notice("batch")):
                saved = save_batch(result, out=args.out, csv=args.csv, summary_csv=args.summary_csv, settings=settings)
                if layout is not None:
                    _save_study(layout, args)
    if layout is not None:
        report_layout(layout)
    return _report(result, saved)


def _save_study(layout, args: argparse.Namespace) -> None:
    """The layout into the results file, then the study's tables from what it holds."""
    from analysis.results import atomic_outputs, load_results, write_study

    write_study(args.out, layout)
    tables = study_tables(layout, load_results(args.out, verify_sources=False), args)
    if args.csv:  # the beats CSV gains the study's columns
        with open(args.csv, encoding="utf-8", newline="") as fh:
            tables.insert(0, (args.csv, with_study_columns(fh.read(), layout)))
    if tables:
        with atomic_outputs([path for path, _ in tables]) as temps:
            for (_, text), tmp in zip(tables, temps):
                with open(tmp, "w", encoding="utf-8", newline="") as fh:
                    fh.write(text)
        for path, _ in tables:
            print(f"wrote {path}")


def _check_outputs(outputs: list[str]) -> None:
    from analysis.errors import InputError

    for path in outputs:
        folder = os.path.dirname(os.path.abspath(path))
        if not os.path.isdir(folder):
            raise InputError(path, "its folder does not exist", "create the folder or choose another output path")
        if os.path.isdir(path):
            raise InputError(path, "is a folder", "give a file name for the output")
    if len(set(map(os.path.abspath, outputs))) != len(outputs):
        raise InputError(None, "two outputs name the same file", "give --out, --csv and --summary-csv different names")


#: At most this many analysis warnings are printed; all of them are in the results file.
MAX_WARNINGS_SHOWN = 20


def _report(result, saved) -> int:
    n_ok, n_all = len(result.succeeded), len(result.outcomes)
    warnings = [f"{o.path}: {w}" for o in result.succeeded for w in o.warnings]
    for line in warnings[:MAX_WARNINGS_SHOWN]:
        print(f"upstroke batch: warning: {line}", file=sys.stderr)
    if len(warnings) > MAX_WARNINGS_SHOWN:
        print(f"upstroke batch: {len(warnings) - MAX_WARNINGS_SHOWN} more warning(s) are stored with the results",
              file=sys.stderr)
    if saved is not None:
        counts = {"beats": saved.n_beats, "used": saved.n_accepted, "rejected": saved.n_rejected,
                  "to_review": saved.n_to_review}
        print(f"{n_ok} of {n_all} recording(s) analysed on {result.where}: {counts_text(counts)} "
              f"saved to {saved.out}"
              + "".join(f", {p}" for p in saved.extra), file=sys.stdout)
    failed = result.failed
    if failed:
        print(f"upstroke batch: {len(failed)} of {n_all} file(s) failed:", file=sys.stderr)
        for outcome in failed:
            reason = outcome.reason
            print(f"  {reason if reason.startswith(outcome.path + ':') else f'{outcome.path}: {reason}'}", file=sys.stderr)
        for outcome in result.faults:
            print(f"--- {outcome.path}\n{outcome.fault.rstrip()}", file=sys.stderr)
        if saved is None:
            print("upstroke batch: no file could be analysed; nothing was written", file=sys.stderr)
    if result.faults:
        print("upstroke batch: internal error in the file(s) above; please report it with the lines above",
              file=sys.stderr)
        return 1
    return 2 if failed else 0
