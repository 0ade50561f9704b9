"""The command-line reference (docs/cli.md), generated from the argparse parser.

Run ``python -m app.cli.reference > docs/cli.md`` after changing any command or option; a test
fails while the committed page and the parser disagree.
"""

from __future__ import annotations

import argparse
import sys

from app.cli import build_parser

HEADER = """# Command-line reference

Generated from the program's own argument parser by `python -m app.cli.reference`; a test keeps
this page and the parser in step. Exit status for every command: 0 success; 2 the input or the
command line is wrong (one line on stderr naming the file, what is wrong and what to do); 1 an
internal fault (please report it). A failed command leaves no partial output file behind and never
overwrites a good one.
"""


def _subparsers(parser: argparse.ArgumentParser) -> dict[str, argparse.ArgumentParser]:
    for action in parser._actions:  # argparse keeps subcommands only here
        if isinstance(action, argparse._SubParsersAction):
            return dict(action.choices)
    return {}


def _option_rows(parser: argparse.ArgumentParser) -> list[tuple[str, str]]:
    rows = []
    for action in parser._actions:
        if isinstance(action, argparse._HelpAction):
            continue
        if action.option_strings:
            names = ", ".join(action.option_strings)
            if action.nargs != 0:
                names += f" {action.metavar or action.dest.upper()}"
        else:
            names = str(action.metavar or action.dest)
        text = (action.help or "").replace("%(default)s", str(action.default))
        if action.choices and not isinstance(action, argparse._SubParsersAction):
            text += f" (one of: {', '.join(map(str, action.choices))})"
        rows.append((names, " ".join(text.split())))
    return rows


def cli_reference_markdown() -> str:
    """The whole reference page as Markdown."""
    parser = build_parser()
    parts = [HEADER]
    for name, sub in _subparsers(parser).items():
        usage = " ".join(sub.format_usage().replace("usage: ", "").split())
        parts.append(f"## `upstroke {name}`\n")
        if sub.description:
            parts.append(" ".join(sub.description.split()) + "\n")
        parts.append(f"```\n{usage}\n```\n")
        rows = _option_rows(sub)
        if rows:
            parts.append("| argument | meaning |\n|---|---|")
            parts.extend(f"| `{a}` | {t.replace('|', '/')} |" for a, t in rows)
            parts.append("")
        if sub.epilog:
            parts.append(sub.epilog.strip() + "\n")
    return "\n".join(parts).rstrip() + "\n"


if __name__ == "__main__":
    sys.stdout.write(cli_reference_markdown())
