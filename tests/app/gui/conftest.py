"""Recordings shared by the window's tests: one synthetic nodal-like cell, as ABF, analysed once."""

from __future__ import annotations

import pytest

from analysis import open_recording
from analysis.pipeline import analyze
from analysis.synthetic import preset, synthesize
from analysis.synthetic_io import write_abf


@pytest.fixture(scope="module")
def cell_abf(tmp_path_factory):
    """Two 8 s sweeps of a synthetic nodal-like cell (analysis.synthetic), as ABF."""
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
