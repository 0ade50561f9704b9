"""The two-cursor readout against numpy and scipy over the same samples."""

from __future__ import annotations

import numpy as np
import pytest
from scipy import stats

from analysis.readouts import readout, readout_samples
from analysis.readouts._cursors import sample_span
from analysis.recording import Recording


def _noisy_ramp(fs_hz=10_000.0, seconds=2.0, seed=3):
    rng = np.random.default_rng(seed)
    t = np.arange(int(fs_hz * seconds)) / fs_hz
    return -62.0 + 35.0 * t + 4.0 * np.sin(2 * np.pi * 3.0 * t) + rng.normal(0, 0.3, t.size)


def test_values_equal_numpy_over_the_same_samples():
    fs = 10_000.0
    v = _noisy_ramp(fs)
    t0, t1 = 0.31234, 1.20071
    r = readout_samples(v, fs, t1, t0)  # cursors given right to left
    i0, i1 = int(np.ceil(t0 * fs)), int(np.floor(t1 * fs))
    seg = v[i0 : i1 + 1]
    t = np.arange(i0, i1 + 1) / fs
    assert (r.first_sample, r.last_sample, r.n_samples) == (i0, i1, seg.size)
    assert r.delta_t_ms == pytest.approx((t1 - t0) * 1e3)  # definition, common practice
    assert r.mean_value == pytest.approx(np.mean(seg), rel=1e-12)  # numpy reference
    assert r.min_value == np.min(seg) and r.max_value == np.max(seg)  # numpy reference
    assert r.delta_value == pytest.approx(seg[-1] - seg[0], rel=1e-12)  # numpy reference
    assert r.slope_per_s == pytest.approx(stats.linregress(t, seg).slope, rel=1e-9)  # scipy reference


def test_exact_line_and_cursor_on_a_sample():
    v = np.linspace(-60.0, -40.0, 1001)  # 20 mV/s at 1 kHz, hand-computed
    r = readout_samples(v, 1000.0, 0.25, 0.75)
    assert (r.first_sample, r.last_sample) == (250, 750)  # cursors exactly on samples keep them
    assert r.value0 == pytest.approx(-55.0) and r.value1 == pytest.approx(-45.0)  # by hand
    assert r.slope_per_s == pytest.approx(20.0)  # by hand


def test_beats_spanned_by_upstroke_time():
    v = np.zeros(5000)
    ups = np.array([0.1, 0.9, 1.7, 2.5, 3.3])
    r = readout_samples(v, 1000.0, 0.8, 2.6, upstrokes_s=ups)
    assert r.beats == (1, 2, 3) and r.n_beats == 3  # by hand


def test_no_sample_between_cursors_gives_nan_not_zero():
    r = readout_samples(np.arange(100.0), 1000.0, 0.0101, 0.0109)
    assert r.n_samples == 0 and np.isnan(r.mean_value) and np.isnan(r.slope_per_s)


def test_cursors_outside_the_sweep_are_clipped():
    assert sample_span(-1.0, 99.0, 1000.0, 500) == (0, 499)


def test_recording_readout_reads_only_the_span_and_matches_the_whole_sweep():
    fs = 5000.0
    v = _noisy_ramp(fs, seconds=3.0, seed=8)
    rec = Recording.from_array(np.stack([v, v + 1.0]), fs)  # two sweeps
    whole = readout_samples(v + 1.0, fs, 0.5, 2.25)
    part = readout(rec, 0.5, 2.25, sweep=1)
    assert part == whole  # same samples, same numbers
    assert part.units == "mV"
