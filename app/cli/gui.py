"""``upstroke gui [FILE-or-RESULTS.h5] [--screenshot PNG]``: the desktop app.

Qt is imported only when the command runs, so the command line starts without it.
"""

from __future__ import annotations

import argparse
from typing import Any

__all__ = ["add_parser", "run"]


def _size(text: str) -> tuple[int, int]:
    try:
        w, h = (int(x) for x in text.lower().split("x"))
    except ValueError:
        raise argparse.ArgumentTypeError(f"{text!r} is not WIDTHxHEIGHT (e.g. 1600x1000)") from None
    if not (400 <= w <= 8000 and 300 <= h <= 8000):
        raise argparse.ArgumentTypeError(f"{text!r}: give between 400x300 and 8000x8000 pixels")
    return w, h


def add_screenshot_options(parser: argparse.ArgumentParser) -> None:
    parser.add_argument("--screenshot", metavar="PNG",
                        help="render the window, loaded and analysed, to this PNG file and exit")
    parser.add_argument("--size", metavar="WxH", type=_size, default=(1600, 1000),
                        help="window size for --screenshot (default 1600x1000)")


def add_parser(subparsers: Any) -> argparse.ArgumentParser:
    parser = subparsers.add_parser(
        "gui", help="the desktop app: review beats, mark conditions, measure, plot",
        description="Open the desktop app, optionally on a recording (ABF, NWB, text) or a results "
        "file (.h5) saved earlier.",
    )
    parser.add_argument("file", metavar="FILE", nargs="?", help="a recording or a results file (.h5)")
    add_screenshot_options(parser)
    parser.set_defaults(run=run)
    return parser


def run(args: argparse.Namespace) -> int:
    from app.gui.window.launch import launch

    return launch(args.file, screenshot=args.screenshot, size=args.size)
