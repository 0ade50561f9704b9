"""The per cell x condition table and the comparison against the baseline.

The paired tests are checked against scipy.stats (ttest_rel, wilcoxon, sem) on the same numbers;
the pooling of several files against numpy on the pooled beats.
"""

from __future__ import annotations

import math
from types import SimpleNamespace

import numpy as np
import pytest
import scipy.stats

from analysis.stats import PARAMETERS, SUMMARY_COLUMNS
from analysis.study import StudyLayout, cell_condition_table, compare, table_csv


def _summary(path, rows):
    """Summary columns as a results file keeps them; ``rows`` are dicts overriding defaults."""
    out = {}
    for name in SUMMARY_COLUMNS:
        vals = []
        for r in rows:
            default = {"file": path, "sweep_group": "all", "condition": "", "window": "all"}.get(name, math.nan)
            if name.startswith("n_") or name == "ensemble_n":
                default = r.get("n_accepted", 0)
            vals.append(r.get(name, default))
        out[name] = np.array(vals, dtype=object if isinstance(vals[0], str) else float)
    return out


@pytest.fixture
def study(tmp_path):
    cells = {"NL-S01": "UP-113", "NL-S02": "UP-113", "NL-S03": "UP-113", "NL-S04": "vehicle"}
    sheet = ["file,cell,condition,group,concentration_uM"]
    for cell, group in cells.items():
        for cond in ("baseline", "UP-113", "washout"):
            (tmp_path / f"{cell}_{cond}.csv").write_text("x")
            sheet.append(f"{cell}_{cond}.csv,{cell},{cond},{group},{0 if cond != 'UP-113' else 1}")
    (tmp_path / "sheet.csv").write_text("\n".join(sheet) + "\n")
    layout = StudyLayout.from_sheet(tmp_path / "sheet.csv", condition_order=["baseline", "UP-113", "washout"])
    rng = np.random.default_rng(7)
    recordings = []
    for e in layout.entries:
        cl = 400.0 + 50.0 * rng.random() + (60.0 if e.condition == "UP-113" else 0.0)
        rows = [{"cl_mean_ms": cl, "cl_sd_ms": 10.0, "apd90_mean_ms": 150.0 + 5 * rng.random(), "n_accepted": 30,
                 "n_beats": 32, "n_rejected": 2, "condition": e.condition, "window_start_s": 1.0, "window_end_s": 9.0}]
        if e.cell == "NL-S03" and e.condition == "washout":
            rows = []  # a file with no beats
        recordings.append(SimpleNamespace(source_path=layout.path_of(e), summary=_summary(layout.path_of(e), rows)
                                          if rows else {}))
    return layout, recordings


def test_one_row_per_cell_and_condition_with_the_sheets_columns(study):
    layout, recordings = study
    table = cell_condition_table(layout, recordings)
    assert list(zip(table["cell"], table["condition"]))[:3] == [
        ("NL-S01", "baseline"), ("NL-S01", "UP-113"), ("NL-S01", "washout")]
    assert len(table["cell"]) == 12
    assert list(table["concentration_uM"][:3]) == ["0", "1", "0"]
    assert list(table["group"][-3:]) == ["vehicle"] * 3
    assert table["n_used"][0] == 30 and table["n_rejected"][0] == 2 and table["n_beats"][0] == 32
    gone = list(table["cell"]).index("NL-S03") + 2
    assert table["n_used"][gone] == 0 and math.isnan(table["cl_mean_ms"][gone]) and table["note"][gone] == "no beats"
    text = table_csv(table)
    assert text.splitlines()[0].startswith("cell,condition,group,concentration_uM,files,")


