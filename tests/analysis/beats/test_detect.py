"""Beat detection on hand-built traces: slow and fast upstrokes, noise, hum, drift, spikes, DADs.

Truth is the construction of each trace (the beats put in); the disturbances follow
MEASUREMENTS.md's list (noise 0.1-1 mV rms, 50/60 Hz hum, drift, spikes of a few samples, DADs).
"""

from __future__ import annotations

import numpy as np
import pytest

from analysis.beats import detect_beats
from analysis.settings import DetectionSettings
from tests.analysis.beat_traces import gaussian_train, pacemaker_train

FS = 10_000.0


def _matches(found_idx, true_s, fs, tol_s=0.02):
    t = np.asarray(found_idx) / fs
    return len(t) == len(true_s) and np.all(np.abs(t - (np.asarray(true_s))) < tol_s)


def test_slow_nodal_upstrokes_2_V_per_s_50_mV_under_1_mV_noise():
    v, beats = pacemaker_train(FS, 6.0, dvdt_max_V_per_s=2.0, amp_mV=50.0)
    v = v + 1.0 * np.random.default_rng(0).normal(size=v.size)
    det = detect_beats(v, FS)
    assert _matches(det.i_upstroke, beats, FS)  # every beat built in, none extra (construction)


def test_fast_upstrokes_500_V_per_s():
    fs = 50_000.0
    v, beats = pacemaker_train(fs, 3.0, dvdt_max_V_per_s=500.0, amp_mV=120.0, mdp_mV=-85.0, ddr_mV_per_s=20.0, repol_ms=200.0, cl_s=0.6)
    det = detect_beats(v + 0.2 * np.random.default_rng(1).normal(size=v.size), fs)
    assert _matches(det.i_upstroke, beats, fs, tol_s=0.001)  # construction


@pytest.mark.parametrize("mains_hz", [50.0, 60.0])
def test_hum_and_drift_do_not_add_or_lose_beats(mains_hz):
    v, beats = pacemaker_train(FS, 12.0, cl_s=0.5)
    t = np.arange(v.size) / FS
    v = v + 1.0 * np.sin(2 * np.pi * mains_hz * t) + 20.0 * t / t[-1] + 0.5 * np.random.default_rng(2).normal(size=v.size)
    det = detect_beats(v, FS)
    assert _matches(det.i_upstroke, beats, FS)  # construction: 20 mV of drift, 1 mV hum


def test_electrical_spikes_are_artefacts_not_beats():
    v, beats = gaussian_train(FS, 4.0, cl_s=0.8)
    spikes = [int(0.5 * FS), int(1.7 * FS), int(3.3 * FS)]  # in diastole
    for i in spikes:
        v[i:i + 3] += 300.0  # three samples: far beyond any action potential
    wide = int(2.3 * FS)  # in diastole too, 2.5 ms long: longer than a spike (spike_max_ms), narrower
    v[wide:wide + 25] += 300.0  # than a beat (min_width_ms); construction
    det = detect_beats(v, FS)
    assert _matches(det.i_upstroke, beats - 0.025 / np.sqrt(2), FS, tol_s=0.002)
    bridged = det.i_artefact[det.artefact_reason == "spike"]
    assert len(bridged) == 3 and np.all(np.abs(bridged - np.array(spikes)) < 20)
    narrow = det.i_artefact[det.artefact_reason == "narrow"]
    assert len(narrow) == 1 and abs(narrow[0] - wide) < 30


def test_a_spike_just_before_an_upstroke_does_not_hide_the_beat():
    v, beats = gaussian_train(FS, 2.0, cl_s=0.8, first_s=0.4)
    i = int((beats[1] - 0.06) * FS)
    v[i:i + 2] += 400.0
    det = detect_beats(v, FS)
    assert len(det) == len(beats)  # construction


def test_delayed_afterdepolarisations_are_not_beats():
    v, beats = gaussian_train(FS, 4.0, cl_s=1.0)
    t = np.arange(v.size) / FS
    for c in beats[:-1]:
        v += 5.0 * np.exp(-(((t - (c + 0.45)) / 0.04) ** 2))  # a 5 mV DAD in every diastole
    det = detect_beats(v + 0.3 * np.random.default_rng(3).normal(size=v.size), FS)
    assert len(det) == len(beats)  # DADs never fire (MEASUREMENTS.md: 1-5 mV)


def test_a_burst_counts_every_action_potential():
    fs = FS
    t = np.arange(int(3.0 * fs)) / fs
    v = np.full(t.size, -65.0)
    centres = [0.5, 0.75, 1.0, 1.25, 2.5]  # four close beats, then one after a pause
    for c in centres:
        v += 90.0 * np.exp(-(((t - c) / 0.02) ** 2))
    assert len(detect_beats(v, fs)) == 5  # construction


def test_no_beats_in_a_flat_or_noisy_trace():
    rng = np.random.default_rng(4)
    assert len(detect_beats(np.full(50_000, -70.0), FS)) == 0
    assert len(detect_beats(-70 + 1.0 * rng.normal(size=50_000), FS)) == 0  # 1 mV rms noise alone
    assert len(detect_beats(-70 + 3.0 * np.sin(2 * np.pi * 0.5 * np.arange(50_000) / FS), FS)) == 0  # slow wave


