"""Option parsing shared by the commands: argparse types, the results-file options, settings.

``analyze`` and ``batch`` read channels, sweeps, units, workers, conditions and settings the same
way; each parses them here.
"""

from __future__ import annotations

import argparse

from analysis.settings import Settings

__all__ = [
    "add_lock_wait_argument", "add_results_arguments", "lock_notice", "parse_channel", "parse_condition_arg",
    "parse_lock_wait", "parse_sweeps", "parse_units", "parse_workers", "settings_from_args",
]


def parse_sweeps(text: str):
    """``"0-3,5"`` -> an :class:`analysis.sweeps.SweepSelection` (argparse type: bad text is a
    command-line error). The ranges stay ranges: each recording checks them against its own
    sweep count before any list of sweeps is made."""
    from analysis.sweeps import SweepSelection

    try:
        return SweepSelection.parse(text)
    except ValueError as exc:
        shown = text if len(text) <= 60 else text[:57] + "..."
        raise argparse.ArgumentTypeError(f"--sweeps {shown!r} is not a list such as 0-3,5 ({exc})") from None


def parse_units(text: str) -> tuple[int | str, str]:
    """``"0=mV"`` or ``"Vm=mV"`` -> ``(0, "mV")`` / ``("Vm", "mV")``."""
    channel, sep, units = text.partition("=")
    if not sep or not channel.strip() or not units.strip():
        raise argparse.ArgumentTypeError(f"--units {text!r} is not CHANNEL=UNITS, e.g. 0=mV")
    channel = channel.strip()
    return (int(channel) if channel.isdigit() else channel), units.strip()


def parse_workers(text: str) -> int:
    """``"4"`` -> ``4`` (argparse type: at least 1)."""
    try:
        value = int(text)
    except ValueError:
        raise argparse.ArgumentTypeError(f"{text!r} is not a whole number") from None
    if value < 1:
        raise argparse.ArgumentTypeError("give at least 1 worker")
    return value


def parse_channel(text: str) -> int | str:
    """``"0"`` -> ``0``, ``"Vm"`` -> ``"Vm"`` (a channel index or name)."""
    return int(text) if text.strip().isdigit() else text


def parse_condition_arg(text: str):
    """``baseline=0-60s`` -> a :class:`analysis.conditions.Condition` (argparse type)."""
    from analysis.conditions import ConditionError, parse_condition

    try:
        return parse_condition(text)
    except ConditionError as exc:
        raise argparse.ArgumentTypeError(exc.one_line()) from None


def parse_lock_wait(text: str) -> float:
    """``"60"`` -> ``60.0`` seconds (argparse type: a finite number, at least 0)."""
    try:
        value = float(text)
    except ValueError:
        raise argparse.ArgumentTypeError(f"--lock-wait {text!r} is not a number of seconds") from None
    if not (value >= 0 and value < float("inf")):
        raise argparse.ArgumentTypeError(f"--lock-wait {text!r} is not 0 or more seconds")
    return value


def add_lock_wait_argument(parser: argparse.ArgumentParser) -> None:
    """Add ``--lock-wait SECONDS``: how long to wait while another process writes the results file."""
    from analysis.results import DEFAULT_WAIT_S

    parser.add_argument("--lock-wait", dest="lock_wait", type=parse_lock_wait, default=DEFAULT_WAIT_S, metavar="SECONDS",
                        help="when another upstroke process is writing the same results file, wait this long "
                        f"for it to finish, then give up (default: {DEFAULT_WAIT_S:g})")


def lock_notice(command: str):
    """What a command says, once, when it starts waiting for another writer of its results file."""
    import sys

    def notify(text: str) -> None:
        print(f"upstroke {command}: {text}", file=sys.stderr, flush=True)

    return notify


def add_results_arguments(parser: argparse.ArgumentParser) -> None:
    """Add ``--out``, ``--summary-csv``, ``--condition`` and ``--lock-wait`` to a command's parser."""
    parser.add_argument("--out", metavar="RESULTS.h5",
                        help="write (or add to) a results file: settings, beats, decisions, conditions, summaries")
    parser.add_argument("--summary-csv", dest="summary_csv", metavar="SUMMARY.csv",
                        help="write the summaries (one row per file x sweep group x condition)")
    parser.add_argument("--condition", dest="conditions", type=parse_condition_arg, action="append", default=[],
                        metavar="NAME=START-END[,steady=RULE]",
                        help="name a stretch of every file: baseline=0-60s, drug=60-180s, washout=180s-end, "
                        "or sweeps:0-3; steady=auto|all|last30s|last20beats picks its summary window (repeatable)")
    add_lock_wait_argument(parser)


def settings_from_args(args: argparse.Namespace) -> Settings:
    """The defaults, then the ``--settings`` file, then ``--ljp``."""
    from analysis.settings import load_settings

    settings = load_settings(args.settings) if getattr(args, "settings", None) else Settings()
    if getattr(args, "ljp", None) is not None:
        settings = settings.replace("preprocess.ljp_mV", args.ljp)
    return settings
