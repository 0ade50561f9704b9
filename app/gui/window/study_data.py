"""What the study's panels draw, from the session and the core's study tables.

The numbers are the core's: the per cell x condition table (:func:`analysis.study.cell_condition_table`)
over the session's current summaries, and the comparison (:func:`analysis.study.compare`) over
that table. This module only finds which recording of the session is which file of the layout,
and turns the core's columns into the grid's squares and the figure's panels.
"""

from __future__ import annotations

import math
import os
from collections.abc import Mapping, Sequence

import numpy as np

from analysis.columns import column
from analysis.session import Session, key_of
from analysis.stats import PARAMETERS, summary_columns
from analysis.study import (
    StudyLayout,
    cell_condition_table,
    compare,
    condition_means,
    group_values,
)

from ..figures.comparison_plot import CellLine, ComparisonPanel, GroupMean
from ..views.study_grid import GridEntry

__all__ = ["StudyTables", "comparison_panels", "grid_entries", "missing_summaries", "recording_keys", "study_inputs", "study_tables"]

_STEM_OF = {col: stem for col, stem, _unit in PARAMETERS}


def recording_keys(session: Session, layout: StudyLayout) -> dict[str, str]:
    """The session key of each file of the layout that the session holds (``{entry.file: key}``).

    A file is the session's recording of the same path; when the study's folder has moved since
    it was analysed, the recording whose source path ends with the entry's relative path.
    """
    keys = set(session.recordings)
    sources = {k: session.info(k).source_path.replace(os.sep, "/") for k in session.recordings}
    out: dict[str, str] = {}
    for entry in layout.entries:
        key = key_of(layout.path_of(entry))
        if key not in keys:
            tail = "/" + entry.file.lstrip("/")
            found = [k for k, src in sources.items() if src.endswith(tail)]
            key = found[0] if len(found) == 1 else None
        if key is not None:
            out[entry.file] = key
    return out


class StudyTables:
    """The core's per cell x condition table and comparison of a study, and which recording is where.

    Attributes
    ----------
    table : dict of str to ndarray
        :func:`analysis.study.cell_condition_table`.
    comparison : dict of str to ndarray
        :func:`analysis.study.compare` of the table against the layout's baseline.
    keys : dict of str to str
        The session key of each file of the layout.
    """

    def __init__(self, layout: StudyLayout, table: Mapping[str, np.ndarray], comparison: Mapping[str, np.ndarray],
                 keys: Mapping[str, str]) -> None:
        self.layout = layout
        self.table = dict(table)
        self.comparison = dict(comparison)
        self.keys = dict(keys)


def missing_summaries(session: Session, keys: Sequence[str]) -> list[str]:
    """The recordings whose summaries are not current (a summary job must run first)."""
    return [k for k in keys if session.cached_summaries(k) is None]


def study_inputs(session: Session, layout: StudyLayout) -> tuple[dict[str, str], dict[str, dict]]:
    """What the study's tables are made from, read from the session on its thread: the key of
    each file, and the current summary columns of each file's path (a recording without current
    summaries counts as not analysed: run the summary jobs of :func:`missing_summaries` first)."""
    keys = recording_keys(session, layout)
    summaries = {}
    for entry in layout.entries:
        key = keys.get(entry.file)
        cached = session.cached_summaries(key) if key is not None else None
        if cached is not None:
            summaries[layout.path_of(entry)] = summary_columns(cached)
    return keys, summaries


def study_tables(layout: StudyLayout, keys: Mapping[str, str], summaries: Mapping[str, Mapping]) -> StudyTables:
    """The core's per cell x condition table and comparison (pure: safe in a worker thread)."""
    table = cell_condition_table(layout, summaries)
    comparison = compare(table, baseline=layout.baseline, conditions=layout.conditions)
    return StudyTables(layout, table, comparison, keys)


def grid_entries(tables: StudyTables) -> list[GridEntry]:
    """One square per row of the per cell x condition table; its recording is the row's first file
    the session holds."""
    t = tables.table
    out = []
    for i in range(len(t["cell"])):
        files = [f for f in str(t["files"][i]).split(";") if f]
        key = next((tables.keys[f] for f in files if f in tables.keys), None)
        out.append(GridEntry(
            cell=str(t["cell"][i]), condition=str(t["condition"][i]), group=str(t["group"][i]), key=key,
            label=";".join(files), n_used=int(t["n_used"][i]), n_to_review=int(t["n_to_review"][i]),
            n_rejected=int(t["n_rejected"][i]), window=str(t["window"][i]),
        ))
    return out


def _number(value: float, digits: int = 3) -> str:
    return f"{value:.{digits}g}" if math.isfinite(value) else "—"


def _notes(c: Mapping[str, np.ndarray], sel: np.ndarray, rows: np.ndarray, unit: str) -> tuple[str, ...]:
    """One line per group row of the comparison: the change from the baseline and both paired
    tests, as the comparison table gives them (descriptive: no correction for multiple tests)."""
    out = []
    several = len({str(c["group"][i]) for i in sel}) > 1
    for i in sel:
        if rows[i] != "group":
            continue
        group = f" ({c['group'][i]})" if several else ""
        out.append(
            f"{c['condition'][i]} vs {c['baseline'][i]}{group}: change {_number(float(c['difference'][i]))} "
            f"{unit} ({_number(float(c['percent_change'][i]), 2)} %), n = {int(c['n'][i])}; "
            f"paired t p = {_number(float(c['paired_t_p'][i]), 2)}, Wilcoxon p = {_number(float(c['wilcoxon_p'][i]), 2)}"
        )
    return tuple(out)


def comparison_panels(tables: StudyTables, parameters: Sequence[str], *, current_cell: str = "",
                      colours: Mapping[str, str] | None = None) -> list[ComparisonPanel]:
    """The figure's panels (one per beats column in ``parameters``) from the core's tables.

    Each cell's line joins its values in every condition it has (the per cell x condition
    table); each group's mean and SEM in a condition are over the cells that have that condition
    (:func:`analysis.study.condition_means`, as the exported figure draws them). The paired
    comparison's numbers (change, tests) go to the panel's notes.
    """
    c = tables.comparison
    conditions = tuple(tables.layout.conditions)
    rows = np.asarray(c["row"], dtype=object) if c else np.empty(0, dtype=object)
    groups = list(tables.layout.groups) or [""]
    panels = []
    for name in parameters:
        stem = _STEM_OF.get(name)
        sel = np.flatnonzero(np.asarray(c["parameter"], dtype=object) == stem) if (stem and c) else np.empty(0, int)
        col = column(name)
        table_column = f"{col.stem}_mean_{col.unit_in_name}"
        lines: list[CellLine] = []
        means: list[GroupMean] = []
        if tables.table and table_column in tables.table:
            for group in groups:
                cells, values = group_values(tables.table, table_column, conditions, group)
                if not cells:
                    continue
                lines += [CellLine(cell, group, tuple(float(x) for x in v)) for cell, v in zip(cells, values)]
                mean, sem, n = condition_means(values)
                means.append(GroupMean(group, tuple(float(x) for x in mean), tuple(float(x) for x in sem),
                                       tuple(int(x) for x in n)))
        panels.append(ComparisonPanel(
            parameter=name, conditions=conditions, notes=_notes(c, sel, rows, col.unit),
            cells=tuple(lines), groups=tuple(means), current_cell=current_cell, colours=dict(colours or {}),
        ))
    return panels
