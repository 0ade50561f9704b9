"""``upstroke demo [--screenshot PNG]``: the desktop app on the bundled sample recording.

Opens the gap-free demo recording from ``sample_data/`` (or, where the files are not installed,
the same invented scenario synthesised in memory; see :mod:`app.demo_data`), analysed, with its
conditions marked.
"""

from __future__ import annotations

import argparse
from typing import Any

from .gui import add_screenshot_options

__all__ = ["add_parser", "run"]


def add_parser(subparsers: Any) -> argparse.ArgumentParser:
    parser = subparsers.add_parser(
        "demo", help="the desktop app on the bundled sample recording",
        description="Open the desktop app on the bundled demo recording (an invented nodal-like cell "
        "through baseline, a fictional rate-slowing compound and washout), analysed, conditions marked.",
    )
    add_screenshot_options(parser)
    parser.set_defaults(run=run)
    return parser


def run(args: argparse.Namespace) -> int:
    from app.demo_data import demo_recording
    from app.gui.window.launch import launch

    source, conditions, label = demo_recording()
    return launch(source, conditions=conditions, label=label, screenshot=args.screenshot, size=args.size)
