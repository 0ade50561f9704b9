"""The ``upstroke`` command line.

Each subcommand lives in its own module of this package (:mod:`app.cli.analyze`, ...) with two
functions: ``add_parser(subparsers)`` and ``run(args) -> int``; the option parsing they share is
:mod:`app.cli.options`. Nothing here imports Qt; the desktop commands import it only when they run.

Exit status: 0 success; 2 the input or the command line is wrong (one line on stderr naming the
file, what is wrong and what to do); 1 an internal fault (traceback, and a request to report it).
"""

from __future__ import annotations

import argparse
import importlib
import sys
import traceback
from typing import Sequence

from analysis.errors import InputError

__all__ = ["COMMANDS", "EXIT_FAULT", "EXIT_INPUT", "EXIT_OK", "build_parser", "main"]

#: Subcommand modules of app.cli, in the order ``upstroke --help`` lists them.
COMMANDS: tuple[str, ...] = ("info", "analyze", "batch", "export", "gui", "demo")

EXIT_OK = 0
EXIT_FAULT = 1
EXIT_INPUT = 2


class _Parser(argparse.ArgumentParser):
    """argparse with one-line errors and exit status 2, as for any other wrong input."""

    def error(self, message: str) -> None:  # type: ignore[override]
        self.exit(EXIT_INPUT, f"{self.prog}: {message}; see `{self.prog} --help`\n")


def build_parser() -> argparse.ArgumentParser:
    """The full argument parser (used by main and by the CLI reference check)."""
    from app import __version__

    parser = _Parser(
        prog="upstroke",
        description="Beat-by-beat analysis of spontaneously beating cardiac cells in current clamp. "
        "A research tool, not a medical device.",
    )
    parser.add_argument("--version", action="version", version=f"upstroke {__version__}")
    sub = parser.add_subparsers(dest="command", metavar="COMMAND", parser_class=_Parser)
    sub.required = True
    for name in COMMANDS:
        module = importlib.import_module(f"app.cli.{name}")
        module.add_parser(sub)
    return parser


def main(argv: Sequence[str] | None = None) -> int:
    """Run one command; returns the exit status."""
    parser = build_parser()
    args = parser.parse_args(argv)
    try:
        return int(args.run(args) or 0)
    except InputError as exc:
        print(f"upstroke {args.command}: {exc.one_line()}", file=sys.stderr)
        return EXIT_INPUT
    except KeyboardInterrupt:
        print(f"upstroke {args.command}: interrupted; no output was written", file=sys.stderr)
        return 130
    except BrokenPipeError:
        return EXIT_OK
    except Exception:  # an internal fault: show everything and ask for a report
        traceback.print_exc()
        print(
            f"upstroke {args.command}: internal error; please report it with the lines above",
            file=sys.stderr,
        )
        return EXIT_FAULT
