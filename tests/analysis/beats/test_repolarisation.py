"""APD level crossings of many beats at once against the formula of Gaussian beats.

A Gaussian beat ``base + A exp(-((t - c) / w)^2)`` falls to ``peak - x/100 A`` at
``c + w sqrt(-ln(1 - x/100))`` (beat_traces: from the formula, no other source).
"""

from __future__ import annotations

import math

import numpy as np
import pytest

from analysis.beats import first_crossings, first_crossings_one, refine_crossing_one, refine_crossings
from tests.analysis.beat_traces import gaussian_train

FS = 20_000.0
W = 0.025
PERCENTS = (20.0, 50.0, 90.0)


def _beats(noise_mV: float = 0.0):
    v, centres = gaussian_train(FS, 4.0, cl_s=0.5)
    v = v + noise_mV * np.random.default_rng(4).normal(size=v.size)
    ip = np.rint(centres * FS).astype(np.int64)
    limit = np.append(ip[1:], v.size)
    levels = np.array([[20.0 - p / 100.0 * 80.0 for p in PERCENTS]] * ip.size)
    truth = np.array([[c + W * math.sqrt(-math.log(1 - p / 100.0)) for p in PERCENTS] for c in centres])
    return v, ip, limit, levels, truth


def test_first_crossings_of_many_beats_are_the_formulas_and_the_one_by_one_search():
    v, ip, limit, levels, truth = _beats()
    w_rep = 21  # 1 ms at 20 kHz
    got = first_crossings(v, FS, w_rep, ip, limit, levels)
    # the Gaussian's own crossing times (formula), to a few microseconds of smoothing and
    # interpolation
    np.testing.assert_allclose(got / FS, truth, atol=5e-6)
    for b in range(ip.size):
        # the same crossings as one beat at a time (the smoothing's running sums agree with its
        # convolution to ~1e-7 mV)
        one = first_crossings_one(v, w_rep, int(ip[b]), int(limit[b]), list(levels[b]))
        np.testing.assert_allclose(got[b], one, rtol=0, atol=1e-5)


def test_refined_crossings_of_many_beats_follow_the_formula_under_noise():
    v, ip, limit, levels, truth = _beats(noise_mV=0.3)
    first = first_crossings(v, FS, 21, ip, limit, levels)
    m = len(PERCENTS)
    amp = np.full(ip.size * m, 80.0)
    got = refine_crossings(v, FS, first.ravel(), levels.ravel(), amp, np.repeat(ip, m), np.repeat(limit, m))
    # within 0.25 ms of the formula under 0.3 mV of noise (the noisy APD tolerance is 2 ms)
    np.testing.assert_allclose(got.reshape(first.shape) / FS, truth, atol=2.5e-4)
    one = [refine_crossing_one(v, FS, x, lv, 80.0, int(a), int(b))
           for x, lv, a, b in zip(first.ravel(), levels.ravel(), np.repeat(ip, m), np.repeat(limit, m))]
    np.testing.assert_allclose(got, one, rtol=0, atol=1e-6)


def test_a_level_never_reached_is_nan_and_a_nan_level_is_skipped():
    v, ip, limit, levels, _ = _beats()
    levels[:, 2] = -75.0  # below the diastolic level: never crossed
    levels[0, 0] = np.nan
    got = first_crossings(v, FS, 21, ip, limit, levels)
    assert np.isnan(got[:, 2]).all() and np.isnan(got[0, 0]) and np.isfinite(got[0, 1])
    assert refine_crossings(v, FS, got[:, 2], levels[:, 2], np.full(ip.size, 80.0), ip, limit).tolist() == \
        pytest.approx([float("nan")] * ip.size, nan_ok=True)


def test_the_peak_and_mdp_of_many_beats_are_the_formulas_and_the_one_by_one_rules():
    # Gaussian beats: peak base + A at the centre (formula); the diastole is flat at the base.
    from analysis.beats._markers import _Context
    from analysis.settings import MeasurementSettings

    v, ip, limit, _, _ = _beats(noise_mV=0.2)
    ctx = _Context(v, FS, MeasurementSettings(), 0.2)
    g = ip - int(W / np.sqrt(2) * FS)
    end = np.append(ip[1:] - int(0.2 * FS), v.size)
    w = np.full(ip.size, 21)
    idx, val = ctx.peaks(g, end, ip, w)
    np.testing.assert_allclose(val, 20.0, atol=0.1)  # base + A, within a third of the noise
    np.testing.assert_allclose(idx / FS, ip / FS, atol=5e-4)  # a broad top under noise: within 2 % of its width
    for b in range(ip.size):
        one = ctx.peak(int(g[b]), int(end[b]), int(ip[b]), 21)
        assert one == pytest.approx((idx[b], val[b]), abs=1e-9)
    prev = np.concatenate(([-1], g[:-1]))
    i_mdp, mdp = ctx.mdps(prev, g)
    assert np.isnan(mdp[0]) and np.all(np.abs(mdp[1:] + 60.0) < 0.1)  # the flat base, -60 mV
    for b in range(1, ip.size):
        assert ctx.mdp(int(prev[b]), int(g[b])) == pytest.approx((i_mdp[b], mdp[b]), abs=1e-9)


def test_feet_and_takeoffs_of_many_beats_are_the_one_by_one_search():
    # The take-off of a Gaussian beat is where its dV/dt rises through 0.5 V/s (MEASUREMENTS.md);
    # all beats at once must find what the beat-by-beat search finds.
    from analysis.beats._markers import _Context
    from analysis.settings import MeasurementSettings

    v, ip, _, _, _ = _beats(noise_mV=0.1)
    ctx = _Context(v, FS, MeasurementSettings(), 0.1)
    g = ip - int(W / np.sqrt(2) * FS)
    prev = np.concatenate(([-1], g[:-1]))
    i_mdp, _ = ctx.mdps(prev, g)
    ctx.find_feet(g, prev, i_mdp)
    assert ctx.solved[1:].all() and ctx.solved_top[1:].all()
    for b in range(1, ip.size):
        lo = int(i_mdp[b])
        foot = ctx.last_below(0.1 * ctx.d_here[b], lo, int(g[b]))
        top = ctx.last_below(0.5, int(np.ceil(i_mdp[b])), int(g[b]))
        assert ctx.feet[b] == pytest.approx(foot, abs=1e-6) and ctx.takeoffs[b] == pytest.approx(top, abs=1e-6)
