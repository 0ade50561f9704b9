"""Recordings shared by the window's tests: one synthetic nodal-like cell, as ABF, analysed once,
and windows opened on it."""

from __future__ import annotations

import pytest

from analysis import open_recording
from analysis.pipeline import analyze
from analysis.synthetic import preset, synthesize
from analysis.synthetic import write_abf


@pytest.fixture(scope="module")
def cell_abf(tmp_path_factory):
    """Two 8 s sweeps of a synthetic nodal-like cell (analysis.synthetic._cells), as ABF."""
    syn = synthesize(preset("nodal-like"), duration_s=8.0, fs_hz=4_000.0, seed=11, noise_mV=0.2,
                     n_sweeps=2, sweep_gap_s=1.0)
    path = tmp_path_factory.mktemp("rec") / "cell-q7.abf"
    write_abf(syn.recording, path)
    return path


@pytest.fixture(scope="module")
def cell_result(cell_abf):
    """The core's analysis of the file, made once for the module."""
    rec = open_recording(cell_abf)
    return rec, analyze(rec, label=cell_abf.name)


@pytest.fixture
def cell_window(qtbot, cell_abf, cell_result):
    """``cell_window(size=None)``: a new window with the module's cell open and its analysis
    settled (given the module's result, so nothing is analysed again); ``size`` shows it at that
    size (for tests that look at what is drawn)."""
    from app.gui.window.main_window import MainWindow

    def make(*, size: tuple[int, int] | None = None):
        w = MainWindow(interactive=False)
        qtbot.addWidget(w)
        if size is not None:
            w.resize(*size)
            w.show()
        rec, result = cell_result
        w.open_recording_file(rec, origin=str(cell_abf), result=result)
        assert w.settle(60_000)
        return w

    return make
