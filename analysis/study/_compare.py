"""Each condition against the baseline, cell by cell, and per group with paired tests.

For every parameter (the mean of each summarised per-beat parameter) and every condition other
than the baseline, :func:`compare` gives one row per cell (its baseline value, its value under
the condition, the difference and the percent change) and one row per group (the mean and SEM
over cells of both values and of the change, n, and two paired tests with their p values).

These are descriptive helpers. The user owns the choice of test and the correction for multiple
comparisons (many parameters x conditions x groups are tested here, uncorrected):

* paired t-test (:func:`scipy.stats.ttest_rel`, two-sided): the cells' differences are
  independent and roughly normally distributed;
* Wilcoxon signed-rank test (:func:`scipy.stats.wilcoxon`, two-sided, zero differences
  dropped, scipy's default exact or normal-approximation method): the cells' differences are
  independent and symmetric about their median.

Only cells with a value under both the baseline and the condition count (complete pairs).
"""

from __future__ import annotations

import math
import warnings
from collections.abc import Mapping, Sequence

import numpy as np

from analysis.study._table import parameter_columns

__all__ = ["COMPARISON_COLUMNS", "compare"]

#: The comparison table's columns, in order.
COMPARISON_COLUMNS = (
    "row", "parameter", "unit", "group", "condition", "baseline", "cell", "n",
    "baseline_value", "value", "difference", "percent_change",
    "baseline_sem", "value_sem", "difference_sem", "percent_change_sem",
    "paired_t", "paired_t_p", "wilcoxon_w", "wilcoxon_p",
)
_TEXT = ("row", "parameter", "unit", "group", "condition", "baseline", "cell")


def _sem(x: np.ndarray) -> float:
    return float(np.std(x, ddof=1) / math.sqrt(x.size)) if x.size >= 2 else math.nan


def _percent(value: np.ndarray, base: np.ndarray) -> np.ndarray:
    with np.errstate(divide="ignore", invalid="ignore"):
        return np.where(base != 0, (value - base) / np.abs(base) * 100.0, np.nan)


def _paired_tests(base: np.ndarray, value: np.ndarray) -> tuple[float, float, float, float]:
    """(t, p) of scipy.stats.ttest_rel and (W, p) of scipy.stats.wilcoxon; NaN where undefined."""
    import scipy.stats  # heavy; only comparisons need it

    t = p_t = w = p_w = math.nan
    d = value - base
    if base.size >= 2 and np.any(d != d[0]):
        res = scipy.stats.ttest_rel(value, base)
        t, p_t = float(res.statistic), float(res.pvalue)
    if np.count_nonzero(d) >= 1:
        with warnings.catch_warnings():
            warnings.simplefilter("ignore")  # scipy warns that small samples use the exact method
            res = scipy.stats.wilcoxon(value, base)
        w, p_w = float(res.statistic), float(res.pvalue)
    return t, p_t, w, p_w


