"""Detection next to electrical spikes and at sweep ends, on synthetic cells with known truth.

Truth is analysis.synthetic's: the beat train's exact upstroke times and the per-beat values
computed on the exact waveform (:mod:`analysis.synthetic_truth`), and the artefacts planted. The
disturbances follow MEASUREMENTS.md (Beats): short electrical spikes of a few samples must fool
neither detection nor the events.
"""

from __future__ import annotations

import numpy as np
import pytest

from analysis import analyze
from analysis.detect import ARTEFACT_REASONS, detect_beats
from analysis.synthetic import Artefact, preset, synthesize

FS = 10_000.0


def _nodal_with_spike(n_samples: int, amplitude_mV: float = 80.0):
    # The spike lands about 100 ms after the upstroke at 20.195 s, in its repolarisation.
    return synthesize(preset("nodal-like"), duration_s=30.0, fs_hz=FS, seed=417, noise_mV=0.3,
                      artefacts=[Artefact(20.3, amplitude_mV, n_samples)])


def _same_beats(found_s, truth_s, tol_s=0.005) -> bool:
    found_s, truth_s = np.asarray(found_s), np.asarray(truth_s)
    return len(found_s) == len(truth_s) and bool(np.all(np.abs(found_s - truth_s) < tol_s))


@pytest.mark.parametrize("n_samples", [5, 10, 15])  # 0.5, 1 and 1.5 ms at 10 kHz
def test_a_spike_in_a_nodal_repolarisation_is_an_artefact_and_no_beat_is_lost(n_samples):
    syn = _nodal_with_spike(n_samples)
    truth = syn.truth.beats
    det = detect_beats(syn.recording.sweep(0), FS)
    # Every beat of the synthetic train, and nothing else (synthetic truth).
    assert _same_beats(np.asarray(det.i_upstroke) / FS, truth["t_upstroke_s"], tol_s=0.02)
    # The spike planted at 20.3 s is reported, as an artefact (synthetic truth).
    near = np.abs(np.asarray(det.i_artefact) / FS - 20.3) < 0.005
    assert near.sum() == 1 and det.artefact_reason[near][0] in ARTEFACT_REASONS

    beats = analyze(syn.recording).beats
    assert _same_beats(beats["t_upstroke_s"], truth["t_upstroke_s"])  # synthetic truth
    flags = [set(str(f).split(";")) - {""} for f in beats["flags"]]
    # No pause and no afterdepolarisation were planted; cycle lengths are the train's.
    assert not any({"pause", "ead", "dad"} & f for f in flags)
    cl, cl_true = np.asarray(beats["cl_ms"]), np.asarray(truth["cl_ms"])
    ok = np.isfinite(cl_true)
    assert np.array_equal(np.isfinite(cl), ok) and np.max(np.abs(cl[ok] - cl_true[ok])) < 1.0  # 1 ms: the noisy CL tolerance
    # The beat the spike rides on keeps its APD90 (truth, within the noisy tolerance of 2 ms).
    i = int(np.argmin(np.abs(beats["t_upstroke_s"] - 20.195)))
    assert abs(beats["apd90_ms"][i] - truth["apd90_ms"][i]) < 2.0


def test_a_spike_in_diastole_is_no_dad():
    # Spikes of 1-1.5 ms (analysis.synthetic's planted artefacts) in three diastoles; no DAD planted.
    b = synthesize(preset("nodal-like"), duration_s=12.0, fs_hz=2000.0, seed=3).truth.beats
    times = [0.5 * (b["t_mdp_s"][k] + b["t_top_s"][k]) for k in (3, 6, 9)]
    spikes = [Artefact(t, a, n) for t, a, n in zip(times, (50.0, 40.0, 60.0), (10, 15, 12))]
    syn = synthesize(preset("nodal-like"), duration_s=12.0, fs_hz=FS, seed=3, noise_mV=0.3, artefacts=spikes)
    result = analyze(syn.recording)
    beats = result.beats
    assert _same_beats(beats["t_upstroke_s"], syn.truth.beats["t_upstroke_s"])  # synthetic truth
    assert not any("dad" in str(f).split(";") for f in beats["flags"])
    assert np.all(np.isnan(beats["dad_mV"]))
    # Each spike is an artefact of detection and bridged before measuring (synthetic truth).
    art_s = np.asarray(result.artefacts[0][0]) / FS
    spans_s = np.asarray(result.spikes[0], float) / FS
    for t in times:
        assert np.min(np.abs(art_s - t)) < 0.003
        assert np.any((spans_s[:, 0] <= t + 1e-4) & (t <= spans_s[:, 1]))


def test_the_events_bridge_spikes_by_the_detection_rule():
    # The events alone, on the exact truth table (analysis.synthetic): spikes of 1-1.5 ms in
    # three diastoles and one on a repolarisation, no DAD or EAD planted.
    from analysis.events import apply_events
    from analysis.settings import DetectionSettings, Settings

    b = synthesize(preset("nodal-like"), duration_s=12.0, fs_hz=2000.0, seed=3).truth.beats
    times = [0.5 * (b["t_mdp_s"][k] + b["t_top_s"][k]) for k in (3, 6, 9)] + [float(b["t_upstroke_s"][5]) + 0.1]
    spikes = [Artefact(t, a, n) for t, a, n in zip(times, (50.0, 40.0, 60.0, 80.0), (10, 15, 12, 15))]
    syn = synthesize(preset("nodal-like"), duration_s=12.0, fs_hz=FS, seed=3, noise_mV=0.3, artefacts=spikes)
    t = syn.truth.beats
    n = len(t)
    table = t.with_columns(
        file=np.full(n, "syn", dtype=object), accepted=np.ones(n, dtype=np.int64),
        condition=np.full(n, "", dtype=object), reject_reason=np.full(n, "", dtype=object),
    )
    quality = Settings().quality

    def flagged(rule):
        out, _ = apply_events(table, {0: syn.recording.sweep(0)}, FS, quality, detection=rule)
        words = [set(str(f).split(";")) for f in out["flags"]]
        return {i for i, w in enumerate(words) if "dad" in w}, {i for i, w in enumerate(words) if "ead" in w}

    assert flagged(None) == (set(), set())  # nothing planted (synthetic truth)
    # Without the spike rule the same spikes pass for DADs, on the beats whose diastoles hold
    # them (planted): the rule is what keeps them out.
    assert flagged(DetectionSettings(spike_max_ms=0.0))[0] == {2, 5, 8}
