"""The study options of ``upstroke batch`` and ``upstroke export``: the layout and its tables.

``batch`` learns the study's layout (``--layout PATTERN`` or ``--sheet SHEET.csv``, with
``--condition-order`` and ``--group-from``), analyses only the files it assigns, names each
file's condition after the study's and stores the layout in the results file. Both commands
write the per cell x condition table (``--study-csv``) and the comparison against the baseline
(``--compare``); ``export`` also draws the comparison figures (``--compare-figures DIR``: one
SVG and one PNG per group).
"""

from __future__ import annotations

import argparse
import os
import re
import sys
from typing import Any

__all__ = [
    "add_layout_options", "add_table_options", "check_request", "comparison_figures", "layout_from_args",
    "report_layout", "study_tables", "tasks_conditions", "with_study_columns",
]


def _order(text: str) -> list[str]:
    names = [t.strip() for t in text.split(",") if t.strip()]
    if not names:
        raise argparse.ArgumentTypeError("give the conditions separated by commas, baseline first")
    return names


def add_layout_options(parser: argparse.ArgumentParser) -> None:
    """``--layout``/``--sheet``, ``--condition-order`` and ``--group-from`` (for ``batch``)."""
    how = parser.add_mutually_exclusive_group()
    how.add_argument("--layout", metavar="PATTERN",
                     help="a study: which cell and condition each file is, from its path relative to the "
                     "folder given, e.g. '{cell}/{condition}.abf' or '{cell}_{drug:[a-z]+}/{condition}_spont.csv' "
                     "({name} is any text within a folder or file name, {name:REGEX} text matching REGEX, "
                     "* any text); {cell} and {condition} are required, other fields become columns")
    how.add_argument("--sheet", metavar="SHEET.csv",
                     help="a study from a CSV sheet with columns file, cell, condition, optional group and "
                     "any of your own (file relative to the sheet's folder)")
    parser.add_argument("--condition-order", type=_order, metavar="A,B,C",
                        help="the study's conditions in order, baseline first (default: as they first appear)")
    parser.add_argument("--group-from", metavar="COLUMN",
                        help="the pattern field or sheet column that names each cell's group (default: 'group' "
                        "when there is one)")


def add_table_options(parser: argparse.ArgumentParser, *, figures: bool) -> None:
    """``--study-csv``, ``--compare``, ``--baseline`` and, for ``export``, ``--compare-figures``."""
    parser.add_argument("--study-csv", metavar="STUDY.csv",
                        help="write the study's summary: one row per cell x condition")
    parser.add_argument("--compare", metavar="COMPARE.csv",
                        help="write each condition against the baseline: per cell, and per group with mean, "
                        "SEM, n, paired t-test and Wilcoxon signed-rank p values")
    parser.add_argument("--baseline", metavar="CONDITION",
                        help="the condition compared against (default: the first of the condition order)")
    if figures:
        parser.add_argument("--compare-figures", metavar="DIR",
                            help="write the comparison figures, one SVG and one PNG per group, into DIR")


def layout_from_args(args: argparse.Namespace, paths: list[str]):
    """The study layout the options describe (None without ``--layout`` or ``--sheet``)."""
    from analysis.errors import InputError
    from analysis.study import StudyLayout

    if not (args.layout or args.sheet):
        for name in ("condition_order", "group_from"):
            if getattr(args, name):
                raise InputError(None, f"--{name.replace('_', '-')} needs a study",
                                 "describe the study with --layout PATTERN or --sheet SHEET.csv")
        return None
    if args.sheet:
        return StudyLayout.from_sheet(args.sheet, condition_order=args.condition_order,
                                      group_from=args.group_from, files=paths)
    folders = [s for s in args.sources if os.path.isdir(s)]
    if len(args.sources) != 1 or len(folders) != 1:
        raise InputError(None, "--layout reads paths relative to one study folder",
                         "give exactly one folder, e.g. upstroke batch recordings/ --layout '{cell}/{condition}.abf'")
    return StudyLayout.from_pattern(folders[0], args.layout, condition_order=args.condition_order,
                                    group_from=args.group_from, files=paths)