def compare(
    table: Mapping[str, Sequence],
    *,
    baseline: str | None = None,
    conditions: Sequence[str] | None = None,
    parameters: Sequence[str] | None = None,
) -> dict[str, np.ndarray]:
    """Each condition against the baseline, per parameter, cell by cell and per group.

    Parameters
    ----------
    table : mapping of str to sequence
        The per cell x condition table (:func:`analysis.study.cell_condition_table`).
    baseline : str or None
        The condition compared against; None takes ``conditions[0]`` (the layout's baseline).
    conditions : sequence of str or None
        The conditions in order; None takes them in the order the table first shows them.
    parameters : sequence of str or None
        Name stems to compare (``"apd90"``, ``"cl"``); None compares every summarised parameter.

    Returns
    -------
    dict of str to ndarray
        :data:`COMPARISON_COLUMNS`. ``row`` is ``"cell"`` or ``"group"``. Cell rows: ``cell``,
        ``n`` = 1, ``baseline_value``, ``value``, ``difference`` (value - baseline, the
        parameter's unit) and ``percent_change`` (difference / |baseline| x 100). Group rows
        (one per group, ``cell`` empty): the means over the group's complete pairs of those
        four, their SEMs (SD / sqrt(n)), ``n``, and the paired t statistic, its p, the
        Wilcoxon W and its p (NaN when undefined: the t-test needs two pairs whose differences
        are not all equal, the Wilcoxon test one difference that is not zero).
        Parameters in catalogue order, then conditions in order, then groups in order of first
        appearance; cells within a group in table order.

    Examples
    --------
    >>> t = {"cell": ["a", "a", "b", "b"], "condition": ["base", "drug"] * 2, "group": [""] * 4,
    ...      "cl_mean_ms": [400.0, 500.0, 300.0, 330.0]}
    >>> c = compare(t, parameters=["cl"])
    >>> [float(x) for x in c["difference"]], float(c["percent_change"][2])
    ([100.0, 30.0, 65.0], 17.5)
    """
    cells = np.asarray(table["cell"], dtype=object)
    conds = np.asarray(table["condition"], dtype=object)
    groups = np.asarray(table.get("group", [""] * len(cells)), dtype=object)
    order = list(conditions) if conditions else list(dict.fromkeys(str(c) for c in conds))
    base_name = baseline if baseline is not None else (order[0] if order else "")
    wanted = [p for p in parameter_columns() if parameters is None or p[0] in parameters]
    rows: list[dict] = []
    for stem, unit, mean_col, _ in wanted:
        if mean_col not in table:
            continue
        values = np.asarray(table[mean_col], dtype=np.float64)
        base_of = {str(c): values[i] for i, c in enumerate(cells) if conds[i] == base_name}
        for cond in order:
            if cond == base_name:
                continue
            for group in dict.fromkeys(groups):
                common = {"parameter": stem, "unit": unit, "group": str(group), "condition": str(cond), "baseline": base_name}
                members = [i for i in range(len(cells)) if conds[i] == cond and groups[i] == group]
                pairs = [(str(cells[i]), base_of.get(str(cells[i]), math.nan), values[i]) for i in members]
                pairs = [(c, b, v) for c, b, v in pairs if math.isfinite(b) and math.isfinite(v)]
                if not members:
                    continue
                b = np.array([p[1] for p in pairs], dtype=float)
                v = np.array([p[2] for p in pairs], dtype=float)
                d, pc = v - b, _percent(v, b)
                for k, (cell, _, _) in enumerate(pairs):
                    rows.append(dict(common, row="cell", cell=cell, n=1, baseline_value=b[k], value=v[k],
                                     difference=d[k], percent_change=pc[k]))
                t, p_t, w, p_w = _paired_tests(b, v)
                finite_pc = pc[np.isfinite(pc)]
                rows.append(dict(
                    common, row="group", cell="", n=len(pairs),
                    baseline_value=float(np.mean(b)) if b.size else math.nan,
                    value=float(np.mean(v)) if v.size else math.nan,
                    difference=float(np.mean(d)) if d.size else math.nan,
                    percent_change=float(np.mean(finite_pc)) if finite_pc.size else math.nan,
                    baseline_sem=_sem(b), value_sem=_sem(v), difference_sem=_sem(d), percent_change_sem=_sem(finite_pc),
                    paired_t=t, paired_t_p=p_t, wilcoxon_w=w, wilcoxon_p=p_w,
                ))
    out: dict[str, np.ndarray] = {}
    for name in COMPARISON_COLUMNS:
        vals = [r.get(name, math.nan) for r in rows]
        if name in _TEXT:
            out[name] = np.array([str(x) for x in vals], dtype=object)
        elif name == "n":
            out[name] = np.array(vals, dtype=np.int64)
        else:
            out[name] = np.array(vals, dtype=np.float64)
    return out
