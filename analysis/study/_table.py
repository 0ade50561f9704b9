"""The per cell x condition table of a study: the tidy table users load into statistics software.

One row per cell x condition of the layout (in the layout's cell order, conditions in the user's
order), built from each file's saved summaries: the steady-state window used, the beats used, to
review and rejected, every parameter's mean and SD, the cycle-length and APD90 variability, and
the layout's group and own columns. A file with no beats, or not analysed, still has its row,
with no values and a note saying why.

A file's summary row for the study is the one of its condition if the file itself marks a
condition of that name, else its only marked condition, else its beats outside every marked
condition (the whole recording when it marks none); sweep groups other than ``all`` are pooled.
When a cell has several files under one condition they are pooled: means weighted by the beats
used, the SD that of all their beats together (exact when each parameter is defined on every
used beat), the variability indices averaged weighted by beats used.
"""

from __future__ import annotations

import csv
import io
import math
import os
from collections.abc import Mapping, Sequence
from typing import Any

import numpy as np

from analysis.results import ResultsFile
from analysis.stats import PARAMETERS, summary_columns
from analysis.study_layout import StudyEntry, StudyLayout

__all__ = ["VARIABILITY", "cell_condition_table", "parameter_columns", "table_csv"]

#: Beat-to-beat variability indices carried from the file summaries.
VARIABILITY = ("cl_cv_pct", "cl_rmssd_ms", "cl_sd1_ms", "cl_sd2_ms", "apd90_stv_ms")
_COUNTS = ("n_beats", "n_used", "n_to_review", "n_rejected")


def parameter_columns() -> list[tuple[str, str, str, str]]:
    """Per summarised parameter: (name stem, unit, mean column, SD column) of the table."""
    return [(stem, unit, f"{stem}_mean_{unit}", f"{stem}_sd_{unit}") for _, stem, unit in PARAMETERS]


def _key(path: str) -> str:
    return os.path.normcase(os.path.normpath(os.path.abspath(path)))


def _summaries_by_entry(layout: StudyLayout, recordings: Any) -> dict[str, Mapping[str, np.ndarray]]:
    """The saved summary columns of each entry's file (by the entry's ``file``)."""
    if isinstance(recordings, ResultsFile):
        recordings = recordings.recordings
    if isinstance(recordings, Mapping):
        items = [(str(path), summary) for path, summary in recordings.items()]
    else:
        items = [(r.source_path, r.summary) for r in recordings]
    # A session gives its summaries as Summary objects: the same columns as the file keeps.
    items = [(p, summary_columns(v) if isinstance(v, list | tuple) else v) for p, v in items]
    by_path = {_key(path): summary for path, summary in items}
    out: dict[str, Mapping[str, np.ndarray]] = {}
    for entry in layout.entries:
        summary = by_path.get(_key(layout.path_of(entry)))
        if summary is None:  # the study moved since it was analysed: match the path's tail
            tail = "/" + entry.file.lstrip("/")
            found = [s for p, s in items if p.replace(os.sep, "/").endswith(tail)]
            summary = found[0] if len(found) == 1 else None
        if summary is not None:
            out[entry.file] = summary
    return out


def _rows_for(summary: Mapping[str, np.ndarray], condition: str) -> tuple[list[int], str]:
    """The summary rows (indices) standing for a file under the study's condition, and a note."""
    n = len(summary.get("file", ()))
    if n == 0:
        return [], "no beats"
    conds = [str(c) for c in summary["condition"]]
    groups = [str(g) for g in summary["sweep_group"]]
    named = list(dict.fromkeys(c for c in conds if c))
    if condition in named:
        pick, note = condition, ""
    elif len(named) == 1:
        pick, note = named[0], f"the file's condition {named[0]!r}"
    elif "" in conds:
        pick, note = "", "beats outside the file's conditions" if named else ""
    else:
        return [], f"the file marks conditions {', '.join(named)} but none named {condition!r}"
    rows = [i for i in range(n) if conds[i] == pick]
    pooled = [i for i in rows if groups[i] == "all"]
    return (pooled or rows), note


def _count(summary: Mapping[str, np.ndarray], rows: list[int], name: str) -> int:
    if name in summary:
        return int(np.sum(np.asarray(summary[name])[rows]))
    fallback = {"n_used": "n_accepted"}.get(name)
    if fallback and fallback in summary:
        return int(np.sum(np.asarray(summary[fallback])[rows]))
    return 0  # a summary that predates the review's counts had nothing waiting for review


