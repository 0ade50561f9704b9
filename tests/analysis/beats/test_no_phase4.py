"""Beats without diastolic depolarisation: flagged ``no_phase4``, with no TOP, DDR or DDR100.

A paced or evoked action potential, a quiescent cell driven by a stimulus, or a neuron-like
spike rises from a flat rest: there is no phase 4 (MEASUREMENTS.md: the diastolic
depolarisation rate is the phase-4 slope), so a take-off potential and a DDR would be numbers
without meaning. Spontaneous cells keep theirs.
"""

from __future__ import annotations

import numpy as np
import pytest

from analysis import analyze
from analysis.recording import Recording
from analysis.synthetic import preset, synthesize


def _flags(beats) -> list[set[str]]:
    return [set(str(f).split(";")) - {""} for f in beats["flags"]]


def _neuron_like(fs_hz: float = 20_000.0, noise_mV: float = 0.3, seed: int = 3) -> np.ndarray:
    """Spikes from a flat rest at -70 mV: a logistic rise of 100 mV (0.5 ms) and an exponential
    return to rest (5 ms), every 400 ms, no afterhyperpolarisation (hand-built; its flat rest
    holds no depolarisation by construction)."""
    t = np.arange(int(4.0 * fs_hz)) / fs_hz
    v = np.full(t.size, -70.0)
    for t0 in np.arange(0.2, 3.9, 0.4):
        rise = 1.0 / (1.0 + np.exp(np.clip(-(t - t0) / 0.5e-3, -60.0, 60.0)))
        fall = np.where(t > t0, np.exp(-np.clip(t - t0, 0.0, None) / 5e-3), 1.0)
        v += 100.0 * rise * fall
    return v + np.random.default_rng(seed).normal(0.0, noise_mV, t.size)


@pytest.mark.parametrize("noise_mV", [0.0, 0.3])
def test_a_paced_like_beat_from_a_flat_rest_is_flagged_and_has_no_ddr_or_top(noise_mV):
    # synthetic ventricular-like cell whose take-off lies 0.3 mV above its MDP: no phase 4
    cell = preset("ventricular-like", top_mV=-84.7, cl_ms=1000.0)
    syn = synthesize(cell, duration_s=6.0, fs_hz=20_000.0, noise_mV=noise_mV, hum_mV=noise_mV, seed=4)
    beats = analyze(syn.recording).beats
    later = slice(1, None)  # the first beat has no diastole at all
    assert len(beats) == len(syn.truth.beats) >= 5
    assert all("no_phase4" in f for f in _flags(beats)[later])
    for name in ("top_mV", "ddr_mV_per_s", "ddr100_mV_per_s"):
        assert np.all(np.isnan(np.asarray(beats[name])[later]))
    # MDP, dV/dt max, APA and APDs are still measured (exact waveform: MDP -85 mV, 260 V/s)
    assert np.asarray(beats["mdp_mV"])[later] == pytest.approx(-85.0, abs=0.5)
    assert np.asarray(beats["dvdt_max_V_per_s"])[later] == pytest.approx(260.0, rel=0.05)


def test_a_neuron_like_spike_is_flagged_and_has_no_ddr_or_top():
    beats = analyze(Recording.from_array(_neuron_like(), 20_000.0)).beats
    assert len(beats) >= 8
    later = slice(1, None)
    assert all("no_phase4" in f for f in _flags(beats)[later])
    assert np.all(np.isnan(np.asarray(beats["top_mV"])[later]))
    assert np.all(np.isnan(np.asarray(beats["ddr_mV_per_s"])[later]))


@pytest.mark.parametrize("name", ["nodal-like", "atrial-like", "ventricular-like"])
def test_spontaneous_cells_keep_their_phase_4(name):
    syn = synthesize(preset(name), duration_s=6.0, fs_hz=20_000.0, noise_mV=0.3, hum_mV=0.3, seed=5)
    beats = analyze(syn.recording).beats
    assert not any("no_phase4" in f for f in _flags(beats))
    # TOP within 2 mV of the exact one (the acceptance list's noisy tolerance)
    got, want = np.asarray(beats["top_mV"])[1:], np.asarray(syn.truth.beats["top_mV"])[1:]
    assert np.max(np.abs(got - want)) <= 2.0