def test_a_cell_recorded_twice_under_one_condition_is_pooled(tmp_path):
    (tmp_path / "a1.csv").write_text("x")
    (tmp_path / "a2.csv").write_text("x")
    (tmp_path / "s.csv").write_text("file,cell,condition\na1.csv,A,base\na2.csv,A,base\n")
    layout = StudyLayout.from_sheet(tmp_path / "s.csv")
    x1, x2 = np.array([400.0, 410, 395, 420]), np.array([380.0, 390, 385])
    summaries = {
        str(tmp_path / name): _summary(name, [{"cl_mean_ms": x.mean(), "cl_sd_ms": x.std(ddof=1), "n_accepted": x.size}])
        for name, x in (("a1.csv", x1), ("a2.csv", x2))
    }
    table = cell_condition_table(layout, summaries)
    both = np.concatenate([x1, x2])
    # numpy on the pooled beats: the pooled mean and SD are those of all beats together.
    assert table["cl_mean_ms"][0] == pytest.approx(both.mean(), rel=1e-12)
    assert table["cl_sd_ms"][0] == pytest.approx(both.std(ddof=1), rel=1e-12)
    assert table["n_used"][0] == 7 and table["n_files"][0] == 2


def test_the_comparison_is_the_difference_of_the_table_rows_and_matches_scipy(study):
    layout, recordings = study
    table = cell_condition_table(layout, recordings)
    comp = compare(table, conditions=layout.conditions)
    cells = comp["row"] == "cell"
    sel = cells & (comp["parameter"] == "cl") & (comp["condition"] == "UP-113")
    value_of = {(c, k): v for c, k, v in zip(table["cell"], table["condition"], table["cl_mean_ms"])}
    for cell, diff, pct in zip(comp["cell"][sel], comp["difference"][sel], comp["percent_change"][sel]):
        base, drug = value_of[(cell, "baseline")], value_of[(cell, "UP-113")]
        assert diff == drug - base and pct == pytest.approx((drug - base) / base * 100.0, rel=1e-12)
    group = (comp["row"] == "group") & (comp["parameter"] == "cl") & (comp["condition"] == "UP-113") & (
        comp["group"] == "UP-113")
    (g,) = np.flatnonzero(group)
    cells3 = ["NL-S01", "NL-S02", "NL-S03"]
    base = np.array([value_of[(c, "baseline")] for c in cells3])
    drug = np.array([value_of[(c, "UP-113")] for c in cells3])
    assert comp["n"][g] == 3
    assert comp["difference"][g] == pytest.approx(np.mean(drug - base), rel=1e-12)
    assert comp["difference_sem"][g] == pytest.approx(scipy.stats.sem(drug - base), rel=1e-12)  # scipy.stats.sem
    t = scipy.stats.ttest_rel(drug, base)  # scipy.stats.ttest_rel, the paired t-test
    assert (comp["paired_t"][g], comp["paired_t_p"][g]) == pytest.approx((t.statistic, t.pvalue), rel=1e-12)
    w = scipy.stats.wilcoxon(drug, base)  # scipy.stats.wilcoxon, the signed-rank test
    assert (comp["wilcoxon_w"][g], comp["wilcoxon_p"][g]) == pytest.approx((w.statistic, w.pvalue), rel=1e-12)
    # Washout: NL-S03 has no beats there, so only complete pairs count.
    wash = (comp["row"] == "group") & (comp["parameter"] == "cl") & (comp["condition"] == "washout") & (
        comp["group"] == "UP-113")
    assert comp["n"][wash][0] == 2
    # One cell in a group: no test, no SEM (undefined, not zero).
    lone = (comp["row"] == "group") & (comp["group"] == "vehicle") & (comp["parameter"] == "cl")
    assert np.all(comp["n"][lone] == 1) and np.all(np.isnan(comp["paired_t_p"][lone]))
    assert np.all(np.isnan(comp["difference_sem"][lone]))


def test_another_baseline_can_be_chosen(study):
    layout, recordings = study
    comp = compare(cell_condition_table(layout, recordings), baseline="UP-113", conditions=layout.conditions)
    assert set(comp["condition"]) == {"baseline", "washout"} and set(comp["baseline"]) == {"UP-113"}
    assert set(comp["parameter"]) == {stem for _, stem, _ in PARAMETERS}


def test_a_live_sessions_summaries_give_the_same_table(study):
    from analysis.stats import Summary

    layout, recordings = study
    as_objects = {}
    for r in recordings:
        n = len(r.summary.get("file", ()))
        as_objects[r.source_path] = [Summary({k: v[i] for k, v in r.summary.items()}) for i in range(n)]
    one, other = cell_condition_table(layout, recordings), cell_condition_table(layout, as_objects)
    assert table_csv(one) == table_csv(other)