def _pooled(parts: list[tuple[Mapping[str, np.ndarray], int]]) -> dict[str, float]:
    """Means, SDs and variability of several summary rows pooled by their beats used."""
    values: dict[str, float] = {}
    weights = np.array([_count(s, [i], "n_used") for s, i in parts], dtype=float)
    for _, _, mean_col, sd_col in parameter_columns():
        m = np.array([float(s[mean_col][i]) for s, i in parts])
        sd = np.array([float(s[sd_col][i]) for s, i in parts])
        ok = np.isfinite(m) & (weights > 0)
        if not ok.any():
            values[mean_col] = values[sd_col] = math.nan
            continue
        w, m_ok, sd_ok = weights[ok], m[ok], sd[ok]
        mean = float(np.sum(w * m_ok) / np.sum(w))
        values[mean_col] = mean
        if len(m_ok) == 1:
            values[sd_col] = float(sd_ok[0])
            continue
        total = float(np.sum(w))
        within = np.where(np.isfinite(sd_ok), (w - 1) * sd_ok ** 2, 0.0)
        var = (np.sum(within) + np.sum(w * (m_ok - mean) ** 2)) / (total - 1) if total > 1 else math.nan
        values[sd_col] = float(np.sqrt(var)) if math.isfinite(var) else math.nan
    for col in VARIABILITY:
        v = np.array([float(s[col][i]) if col in s else math.nan for s, i in parts])
        ok = np.isfinite(v) & (weights > 0)
        values[col] = float(np.sum(weights[ok] * v[ok]) / np.sum(weights[ok])) if ok.any() else math.nan
    return values


def _columns(layout: StudyLayout) -> list[str]:
    extras = [c for c in layout.extra_columns if c != layout.group_column]
    stats = [c for _, _, mean_col, sd_col in parameter_columns() for c in (mean_col, sd_col)]
    return ["cell", "condition", "group", *extras, "files", "n_files", "window", "window_start_s", "window_end_s",
            *_COUNTS, *stats, *VARIABILITY, "note"]


def cell_condition_table(layout: StudyLayout, recordings: Any) -> dict[str, np.ndarray]:
    """One row per cell x condition of a study.

    Parameters
    ----------
    layout : StudyLayout
    recordings : ResultsFile, iterable of StoredRecording, or mapping of path to summaries
        The analysed files with their saved (reviewed) summaries; anything with
        ``source_path`` and ``summary`` (the summary columns, as the results file keeps them);
        or a mapping of source path to summary columns or to a list of
        :class:`analysis.stats.Summary` (as a live session gives them:
        ``{session.info(k).source_path: session.summaries(k) for k in session.recordings}``).

    Returns
    -------
    dict of str to ndarray
        Columns in order: ``cell``, ``condition``, ``group``, the layout's own columns,
        ``files`` (``;``-separated), ``n_files``, ``window`` (the steady-state rule),
        ``window_start_s``, ``window_end_s`` (``;``-joined rules when pooled), ``n_beats``,
        ``n_used``, ``n_to_review``, ``n_rejected``, per parameter ``STEM_mean_UNIT`` and
        ``STEM_sd_UNIT``, the variability indices (:data:`VARIABILITY`) and ``note``. Text
        columns are object arrays, counts int64, values float64 (NaN where undefined).
        Rows follow the layout's cells, then its conditions in order; a cell x condition with no
        file is left out.
    """
    summaries = _summaries_by_entry(layout, recordings)
    names = _columns(layout)
    rows: list[dict[str, Any]] = []
    for cell in layout.cells:
        for condition in layout.conditions:
            entries = layout.entries_of(cell, condition)
            if entries:
                rows.append(_row(layout, entries, summaries, cell, condition))
    out: dict[str, np.ndarray] = {}
    for name in names:
        vals = [r.get(name, math.nan) for r in rows]
        if name in _COUNTS or name == "n_files":
            out[name] = np.array(vals, dtype=np.int64)
        elif name in ("window_start_s", "window_end_s") or name.endswith(tuple(f"_{u}" for _, u, _, _ in parameter_columns())) \
                or name in VARIABILITY:
            out[name] = np.array(vals, dtype=np.float64)
        else:
            out[name] = np.array([str(v) for v in vals], dtype=object)
    return out


