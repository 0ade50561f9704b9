"""The comparison figure: a line per cell, each group's mean ± SEM on top, PNG and SVG export."""

from __future__ import annotations

import math

import numpy as np
import pytest
import scipy.stats

pytest.importorskip("pytestqt")

from PySide6 import QtGui

from analysis.study import compare
from app.gui.figures.comparison_plot import (
    CellLine,
    ComparisonFigure,
    ComparisonPanel,
    GroupMean,
)
from app.gui.figures.figure_export import export_figure
from app.gui.figures.figure_svg import unknown_items

CONDITIONS = ("baseline", "UP-113", "washout")
# Rates (bpm) of four invented cells; NL-0704 was lost before washout.
RATES = {"NL-0701": (82.0, 64.0, 78.0), "NL-0702": (75.0, 61.0, 70.0), "NL-0703": (90.0, 70.0, 86.0),
         "NL-0704": (68.0, 55.0, math.nan)}


def _panel(current=""):
    cells = tuple(CellLine(c, "", v) for c, v in RATES.items())
    values = np.array(list(RATES.values()))
    n = np.sum(np.isfinite(values), axis=0)
    mean = np.nanmean(values, axis=0)
    sem = np.array([scipy.stats.sem(values[np.isfinite(values[:, j]), j]) for j in range(3)])
    return ComparisonPanel("rate_bpm", CONDITIONS, cells, (GroupMean("", tuple(mean), tuple(sem), tuple(int(k) for k in n)),),
                           current_cell=current), mean, sem


@pytest.fixture
def figure(qtbot):
    fig = ComparisonFigure(columns=2)
    qtbot.addWidget(fig)
    fig.resize(700, 420)
    fig.show()
    return fig


def test_lines_means_and_error_bars_are_drawn_where_the_numbers_say(figure):
    panel, mean, sem = _panel(current="NL-0702")
    figure.draw([panel, ComparisonPanel("apd90_ms", CONDITIONS)])
    drawn = figure.drawn["rate_bpm"]
    assert np.allclose(drawn["cells"]["NL-0701"], RATES["NL-0701"])
    assert np.isnan(drawn["cells"]["NL-0704"][2])  # a missing condition stays a gap
    _x, m, s, n = drawn["means"][""]
    assert np.allclose(m, mean) and np.allclose(s, sem) and n == (4, 4, 3)
    # The error bars are the curve of line pairs from mean - SEM to mean + SEM at each condition.
    plot = figure.plots["rate_bpm"]
    bars = [c for c in plot.listDataItems() if getattr(c, "opts", {}).get("connect") == "pairs"]
    assert len(bars) == 1
    _xs, ys = bars[0].getData()
    assert np.allclose(ys[0::6], mean - sem) and np.allclose(ys[1::6], mean + sem)  # numpy / scipy.stats.sem above
    assert list(figure.plots) == ["rate_bpm", "apd90_ms"]
    texts = figure.legend_texts()
    assert texts[0] == "mean ± SEM (n = 3–4 cells)" and "NL-0702 (under review)" in texts


def _rate_panel(rates):
    """The app's rate panel built from a cell x condition table of these rates (NaN: absent)."""
    from analysis.study import StudyEntry, StudyLayout
    from app.gui.window.study_data import StudyTables, comparison_panels

    table = {"cell": [], "condition": [], "group": [], "rate_mean_bpm": []}
    for cell, values in rates.items():
        for cond, v in zip(CONDITIONS, values):
            if math.isfinite(v):
                table["cell"].append(cell)
                table["condition"].append(cond)
                table["group"].append("")
                table["rate_mean_bpm"].append(v)
    layout = StudyLayout("/study", tuple(StudyEntry(f"{c}/{k}.abf", c, k) for c, k in zip(table["cell"], table["condition"])),
                         CONDITIONS)
    tables = StudyTables(layout, table, compare(table, conditions=CONDITIONS, parameters=["rate"]), {})
    (panel,) = comparison_panels(tables, ["rate_bpm"])
    return panel


def test_means_from_the_cores_comparison_match_numpy_and_scipy(figure):
    panel = _rate_panel(RATES)
    (group,) = panel.groups
    washout = np.array([v[2] for v in RATES.values() if math.isfinite(v[2])])
    drug = np.array([v[1] for v in RATES.values()])
    assert group.mean[1] == pytest.approx(drug.mean()) and group.sem[1] == pytest.approx(scipy.stats.sem(drug))
    assert group.mean[2] == pytest.approx(washout.mean()) and group.sem[2] == pytest.approx(scipy.stats.sem(washout))
    assert group.n == (4, 4, 3)
    assert {c.cell: c.values for c in panel.cells}["NL-0704"][:2] == RATES["NL-0704"][:2]
    # The panel's tooltip gives each condition's paired tests: scipy.stats on the same pairs.
    washout_pairs = [(v[0], v[2]) for v in RATES.values() if math.isfinite(v[2])]
    p = scipy.stats.ttest_rel([w for _b, w in washout_pairs], [b for b, _w in washout_pairs]).pvalue
    assert f"washout vs baseline: change {np.mean([w - b for b, w in washout_pairs]):.3g} bpm" in panel.notes[1]
    assert f"n = 3; paired t p = {p:.2g}" in panel.notes[1]


def test_exports_png_and_svg_with_every_item(figure, tmp_path):
    panel, _m, _s = _panel(current="NL-0701")
    figure.draw([panel])
    assert unknown_items(figure) == []
    png = export_figure(figure, tmp_path / "comparison.png", width_px=1200)
    assert QtGui.QImage(png).width() == 1200
    svg = (tmp_path / "comparison.svg")
    export_figure(figure, svg)
    text = svg.read_text(encoding="utf-8")
    assert text.startswith("<?xml") or "<svg" in text[:400]
    assert "washout" in text and "UP-113" in text


def test_a_cell_with_only_a_baseline_counts_in_the_baseline_mean_as_in_the_exported_figure(figure):
    # The app's panel and the exported SVG draw the same means: over the cells that have each
    # condition (numpy and scipy.stats.sem as the reference), not only over the compared pairs.
    rates = {**RATES, "NL-0709": (71.0, math.nan, math.nan)}
    panel = _rate_panel(rates)
    (group,) = panel.groups
    baseline = np.array([v[0] for v in rates.values()])
    assert group.n == (5, 4, 3)
    assert group.mean[0] == pytest.approx(baseline.mean()) and group.sem[0] == pytest.approx(scipy.stats.sem(baseline))
    assert "NL-0709" in {c.cell for c in panel.cells}