def test_minimum_interval_turns_a_close_second_upstroke_into_an_artefact():
    s = DetectionSettings(min_interval_ms=300.0)
    v, beats = gaussian_train(FS, 2.0, cl_s=0.2, width_s=0.01)
    det = detect_beats(v, FS, settings=s)
    assert np.all(np.diff(det.i_upstroke) >= 0.3 * FS)
    assert "too_close" in set(det.artefact_reason)


def test_read_only_input_is_fine():
    v, beats = gaussian_train(FS, 2.0)
    v.setflags(write=False)
    assert len(detect_beats(v, FS)) == len(beats)


def test_chunked_detection_equals_unchunked_with_a_tiny_chunk():
    v, beats = pacemaker_train(FS, 20.0, cl_s=0.37)
    v = v + 0.3 * np.random.default_rng(5).normal(size=v.size)
    whole = detect_beats(v, FS, settings=DetectionSettings(chunk_s=3600.0, level_window_s=0.5, chunk_overlap_s=1.0))
    tiny = detect_beats(v, FS, settings=DetectionSettings(chunk_s=0.5, level_window_s=0.5, chunk_overlap_s=1.0))
    assert len(whole) == len(beats)  # construction
    np.testing.assert_array_equal(tiny.i_upstroke, whole.i_upstroke)  # chunk edges count each beat once


def test_a_beat_exactly_on_a_chunk_edge_is_counted_once():
    s = DetectionSettings(chunk_s=1.0, level_window_s=0.5, chunk_overlap_s=1.0)
    for first in (0.995, 1.0, 1.005):  # the upstroke straddles the edge at 1 s
        v, beats = gaussian_train(FS, 5.0, cl_s=1.0, first_s=first)
        det = detect_beats(v, FS, settings=s)
        assert len(det) == len(beats), first


# -- short electrical spikes riding on beats (find_spikes, bridge_spans) ----------------------------
def test_spikes_of_a_few_samples_are_found_up_and_down_with_their_guards():
    from analysis.beats import bridge_spans, find_spikes

    fs = 50_000.0
    v, _ = pacemaker_train(fs, 2.0, dvdt_max_V_per_s=300.0, amp_mV=120.0, mdp_mV=-85.0, ddr_mV_per_s=20.0,
                           repol_ms=200.0, cl_s=0.6)
    clean = v.copy()
    plateau, diastole = int(0.35 * fs), int(0.75 * fs)  # on the plateau, in the diastole (construction)
    v[plateau:plateau + 3] += 40.0
    v[diastole:diastole + 5] -= 25.0
    spans = find_spikes(v, fs, noise_mV=0.0)
    guard = round(DetectionSettings().spike_guard_ms * 1e-3 * fs)
    # the spikes put in, widened by the guard on each side (construction)
    assert spans.tolist() == [[plateau - guard, plateau + 3 + guard], [diastole - guard, diastole + 5 + guard]]
    bridged = bridge_spans(v, spans)
    # the straight line across each span stays within the trace's own change over it (construction)
    for a, b in spans:
        assert np.max(np.abs(bridged[a:b] - clean[a:b])) < np.ptp(clean[a - 1:b + 1]) + 1e-9
    assert np.array_equal(bridged[: spans[0, 0]], v[: spans[0, 0]])


@pytest.mark.parametrize("fs", [1000.0, 5000.0, 10_000.0, 50_000.0])
def test_action_potentials_are_never_spikes_at_any_sampling_rate(fs):
    from analysis.beats import find_spikes

    # Fast (400 V/s) and slow upstrokes, sharp peaks at 1 kHz: none comes back to its diastolic
    # level within a millisecond (common practice, no source: APs last tens of ms or more).
    fast, _ = pacemaker_train(fs, 3.0, dvdt_max_V_per_s=400.0, amp_mV=125.0, mdp_mV=-85.0, ddr_mV_per_s=20.0,
                              repol_ms=150.0, cl_s=0.6)
    slow, _ = pacemaker_train(fs, 3.0)
    for v in (fast, slow):
        assert find_spikes(v + 0.3 * np.random.default_rng(3).normal(size=v.size), fs, noise_mV=0.3).size == 0


def test_an_excursion_longer_than_the_spike_limit_is_left_alone():
    from analysis.beats import find_spikes

    v = np.full(5000, -60.0)
    v[2000:2030] += 40.0  # 3 ms at 10 kHz: longer than spike_max_ms (2 ms); construction
    v[3000:3008] += 40.0  # 0.8 ms: a spike
    assert find_spikes(v, FS, noise_mV=0.0)[:, 0].tolist() == [3000 - 2]
    assert find_spikes(v, FS, noise_mV=0.0, settings=DetectionSettings(spike_max_ms=0.0)).size == 0


def test_the_settings_name_the_smoothing_the_detector_applies():
    # The detector smooths V with a centred moving average and takes dV/dt as the difference of
    # two adjacent moving averages (analysis.beats._detect); the settings' documentation must say so.
    import dataclasses

    meta = {f.name: f.metadata for f in dataclasses.fields(DetectionSettings)}
    for name in ("smoothing_ms", "derivative_window_ms"):
        text = f"{meta[name]['source']} {meta[name]['doc']}"
        assert "moving average" in text and "Savitzky-Golay smoothing" not in text and "Savitzky-Golay derivative" not in text
