"""The ensemble beat resists a single outlying sample: a sample-wise median, not a mean.

A planted electrical spike (analysis.synthetic._events's Artefact, 60 mV for 10 samples) in one
diastole of a noisy nodal-like cell; the same beats are averaged from the recording with and
without it, so any difference is the spike's.
"""

from __future__ import annotations

import warnings

import numpy as np
import pytest

from analysis import analyze
from analysis.readouts import aligned_beats
from analysis.stats import GROUP_BEATS, RobustAverage, ensemble_average
from analysis.synthetic import Artefact, preset, synthesize

FS = 10_000.0
SPIKE_MV = 60.0


@pytest.fixture(scope="module")
def pair():
    clean = synthesize(preset("nodal-like"), duration_s=12.0, fs_hz=FS, seed=3, noise_mV=0.3)
    b = clean.truth.beats
    t = 0.5 * (b["t_mdp_s"][6] + b["t_top_s"][6])  # mid-diastole before the 7th upstroke (synthetic truth)
    spiky = synthesize(preset("nodal-like"), duration_s=12.0, fs_hz=FS, seed=3, noise_mV=0.3,
                       artefacts=[Artefact(t, SPIKE_MV, 10)])
    # The two recordings differ by the spike alone (synthetic truth).
    diff = spiky.recording.sweep(0) - clean.recording.sweep(0)
    assert np.count_nonzero(diff) == 10 and np.all(diff[diff != 0] == SPIKE_MV)
    beats = analyze(clean.recording).beats
    rows = np.flatnonzero(np.isfinite(np.asarray(beats["cl_ms"], float)))
    return clean, spiky, beats, rows


def test_a_diastolic_spike_does_not_show_in_the_ensemble_beat(pair):
    clean, spiky, beats, rows = pair
    e0 = ensemble_average(beats, rows, lambda s: clean.recording.sweep(s), FS)
    e1 = ensemble_average(beats, rows, lambda s: spiky.recording.sweep(s), FS)
    assert e0.n_beats == e1.n_beats == 13
    # A mean would carry the spike as 60 mV / 13 beats = 4.6 mV (by hand); the median moves by
    # at most the spread of the other beats at that instant, here under 0.2 mV (0.3 mV rms noise).
    assert np.abs(e1.v_mV - e0.v_mV).max() < 0.2


def test_a_diastolic_spike_does_not_show_in_the_aligned_beats(pair):
    clean, spiky, beats, rows = pair
    a0, a1 = aligned_beats(clean.recording, beats, rows), aligned_beats(spiky.recording, beats, rows)
    shift = np.abs(np.nanmean(a1.traces, axis=0) - np.nanmean(a0.traces, axis=0))
    at = int(np.nanargmax(shift))
    n_there = int(np.isfinite(a1.traces[:, at]).sum())  # the beats whose window holds that sample
    assert shift[at] == pytest.approx(SPIKE_MV / n_there, rel=1e-6)  # numpy's mean: the artefact a mean shows
    assert np.nanmax(np.abs(a1.mean - a0.mean)) < 0.5  # the median's: within the noise (0.3 mV rms)


def test_robust_average_is_numpys_median_then_a_weighted_mean_of_group_medians():
    rng = np.random.default_rng(8)
    few = rng.normal(size=(2 * GROUP_BEATS - 1, 50))
    avg = RobustAverage(50)
    for row in few:
        avg.add(row)
    assert np.allclose(avg.result(), np.median(few, axis=0))  # numpy reference
    many = rng.normal(size=(3 * GROUP_BEATS + 10, 50))
    avg = RobustAverage(50)
    for row in many:
        avg.add(row)
    g = GROUP_BEATS
    # Groups of g, g and the last g + 10 (never a group too small to resist a spike).
    ref = (g * np.median(many[:g], axis=0) + g * np.median(many[g:2 * g], axis=0)
           + (g + 10) * np.median(many[2 * g:], axis=0)) / many.shape[0]
    assert np.allclose(avg.result(), ref)  # numpy reference


def test_aligned_beats_of_one_beat_is_that_beat_with_nans_off_the_recording(pair):
    # The beat card's overlay cuts one beat: its "mean" is numpy's nanmedian of that one row,
    # i.e. the row itself, NaN where the window runs off the start of the recording (numpy).
    clean, _spiky, beats, rows = pair
    first = aligned_beats(clean.recording, beats, rows[:1], before_ms=5000.0, after_ms=300.0)
    assert np.isnan(first.traces[0, 0])  # 5 s before the first upstroke is before the recording
    with warnings.catch_warnings():
        warnings.simplefilter("ignore", RuntimeWarning)  # numpy warns of the all-NaN columns
        reference = np.nanmedian(first.traces, axis=0)  # numpy: all-NaN columns give NaN
    np.testing.assert_array_equal(first.mean, reference)
    assert not np.shares_memory(first.mean, first.traces)