def _row(layout: StudyLayout, entries: list[StudyEntry], summaries, cell: str, condition: str) -> dict[str, Any]:
    first = entries[0]
    row: dict[str, Any] = {"cell": cell, "condition": condition, "group": first.group,
                           "files": ";".join(e.file for e in entries), "n_files": len(entries)}
    for column in layout.extra_columns:
        row[column] = ";".join(dict.fromkeys(e.value(column) for e in entries))
    parts, notes, windows, starts, ends = [], [], [], [], []
    counts = dict.fromkeys(_COUNTS, 0)
    for entry in entries:
        summary = summaries.get(entry.file)
        if summary is None:
            notes.append(f"{entry.file}: not analysed")
            continue
        picked, note = _rows_for(summary, condition)
        if note:
            notes.append(f"{entry.file}: {note}" if len(entries) > 1 else note)
        for name in _COUNTS:
            counts[name] += _count(summary, picked, name)
        for i in picked:
            parts.append((summary, i))
            windows.append(str(summary["window"][i]))
            starts.append(float(summary["window_start_s"][i]))
            ends.append(float(summary["window_end_s"][i]))
    row.update(counts)
    row["window"] = ";".join(dict.fromkeys(windows))
    row["window_start_s"] = starts[0] if len(starts) == 1 else math.nan
    row["window_end_s"] = ends[0] if len(ends) == 1 else math.nan
    if len(parts) > 1:
        notes.append(f"pooled from {len(parts)} summaries")
    if parts:
        row.update(_pooled(parts))
    row["note"] = "; ".join(notes)
    return row


def table_csv(columns: Mapping[str, Sequence], *, digits: int = 10) -> str:
    """A table of columns as CSV text (``\n`` line ends, numbers to ``digits`` significant
    digits, undefined values empty)."""
    names = list(columns)
    n = len(columns[names[0]]) if names else 0
    out = io.StringIO()
    writer = csv.writer(out, lineterminator="\n")
    writer.writerow(names)
    for i in range(n):
        writer.writerow([_cell(columns[c][i], digits) for c in names])
    return out.getvalue()


def _cell(value: Any, digits: int) -> str:
    value = value.item() if hasattr(value, "item") else value
    if isinstance(value, float):
        return f"{value:.{digits}g}" if math.isfinite(value) else ""
    return str(value)


def group_values(table: Mapping[str, Sequence], column: str, conditions: Sequence[str], group: str) -> tuple[
        list[str], np.ndarray]:
    """A group's cells and their values of one column of :func:`cell_condition_table` (cells x
    conditions, NaN where a cell lacks a condition), cells in the table's order."""
    cells_col = [str(c) for c in table["cell"]]
    conds = [str(c) for c in table["condition"]]
    groups = [str(g) for g in table.get("group", [""] * len(cells_col))]
    values = np.asarray(table[column], dtype=np.float64)
    cells = list(dict.fromkeys(c for c, g in zip(cells_col, groups) if g == group))
    where = {c: i for i, c in enumerate(cells)}
    order = {k: j for j, k in enumerate(conditions)}
    out = np.full((len(cells), len(conditions)), np.nan)
    for c, k, g, v in zip(cells_col, conds, groups, values):
        if g == group and k in order:
            out[where[c], order[k]] = v
    return cells, out


def condition_means(values: np.ndarray) -> tuple[np.ndarray, np.ndarray, np.ndarray]:
    """Per condition (column of ``values``, cells x conditions): the mean over the cells that
    have a value, its standard error (sample SD with n - 1, over the square root of n; NaN below
    two cells) and n. The comparison figures of the app and of ``upstroke export`` both draw these."""
    values = np.asarray(values, dtype=np.float64)
    n = np.sum(np.isfinite(values), axis=0)
    k = values.shape[1] if values.ndim == 2 else 0
    with np.errstate(invalid="ignore", divide="ignore"):
        mean = np.array([np.nanmean(values[:, j]) if n[j] else np.nan for j in range(k)])
        sd = np.array([np.nanstd(values[:, j], ddof=1) if n[j] >= 2 else np.nan for j in range(k)])
        sem = sd / np.sqrt(np.maximum(n, 1))
    return mean, sem, n.astype(np.int64)
