"""The study's comparison figure: one panel per parameter, a line per cell, the mean +- SEM on top."""

from __future__ import annotations

import re

import numpy as np
import scipy.stats

from app.svg.study import COMPARISON_PANELS, comparison_svg, group_values

TABLE = {
    "cell": ["A", "A", "A", "B", "B", "C", "C", "D", "D"],
    "condition": ["base", "drug", "wash", "base", "drug", "base", "drug", "base", "drug"],
    "group": ["x", "x", "x", "x", "x", "x", "x", "y", "y"],
    "cl_mean_ms": [400.0, 520.0, 430.0, 450.0, 600.0, 500.0, np.nan, 410.0, 415.0],
}


def test_group_values_are_cells_by_conditions():
    cells, values = group_values(TABLE, "cl_mean_ms", ["base", "drug", "wash"], "x")
    assert cells == ["A", "B", "C"]
    np.testing.assert_array_equal(values, [[400, 520, 430], [450, 600, np.nan], [500, np.nan, np.nan]])


def test_the_mean_and_its_sem_are_drawn_where_they_are():
    panel = [("cl_mean_ms", "CL (ms)")]
    svg = comparison_svg(TABLE, conditions=["base", "drug", "wash"], group="x", panels=panel)
    assert svg == comparison_svg(TABLE, conditions=["base", "drug", "wash"], group="x", panels=panel)
    assert svg.count("<polyline") == 3  # cells A and B have two values or more, plus the mean line
    assert ">n=3<" in svg and ">n=2<" in svg and ">n=1<" in svg
    # The axis ticks give the scale: map the baseline mean and SEM back to values.
    ticks = [(float(y), float(v)) for y, v in re.findall(r'<text x="[\d.]+" y="([\d.]+)" text-anchor="end">([-\d.]+)</text>', svg)]
    (y0, v0), (y1, v1) = ticks[0], ticks[-1]

    def value(y):  # tick labels' baselines sit 4 px below their tick
        return v0 + (y - y0 + 4) * (v1 - v0) / (y1 - y0)

    base = np.array([400.0, 450.0, 500.0])
    sem = scipy.stats.sem(base)  # scipy.stats.sem: SD / sqrt(n)
    mean_dots = [float(y) for y in re.findall(r'<circle cx="[\d.]+" cy="([\d.]+)" r="4"', svg)]
    assert abs(value(mean_dots[0]) - base.mean()) < 0.5
    bars = re.findall(r'<line x1="([\d.]+)" y1="([\d.]+)" x2="\1" y2="([\d.]+)" stroke="#1b2a41"', svg)
    lo, hi = sorted((value(float(bars[0][1])), value(float(bars[0][2]))))
    assert abs(lo - (base.mean() - sem)) < 0.5 and abs(hi - (base.mean() + sem)) < 0.5


def test_every_summarised_parameter_has_a_panel_and_empty_conditions_are_left_out():
    svg = comparison_svg(TABLE, conditions=["base", "drug", "wash"], group="y")
    assert ">wash<" not in svg and ">base<" in svg  # group y has no washout
    assert len(COMPARISON_PANELS) >= 10 and "CL" in COMPARISON_PANELS[0][1]
