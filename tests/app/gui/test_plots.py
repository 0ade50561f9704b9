"""Figures draw the core's figure data per condition and export to PNG and SVG."""

from __future__ import annotations

import numpy as np
import pytest

pytest.importorskip("pytestqt")

from PySide6 import QtGui  # noqa: E402

from analysis import plotdata  # noqa: E402
from app.gui.plots import FigureInput, FiguresPanel, export_figure  # noqa: E402

from .handmade import handmade  # noqa: E402


@pytest.fixture
def panel(qtbot):
    rec, beats = handmade(n_sweeps=2, seconds=16.0)
    rng = np.random.default_rng(0)
    n = len(beats)
    cond = np.where(beats["sweep"] == 0, "baseline", "drug")
    cl = np.where(np.isfinite(beats["cl_ms"]), 800.0 + rng.normal(0, 20, n), np.nan)
    ddr = np.where(np.isfinite(cl), 60.0 - 0.04 * cl + rng.normal(0, 1, n), np.nan)
    beats = beats.with_columns(condition=cond, cl_ms=cl, ddr_mV_per_s=ddr)
    w = FiguresPanel()
    qtbot.addWidget(w)
    w.resize(900, 600)
    w.show()
    data = FigureInput(rec, beats, groups=[("baseline", "#3a86ff"), ("drug", "#ef476f")],
                       spans=[("baseline", 0.0, 16.0, "#3a86ff"), ("drug", 16.0, 32.0, "#ef476f")], current_row=3)
    w.set_input(data)
    return w, data


def test_fits_and_pairs_are_the_cores(panel):
    w, data = panel
    w.redraw()
    ddr = w.figures["ddr_cl"]
    rows = np.flatnonzero(data.beats["condition"] == "drug")
    ref = plotdata.fit_line(data.beats["cl_ms"][rows], data.beats["ddr_mV_per_s"][rows])
    assert ddr.fits["drug"] == ref  # the line drawn is the core's fit
    x, y = w.figures["poincare"].pairs["baseline"]
    base = np.flatnonzero(data.beats["condition"] == "baseline")
    assert np.array_equal(x, data.beats["cl_ms"][base][1:-1]) and np.array_equal(y, data.beats["cl_ms"][base][2:])
    avg = w.figures["aligned"].averages["baseline"]
    assert np.allclose(avg.mean, np.nanmean(avg.traces, axis=0))  # numpy reference


def test_export_png_and_svg(panel, tmp_path):
    w, _ = panel
    png = export_figure(w.figures["time_course"], tmp_path / "tc.png", width_px=1200)
    assert QtGui.QImage(png).width() == 1200
    svg = export_figure(w.figures["ddr_cl"], tmp_path / "ddr.svg")
    assert "<svg" in open(svg, encoding="utf-8").read(2000)
    paths = w.export_all(tmp_path / "all", fmt="png")
    assert len(paths) == 5 and all(QtGui.QImage(p).width() == 1600 for p in paths)


def test_only_the_figure_shown_is_drawn_until_another_tab_opens(panel):
    w, data = panel
    w.set_input(data)
    assert w._dirty == {"phase_plane", "time_course", "poincare", "ddr_cl"}  # "aligned" is the tab shown
    w.tabs.setCurrentIndex(4)
    assert "ddr_cl" not in w._dirty and w.figures["ddr_cl"].fits