def tasks_conditions(layout, paths: list[str]) -> tuple[list[str], dict[str, tuple[str, ...]]]:
    """The paths to analyse (the layout's, as found) and each one's condition: the whole file."""
    found = {os.path.normcase(os.path.abspath(p)): p for p in paths}
    chosen, conditions = [], {}
    for entry in layout.entries:
        full = layout.path_of(entry)
        path = found.get(os.path.normcase(full), full)
        chosen.append(path)
        if not re.search(r"[=,]", entry.condition):  # names with these cannot name a stretch
            conditions[path] = (f"{entry.condition}=0s-end",)
    return chosen, conditions


def report_layout(layout) -> None:
    """The layout in one line on stdout; files it leaves out on stderr."""
    print(f"study: {layout.describe()}")
    if layout.unmatched:
        print(f"upstroke batch: {len(layout.unmatched)} file(s) match no cell and condition of the study "
              "and were not analysed:", file=sys.stderr)
        for rel in layout.unmatched:
            print(f"  {rel}", file=sys.stderr)


def check_request(layout, args: argparse.Namespace, what: str | None) -> None:
    """Refuse study outputs without a study, and a baseline the study does not have."""
    from analysis.errors import InputError

    if layout is None:
        if args.study_csv or args.compare or getattr(args, "compare_figures", None):
            raise InputError(what, "holds no study layout" if what else "--study-csv and --compare need a study",
                             "analyse the files with upstroke batch --layout PATTERN or --sheet SHEET.csv")
        return
    if args.baseline is not None and args.baseline not in layout.conditions:
        raise InputError(None, f"--baseline {args.baseline!r} is not a condition of the study",
                         f"choose one of {', '.join(layout.conditions)}")


def study_tables(layout, recordings: Any, args: argparse.Namespace) -> list[tuple[str, str]]:
    """The requested study CSVs as (path, text), built in memory (see :func:`check_request`)."""
    from analysis.study import cell_condition_table, compare, table_csv

    if layout is None:
        return []
    table = cell_condition_table(layout, recordings)
    out = []
    if args.study_csv:
        out.append((args.study_csv, table_csv(table)))
    if args.compare:
        out.append((args.compare, table_csv(compare(table, baseline=args.baseline or layout.baseline,
                                                     conditions=layout.conditions))))
    return out


def _safe(name: str) -> str:
    return re.sub(r"[^A-Za-z0-9._-]+", "_", name).strip("._") or "all"


def comparison_figures(layout, recordings: Any, folder: str) -> list[tuple[str, str | bytes]]:
    """One SVG and one PNG per group of the study: (path, content)."""
    from analysis.study import cell_condition_table
    from app.gui.svg_raster import svg_to_png
    from app.svg.study import comparison_svg

    table = cell_condition_table(layout, recordings)
    out: list[tuple[str, str | bytes]] = []
    for group in layout.groups:
        what = f"{layout.group_column} {group}" if group else "all cells"
        svg = comparison_svg(table, conditions=layout.conditions, group=group, title=f"Study comparison: {what}")
        stem = os.path.join(folder, f"compare-{_safe(group)}")
        out += [(stem + ".svg", svg), (stem + ".png", svg_to_png(svg))]
    return out


def with_study_columns(text: str, layout) -> str:
    """A beats CSV with the study's columns after its own: ``cell``, ``group`` when the study has
    groups, and the user's own columns (CONTRACT.md: the beats CSV in a study)."""
    import csv
    import io

    rows = list(csv.reader(io.StringIO(text)))
    if not rows:
        return text
    extras = [c for c in layout.extra_columns if c != layout.group_column]
    added = ["cell"] + (["group"] if layout.group_column else []) + extras
    taken = [c for c in added if c in rows[0]]
    if taken:
        return text  # already there (or a column of the same name): leave the table as it is
    at = rows[0].index("file")
    found: dict[str, object] = {}
    out = io.StringIO()
    writer = csv.writer(out, lineterminator="\n")
    writer.writerow(rows[0] + added)
    for row in rows[1:]:
        name = row[at]
        if name not in found:
            found[name] = _entry_of(layout, name)
        entry = found[name]
        values = [""] * len(added) if entry is None else (
            [entry.cell] + ([entry.group] if layout.group_column else []) + [entry.value(c) for c in extras])
        writer.writerow(row + values)
    return out.getvalue()


def _entry_of(layout, name: str):
    entry = layout.entry_for(name)
    if entry is not None:
        return entry
    tail = name.replace("\\", "/")
    matches = [e for e in layout.entries if tail.endswith("/" + e.file) or tail == e.file]
    return matches[0] if len(matches) == 1 else None
