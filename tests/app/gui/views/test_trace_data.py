"""Drawable levels of a sweep: the envelope is numpy's min/max per bin, views pick the right level."""

from __future__ import annotations

import numpy as np

from analysis.recording import Recording
from app.gui.views.trace_data import BIN_SAMPLES, SweepLevels, envelope_of, recording_envelope


def _rec(n=300_000, fs=10_000.0, seed=2):
    rng = np.random.default_rng(seed)
    return Recording.from_array(np.cumsum(rng.normal(0, 0.5, n)), fs)


def test_envelope_is_numpy_min_max_per_bin():
    rec = _rec()
    lv = SweepLevels(rec, 0, 0)
    assert lv.build_envelope()
    lo, hi = lv._levels[0]
    v = rec.sweep(0)
    full = len(v) // BIN_SAMPLES
    assert np.array_equal(lo[:full], v[: full * BIN_SAMPLES].reshape(full, -1).min(axis=1))  # numpy reference
    assert np.array_equal(hi[:full], v[: full * BIN_SAMPLES].reshape(full, -1).max(axis=1))  # numpy reference
    # every coarser level still bounds the samples (min of mins, max of maxes)
    for lo_k, hi_k in lv._levels:
        assert lo_k.min() == v.min() and hi_k.max() == v.max()


def test_short_view_is_raw_samples_with_a_margin_and_long_view_is_an_envelope():
    rec = _rec()
    lv = SweepLevels(rec, 0, 0, raw_limit=50_000, raw_limit_unbuilt=100_000)
    raw = lv.for_view(10.0, 12.0, 800)
    assert raw.bin_samples == 1
    # view = samples 100000..120000 (20001 of them), plus one view width each side, by hand
    assert raw.first_sample == 79_999 and raw.stop_sample == 140_002
    assert np.array_equal(raw.y, rec.sweep(0, start=79_999, stop=140_002))
    assert lv.for_view(0.0, 8.0, 800).bin_samples == 1  # exact samples while the envelope is built
    preview = lv.for_view(0.0, 30.0, 800)
    assert preview.bin_samples == -1  # envelope not built yet: a preview, not a stall
    lv.build_envelope()
    env = lv.for_view(0.0, 30.0, 800)
    assert env.bin_samples >= BIN_SAMPLES
    v = rec.sweep(0)
    assert env.y.max() == v.max() and env.y.min() == v.min()  # the envelope keeps every extreme
    assert not lv.needs_reload(env, 1.0, 29.0, 800)
    assert lv.needs_reload(env, 10.0, 12.0, 800)  # zoomed in: back to raw samples


def test_envelope_of_a_short_tail_and_the_recording_envelope():
    lo, hi = envelope_of(np.array([3.0, 1.0, 2.0, 9.0, -4.0]), 2)
    assert lo.tolist() == [1.0, 2.0, -4.0] and hi.tolist() == [3.0, 9.0, -4.0]  # by hand
    rec = Recording.from_array(np.stack([np.zeros(2000), np.ones(2000)]), 1000.0)
    levels = [SweepLevels(rec, i, 0) for i in range(2)]
    for lv in levels:
        lv.build_envelope()
    x, y = recording_envelope(levels, list(rec.sweep_starts_s), n_points=40)
    assert np.isnan(y).sum() == 2  # one break after each sweep
    assert x[np.isfinite(y)].max() <= 4.0 and np.nanmax(y) == 1.0
