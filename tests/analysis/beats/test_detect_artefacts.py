"""Detection next to electrical spikes and at sweep ends, on synthetic cells with known truth.

Truth is analysis.synthetic._cells's: the beat train's exact upstroke times and the per-beat values
computed on the exact waveform (:mod:`analysis.synthetic._truth`), and the artefacts planted. The
disturbances follow MEASUREMENTS.md (Beats): short electrical spikes of a few samples must fool
neither detection nor the events.
"""

from __future__ import annotations

import numpy as np
import pytest

from analysis import analyze
from analysis.beats import ARTEFACT_REASONS, detect_beats
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
    # Spikes of 1-1.5 ms (analysis.synthetic._events's planted artefacts) in three diastoles; no DAD planted.
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


def test_an_upstroke_cut_by_the_sweep_end_spoils_no_other_beat():
    # Episodic ventricular-like cell: sweep 3 ends 1.5 ms after an upstroke's dV/dt max (the
    # train's upstroke at 3.99853 s of that sweep; synthetic truth).
    syn = synthesize(preset("ventricular-like"), duration_s=4.0, fs_hz=50_000.0, seed=212, n_sweeps=5,
                     sweep_gap_s=6.0, noise_mV=0.25, hum_mV=0.3, hum_hz=50.0, drift_mV_per_min=0.3)
    truth = syn.truth.beats
    truth = truth.take(np.flatnonzero(truth["sweep"] == 3))
    assert 3.998 < truth["t_upstroke_s"][-1] < 3.999 and "truncated" in truth["flags"][-1]
    result = analyze(syn.recording, sweeps=[3])
    beats = result.beats
    assert len(result.artefacts[3][0]) == 0  # no narrow event invented at the sweep's end
    # The cut upstroke is a beat flagged truncated, as in the truth.
    assert _same_beats(beats["t_upstroke_s"], truth["t_upstroke_s"])
    assert "truncated" in beats["flags"][-1]
    # The beat before it is complete and keeps its own peak and APD90 (noisy tolerances: 1 mV, 2 ms).
    assert "truncated" not in beats["flags"][-2]
    assert abs(beats["peak_mV"][-2] - truth["peak_mV"][-2]) < 1.0
    assert abs(beats["apd90_ms"][-2] - truth["apd90_ms"][-2]) < 2.0
    assert abs(beats["cl_ms"][-1] - truth["cl_ms"][-1]) < 1.0


@pytest.mark.parametrize("cut_ms", [0.3, 0.8, 1.5, 3.0])
def test_upstrokes_cut_at_any_point_near_the_sweep_end(cut_ms):
    # The same cell at 10 kHz, each sweep cut a little after an upstroke's dV/dt max: the cut
    # beat is a truncated beat or absent, never an artefact, and the beats before it are whole.
    full = synthesize(preset("ventricular-like"), duration_s=6.0, fs_hz=FS, seed=212, noise_mV=0.25)
    t_cut = float(full.truth.beats["t_upstroke_s"][-1]) + cut_ms * 1e-3
    v = full.recording.sweep(0)[: int(round(t_cut * FS))]
    det = detect_beats(v, FS)
    assert len(det.i_artefact) == 0
    t = np.asarray(det.i_upstroke) / FS
    truth_t = np.asarray(full.truth.beats["t_upstroke_s"])
    assert _same_beats(t, truth_t, tol_s=0.002) or _same_beats(t, truth_t[:-1], tol_s=0.002)
    from analysis.recording import Recording

    beats = analyze(Recording.from_array(v, FS)).beats
    whole = int(np.argmin(np.abs(beats["t_upstroke_s"] - truth_t[-2])))  # the last complete beat
    assert "truncated" not in beats["flags"][whole]
    assert abs(beats["apd90_ms"][whole] - full.truth.beats["apd90_ms"][len(truth_t) - 2]) < 2.0  # noisy tolerance
    assert all("truncated" in f for f in beats["flags"][whole + 1:])


def test_the_events_bridge_spikes_by_the_detection_rule():
    # The events alone, on the exact truth table (analysis.synthetic._cells): spikes of 1-1.5 ms in
    # three diastoles and one on a repolarisation, no DAD or EAD planted.
    from analysis.flags import apply_events
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
