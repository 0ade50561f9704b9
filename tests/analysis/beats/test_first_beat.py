"""The first beat of each sweep of an episodic recording, measured from the diastole before it.

Source of the truth: synthetic nodal-like cells (analysis.synthetic) whose every parameter is
exact on the closed-form waveform, MDP -61.7 mV and APD90 165 ms by construction (Verkerk et al.
2007 and Severi et al. 2012 values, the preset's sources). Tolerances: the acceptance list's
(MDP 0.5 mV, TOP 2 mV, APD 1 ms clean; twice these noisy).
"""

from __future__ import annotations

import numpy as np
import pytest

from analysis import analyze
from analysis.synthetic import preset, synthesize


def _episodic(noise_mV: float):
    # Sweep 0 starts 5 % into a diastole (its minimum is not on record); the 154 ms gap makes
    # sweep 1 start 100 ms after an upstroke, during the repolarisation.
    return synthesize(preset("nodal-like", cl_sd_ms=0.0), duration_s=3.0, fs_hz=10_000.0, n_sweeps=2,
                      sweep_gap_s=0.154, start_phase=0.05, noise_mV=noise_mV, hum_mV=noise_mV, seed=1)


@pytest.mark.parametrize("noise_mV, scale", [(0.0, 1.0), (0.3, 2.0)])
def test_a_sweeps_first_beat_is_measured_when_its_diastole_is_on_record(noise_mV, scale):
    syn = _episodic(noise_mV)
    beats, truth = analyze(syn.recording).beats, syn.truth.beats
    assert len(beats) == len(truth)
    first = np.flatnonzero((np.asarray(beats["beat"]) == 0) & (np.asarray(beats["sweep"]) == 1))[0]
    # exact waveform: the whole diastole before sweep 1's first upstroke is recorded
    assert "no_diastole" not in str(beats["flags"][first])
    assert str(truth["flags"][first]) == ""
    assert float(beats["mdp_mV"][first]) == pytest.approx(-61.7, abs=0.5 * scale)
    assert float(beats["top_mV"][first]) == pytest.approx(float(truth["top_mV"][first]), abs=2.0 * scale)
    assert float(beats["apd90_ms"][first]) == pytest.approx(165.0, abs=1.0 * scale)
    assert float(beats["apa_mV"][first]) == pytest.approx(float(truth["apa_mV"][first]), abs=1.0 * scale)
    # no previous beat in the sweep: no cycle length (MEASUREMENTS.md)
    assert np.isnan(float(beats["cl_ms"][first]))


def test_a_first_beat_whose_minimum_precedes_the_sweep_keeps_no_diastole():
    syn = _episodic(0.0)
    beats, truth = analyze(syn.recording).beats, syn.truth.beats
    # sweep 0 starts after its first beat's MDP: the minimum is not on record (exact waveform)
    assert "no_diastole" in str(beats["flags"][0]).split(";")
    assert "no_diastole" in str(truth["flags"][0]).split(";")
    for name in ("mdp_mV", "top_mV", "apd90_ms", "apa_mV"):
        assert np.isnan(float(beats[name][0]))
