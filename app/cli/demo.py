"""``upstroke demo [--study] [--screenshot PNG]``: the desktop app on the bundled sample data.

Opens the gap-free demo recording from ``sample_data/`` (or, where the files are not installed,
the same invented scenario synthesised in memory; see :mod:`app.demo_data`), analysed, with its
conditions marked. With ``--study``, the bundled invented study instead (five fictional cells
under baseline, UP-113 and washout; :mod:`app.demo_study`): analysed by ``upstroke batch`` with
its sheet into a results file in the app's own folder on first use, then opened as a study (its
grid, its comparison across cells). The review is saved into that results file, so the next
``upstroke demo --study`` comes back to it.
"""

from __future__ import annotations

import argparse
import os
import subprocess
import sys
import tempfile
from pathlib import Path
from typing import Any

from .gui import add_screenshot_options

__all__ = ["add_parser", "demo_study_results", "run"]

#: The demo study's results file, in the app's own folder (:func:`app.gui.window.recent.config_dir`).
STUDY_RESULTS = Path("demo-study") / "UP-113_study.h5"


def add_parser(subparsers: Any) -> argparse.ArgumentParser:
    parser = subparsers.add_parser(
        "demo", help="the desktop app on the bundled sample recording (or, with --study, the sample study)",
        description="Open the desktop app on the bundled demo recording (an invented nodal-like cell "
        "through baseline, a fictional rate-slowing compound and washout), analysed, conditions marked. "
        "With --study, open the bundled invented study (five cells x baseline, UP-113, washout) as a grid of "
        "its recordings with the comparison across cells.",
    )
    parser.add_argument("--study", action="store_true",
                        help="open the invented demo study: analysed on first use into a results file in the "
                        "app's folder, then reopened with your review")
    add_screenshot_options(parser)
    parser.set_defaults(run=run)
    return parser


def demo_study_results(folder: str | os.PathLike | None = None, *, quiet: bool = True) -> Path:
    """The demo study's results file, analysed with ``upstroke batch`` and its sheet when missing.

    Parameters
    ----------
    folder : path or None
        Where the results file goes; None is the app's own folder (its demo-study subfolder).
    quiet : bool
        No progress bar.

    Returns
    -------
    Path
        The results file, holding the study's layout.
    """
    from analysis.errors import InputError
    from analysis.results import read_study
    from app import demo_study

    if folder is None:
        from app.gui.window.recent import config_dir

        out = config_dir() / STUDY_RESULTS
    else:
        out = Path(folder) / STUDY_RESULTS.name
    if out.is_file():
        try:
            layout = read_study(out)
        except InputError:
            layout = None
        if layout is not None and os.path.isdir(layout.root):
            return out  # analysed before (and perhaps reviewed): reopened as it was left
    out.parent.mkdir(parents=True, exist_ok=True)
    found = demo_study.demo_study_paths()
    scratch = None
    if found is None:  # not installed: the same invented study, written beside the results
        scratch = out.parent / "recordings"
        demo_study.write_demo_study(scratch)
        found = (scratch, scratch / "sheet.csv")
    study_folder, sheet = found
    # The study's own command, as a user would type it (its progress bar on the terminal).
    args = [sys.executable, "-m", "app", "batch", str(study_folder), "--out", str(out), "--sheet", str(sheet),
            "--condition-order", ",".join(demo_study.CONDITIONS)]
    if quiet:
        args.append("--quiet")
    else:
        print(f"upstroke demo: analysing the demo study into {out} (first use only)", file=sys.stderr)
    env = dict(os.environ, PYTHONPATH=os.pathsep.join(filter(None, [str(Path(__file__).resolve().parents[2]),
                                                                    os.environ.get("PYTHONPATH")])))
    done = subprocess.run(args, env=env, capture_output=quiet, text=True, check=False)
    if done.returncode != 0 or not out.is_file():
        if quiet and done.stderr:
            print(done.stderr, file=sys.stderr, end="")
        raise InputError(str(out), "the demo study could not be analysed", "see the batch's messages above")
    return out


def run(args: argparse.Namespace) -> int:
    from app.gui.window.launch import launch

    if args.study:
        if args.screenshot is not None:
            # A screenshot is of the study as bundled, never of a review saved since.
            with tempfile.TemporaryDirectory() as tmp:
                return launch(demo_study_results(tmp), screenshot=args.screenshot, size=args.size)
        return launch(demo_study_results(quiet=False), screenshot=args.screenshot, size=args.size)
    from app.demo_data import demo_recording

    source, conditions, label = demo_recording()
    return launch(source, conditions=conditions, label=label, screenshot=args.screenshot, size=args.size)
