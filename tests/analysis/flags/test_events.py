"""Event and quality flags on synthetic cells with planted events and on hand-built tables.

The beats are the synthetic recordings' exact truth tables (:mod:`analysis.synthetic._cells`), so these
tests check the events alone, independent of detection and measurement.
"""

from __future__ import annotations

import numpy as np
import pytest

from analysis.flags import AUTO_PREFIX, EVENT_FLAGS, apply_events, strip_events
from analysis.settings import Settings
from analysis.synthetic import DAD, EAD, Pause, SealTrouble, preset, synthesize
from analysis.table import BeatTable
from tests.analysis.beat_traces import gaussian_train

QUALITY = Settings().quality


def _table(syn) -> BeatTable:
    t = syn.truth.beats
    n = len(t)
    return t.with_columns(
        file=np.full(n, "syn", dtype=object), accepted=np.ones(n, dtype=np.int64),
        condition=np.full(n, "", dtype=object), reject_reason=np.full(n, "", dtype=object),
    )


def _run(syn, quality=QUALITY, v=None):
    table = _table(syn)
    rec = syn.recording
    sweeps = {s: (rec.sweep(s) if v is None else v[s]) for s in range(rec.n_sweeps)}
    return apply_events(table, sweeps, rec.sampling_rate_hz, quality)


def _flagged(table: BeatTable, flag: str) -> set[int]:
    return {int(b) for b, f in zip(table["train_beat"], table["flags"]) if flag in str(f).split(";")}


CELLS = ["nodal-like", "ventricular-like", "purkinje-like", "atrial-like"]


@pytest.mark.parametrize("name", CELLS)
def test_no_event_on_clean_traces(name):
    # Planted-event truth of analysis.synthetic._events: nothing planted, nothing found.
    syn = synthesize(preset(name), duration_s=12.0, fs_hz=10_000.0, seed=2, noise_mV=0.3, hum_mV=0.3)
    table, warnings = _run(syn)
    for flag in EVENT_FLAGS:
        if flag == "no_overshoot":
            continue
        assert _flagged(table, flag) == set(), (name, flag)
    assert (table["accepted"] == 1).all()


@pytest.mark.parametrize("name", CELLS)
def test_every_planted_ead_dad_and_pause_is_found(name):
    cell = preset(name)
    eads = [EAD(3, amplitude_mV=6.0), EAD(7, amplitude_mV=8.0, at_repolarisation=0.5)]
    dads = [DAD(4, amplitude_mV=3.0), DAD(8, amplitude_mV=4.0)]
    pauses = [Pause(6, factor=2.6)]
    syn = synthesize(cell, duration_s=cell.cl_ms * 14 / 1000.0, fs_hz=10_000.0, seed=5, noise_mV=0.2,
                     hum_mV=0.2, eads=eads, dads=dads, pauses=pauses)
    table, _ = _run(syn)
    # Truth: the beats the events were planted at (analysis.synthetic._events's event table).
    assert _flagged(table, "ead") == {3, 7}
    assert _flagged(table, "dad") == {4, 8}
    assert _flagged(table, "pause") == {6}
    # Physiology flags are suggestions by default (MEASUREMENTS.md): nothing rejected.
    assert (table["accepted"] == 1).all()
    ead_rows = np.flatnonzero(np.isfinite(table["ead_mV"]))
    assert np.all(table["ead_mV"][ead_rows] >= QUALITY.ead_min_mV)


def test_ead_takeoff_potential_is_reported():
    # Zhang & Qu 2021 (Physiol Rep 9:e14883): phase-2 EADs take off above -40 mV.
    syn = synthesize(preset("ventricular-like"), duration_s=12.0, fs_hz=10_000.0, seed=1,
                     eads=[EAD(4, amplitude_mV=8.0, at_repolarisation=0.3)])
    table, _ = _run(syn)
    row = int(np.flatnonzero(table["train_beat"] == 4)[0])
    truth_t = float(syn.truth.times("ead")[0])
    assert "ead" in table["flags"][row]
    assert table["ead_takeoff_mV"][row] > -40.0
    # The reported take-off matches the trace at the planted take-off time within a few mV.
    v = syn.recording.sweep(0)
    assert table["ead_takeoff_mV"][row] == pytest.approx(v[int(truth_t * 10_000)], abs=4.0)


def test_rejection_rules_are_settings():
    syn = synthesize(preset("nodal-like"), duration_s=10.0, fs_hz=10_000.0, seed=3, eads=[EAD(4, amplitude_mV=6.0)])
    quality = Settings().replace("quality.reject_ead", True).quality
    table, warnings = _run(syn, quality)
    row = int(np.flatnonzero(table["train_beat"] == 4)[0])
    assert table["accepted"][row] == 0
    assert table["reject_reason"][row].startswith(AUTO_PREFIX + "ead")
    assert int((table["accepted"] == 0).sum()) == 1
    assert any("rejected automatically" in w for w in warnings)


def test_clipped_beats_are_rejected_by_default():
    # An amplifier saturating at +10 mV: every beat whose peak the clip cuts is flagged
    # (common practice, no source: flat at the converter's limit).
    syn = synthesize(preset("nodal-like"), duration_s=10.0, fs_hz=10_000.0, seed=4, noise_mV=0.2)
    v = {0: np.minimum(syn.recording.sweep(0), 10.0)}
    table, _ = _run(syn, v=v)
    cut = np.asarray(syn.truth.beats["peak_mV"]) > 10.5
    flagged = np.array(["clipped" in str(f) for f in table["flags"]])
    assert np.array_equal(flagged, cut)
    assert np.all(table["accepted"][cut] == 0)
    assert all("flat at 10 for" in r for r in table["reject_reason"][cut])


def test_a_smooth_top_that_is_the_sweep_maximum_is_not_clipped():
    # Noise-free beats read through a converter of 0.01 mV steps: each smooth peak is a run of
    # equal samples at (or near) the sweep's maximum, and the flat diastole between the beats a
    # run at its minimum; neither is clipping (common practice, no source: clipping is a signal
    # cut off at a limit, not a rounded top).
    syn = synthesize(preset("nodal-like"), duration_s=10.0, fs_hz=20_000.0, seed=4)
    v = np.round(syn.recording.sweep(0), 2)
    table, _ = _run(syn, v={0: v})
    assert _flagged(table, "clipped") == set()
    from analysis.flags import ArraySweeps, sweep_trace_events

    flat = np.full(40_000, -60.0)
    flat[10_000:10_400] += 80.0 * np.hanning(400)  # one smooth beat on a noise-free flat diastole
    beat = BeatTable({"t_upstroke_s": [0.51], "t_peak_s": [0.51], "t_apd90_s": [0.515], "t_mdp_s": [np.nan],
                      "t_top_s": [np.nan], "peak_mV": [20.0], "apa_mV": [np.nan]})
    assert not sweep_trace_events(ArraySweeps([flat]), 0, 20_000.0, beat, QUALITY)["clipped"].any()


def test_clipping_at_the_converters_limit_when_the_reader_knows_it():
    # Noise-free beats through a converter of 0.01 mV steps whose highest code lies two steps
    # below the highest beat's true peak: a cut too shallow to tell from a rounded top, but flat
    # at the limit the recording states (common practice, no source: samples at the ADC limit
    # are saturated).
    from analysis import analyze
    from analysis.recording import Recording

    syn = synthesize(preset("nodal-like"), duration_s=10.0, fs_hz=10_000.0, seed=4)
    peaks = np.asarray(syn.truth.beats["peak_mV"])
    limit = round(float(peaks.max()) - 0.02, 2)
    v = np.minimum(np.round(syn.recording.sweep(0), 2), limit)
    cut = peaks > limit + 0.005  # the beats whose tops the converter cut (construction)
    assert cut.sum() >= 10
    known = analyze(Recording.from_array(v, 10_000.0, metadata={"adc_range": [[-200.0, limit]]})).beats
    flagged = np.array(["clipped" in f for f in known["flags"]])
    assert np.array_equal(flagged, cut)
    assert np.all(known["accepted"][flagged] == 0) and all("flat at" in r for r in known["reject_reason"][flagged])
    unknown = analyze(Recording.from_array(v, 10_000.0)).beats
    assert not any("clipped" in f for f in unknown["flags"])  # without the range: a rounded top


def test_the_abf_reader_states_the_converters_range():
    # pyabf's writer stores int(value x resolution / range x scale) in int16 codes from
    # -resolution to resolution - 1 (pyabf/abfWriter.py; ABF header fields lADCResolution,
    # fADCRange, fInstrumentScaleFactor): the range follows from one step.
    from analysis import open_recording
    from tests import recording_files as files

    import tempfile
    from pathlib import Path

    with tempfile.TemporaryDirectory() as tmp:
        v, _ = gaussian_train(10_000.0, 2.0)
        path = files.write_abf1(Path(tmp) / "cell.abf", v, 10_000.0)
        step = files.abf1_step(path)
        rec = open_recording(path)
        lo, hi = rec.metadata["adc_range"][0]
        assert lo == pytest.approx(-32768 * step, rel=1e-6) and hi == pytest.approx(32767 * step, rel=1e-6)
        assert hi > np.max(rec.sweep(0))  # the smooth peaks lie below the limit: nothing clipped
        from analysis import analyze

        assert not any("clipped" in f for f in analyze(rec).beats["flags"])


def test_noise_level_and_noisy_flag():
    # White noise of known rms (numpy's generator as the reference): the diastolic estimate
    # reads it within 10 %, and hum counts as noise.
    for noise, hum in ((0.5, 0.0), (0.3, 0.4)):
        syn = synthesize(preset("ventricular-like"), duration_s=12.0, fs_hz=10_000.0, seed=6, noise_mV=noise, hum_mV=hum)
        table, _ = _run(syn)
        expected = np.hypot(noise, hum / np.sqrt(2.0))  # rms of a sinusoid: amplitude / sqrt 2
        est = np.nanmedian(table["noise_mV_rms"])
        assert est == pytest.approx(expected, rel=0.10)
    syn = synthesize(preset("ventricular-like"), duration_s=12.0, fs_hz=10_000.0, seed=6, noise_mV=1.5)
    table, _ = _run(syn)
    measured = np.isfinite(table["noise_mV_rms"])
    assert measured.sum() >= 5
    assert all("noisy" in table["flags"][i] for i in np.flatnonzero(measured))
    assert (table["accepted"] == 1).all()  # noisy is a suggestion by default


def test_mdp_drift_flags_the_leaky_stretch():
    # A seal that leaks for a while depolarises the MDP by 15 mV (synthetic truth).
    syn = synthesize(preset("ventricular-like"), duration_s=40.0, fs_hz=5_000.0, seed=2,
                     seal_troubles=[SealTrouble(20.0, 32.0, depolarisation_mV=15.0, noise_mV=0.0, ramp_s=0.5)])
    table, warnings = _run(syn)
    mdp = np.asarray(table["mdp_mV"])
    ref = np.nanmedian(mdp[np.isfinite(mdp)][:10])
    expect = np.isfinite(mdp) & (np.abs(mdp - ref) > QUALITY.mdp_drift_max_mV)
    assert expect.sum() >= 3
    flagged = np.array(["mdp_drift" in str(f) for f in table["flags"]])
    assert np.array_equal(flagged, expect)
    assert any("MDP drifts" in w for w in warnings)


def _hand_table(**over):
    # Common practice, no source: artefact-like detections cannot be action potentials.
    n = 4
    cols = {
        "file": ["h"] * n, "sweep": [0] * n, "beat": list(range(n)), "t_upstroke_s": [0.5, 1.3, 2.1, 2.9],
        "accepted": [1] * n, "flags": ["no_diastole", "", "", ""], "condition": [""] * n,
        "cl_ms": [np.nan, 800, 800, 800], "rate_bpm": [np.nan, 75, 75, 75], "mdp_mV": [np.nan, -60, -61, -60],
        "top_mV": [np.nan, -45, -45, -45], "ddr_mV_per_s": [np.nan, 50, 50, 50], "ddr100_mV_per_s": [np.nan] * n,
        "dvdt_max_V_per_s": [5, 5, 2500, 5], "peak_mV": [10, 10, 10, -3], "apa_mV": [np.nan, 70, 71, 30],
        "apd20_ms": [np.nan] * n, "apd50_ms": [np.nan] * n, "apd90_ms": [np.nan, 150, 1.2, 150],
        "reject_reason": [""] * n,
    }
    cols.update(over)
    return BeatTable(cols)


def test_artefacts_rejected_overshoot_only_flagged():
    table, _ = apply_events(_hand_table(), None, 10_000.0, QUALITY)
    assert table["flags"][2] == "artefact"
    assert table["accepted"][2] == 0
    assert "dV/dt max 2500 V/s > 1000" in table["reject_reason"][2]
    assert "APD90 1.2 ms < 10" in table["reject_reason"][2]
    # MEASUREMENTS.md: overshoot below 0 mV is a flag, never an automatic rejection.
    assert table["flags"][3] == "low_apa;no_overshoot"
    assert table["accepted"][3] == 1
    assert not hasattr(QUALITY, "reject_no_overshoot")


def test_events_are_idempotent_and_strippable():
    syn = synthesize(preset("nodal-like"), duration_s=10.0, fs_hz=10_000.0, seed=3, dads=[DAD(3)])
    once, _ = _run(syn)
    sweeps = {0: syn.recording.sweep(0)}
    twice, _ = apply_events(once, sweeps, 10_000.0, QUALITY)
    assert twice.equals(once)
    base = strip_events(once)
    assert list(base["flags"]) == list(syn.truth.beats["flags"])
    assert "dad_mV" not in base


def test_results_do_not_depend_on_the_chunking():
    # Common practice, no source: working a sweep in windows must give what the whole sweep gives.
    from analysis.flags import ArraySweeps, sweep_trace_events

    syn = synthesize(preset("nodal-like"), duration_s=20.0, fs_hz=10_000.0, seed=8, noise_mV=0.3,
                     eads=[EAD(5, amplitude_mV=8.0)], dads=[DAD(9, amplitude_mV=4.0)])
    v = np.minimum(syn.recording.sweep(0), 12.0)  # clipped peaks: flat runs cut by the blocks
    table = _table(syn)
    whole = sweep_trace_events(ArraySweeps([v]), 0, 10_000.0, table, QUALITY, chunk_s=1000.0)
    for chunk_s in (0.35, 1.0, 3.3):
        part = sweep_trace_events(ArraySweeps([v]), 0, 10_000.0, table, QUALITY, chunk_s=chunk_s)
        for name, values in whole.items():
            if values.dtype.kind == "f":
                # Moving sums started elsewhere differ in the last bits only.
                np.testing.assert_allclose(part[name], values, rtol=0, atol=1e-9, err_msg=f"{chunk_s} {name}")
            else:
                assert np.array_equal(values, part[name]), (chunk_s, name)
    assert whole["ead"].sum() == 1 and whole["dad"].sum() == 1 and whole["clipped"].sum() >= 10


def test_analyze_returns_flagged_and_automatically_rejected_beats():
    # The pipeline's hook: analyze() itself runs the events and the rejection rules.
    from analysis import analyze
    from analysis.recording import Recording

    syn = synthesize(preset("ventricular-like"), duration_s=12.0, fs_hz=10_000.0, seed=9, noise_mV=0.1,
                     eads=[EAD(3, amplitude_mV=8.0)])
    v = np.minimum(syn.recording.sweep(0), 20.0)  # the converter saturates at +20 mV
    beats = analyze(Recording.from_array(v, 10_000.0)).beats
    clipped = np.array(["clipped" in f for f in beats["flags"]])
    assert clipped.sum() >= len(beats) - 1  # every complete beat overshoots +20 mV (synthetic truth: peak 35 mV)
    assert np.all(beats["accepted"][clipped] == 0)
    assert all(r.startswith("auto: clipped (flat at 20 for") for r in beats["reject_reason"][clipped])
    # Unclipped, the planted EAD is flagged on its beat and stays a suggestion.
    beats = analyze(syn.recording).beats
    ead = np.flatnonzero(["ead" in f for f in beats["flags"]])
    truth = syn.truth.beats
    t_truth = truth["t_upstroke_s"][truth["train_beat"] == 3][0]
    assert ead.size == 1 and abs(beats["t_upstroke_s"][ead[0]] - t_truth) < 0.002
    assert (beats["accepted"] == 1).all()


def test_the_moving_average_and_the_noise_filter_match_scipy():
    # The events' own moving average and zero-phase low-pass (written to keep scipy out of the
    # analysis) against the reference library they stand in for.
    from scipy.ndimage import uniform_filter1d
    from scipy.signal import butter, sosfiltfilt

    from analysis.flags import box_mean
    from analysis.beats import lowpass_residual_rms

    rng = np.random.default_rng(11)
    x = -60.0 + rng.normal(size=5000).cumsum() * 0.05
    for width in (2, 40, 41, 400):
        # scipy.ndimage.uniform_filter1d, mode "nearest" (reference library)
        np.testing.assert_allclose(box_mean(x, width), uniform_filter1d(x, width, mode="nearest"), atol=1e-9)
    fs = 20_000.0
    t = np.arange(int(0.4 * fs)) / fs
    seg = -60 + 50 * t + 12 * np.exp((t - 0.4) / 0.06) + 0.3 * rng.normal(size=t.size) + 0.4 * np.sin(2 * np.pi * 50 * t)
    sos = butter(2, 20.0, fs=fs, output="sos")
    ref = seg - sosfiltfilt(sos, seg, padtype="odd", padlen=3 * 1000)  # scipy.signal (reference library)
    assert lowpass_residual_rms(seg, fs, 20.0) == pytest.approx(float(np.sqrt(np.mean(ref**2))), rel=2e-3)
    # every diastole of a stretch at once, against the same reference library
    from analysis.beats import residual_rms_many

    trace = np.concatenate((seg, seg[::-1] + 3.0, seg[: int(0.15 * fs)]))
    starts, stops = np.array([0, seg.size, 2 * seg.size]), np.array([seg.size, 2 * seg.size, trace.size])
    want = []
    for a, b in zip(starts, stops):
        part = trace[a:b]
        r = part - sosfiltfilt(sos, part, padtype="odd", padlen=min(part.size - 1, 3 * 1000))  # scipy.signal
        want.append(float(np.sqrt(np.mean(r**2))))
    np.testing.assert_allclose(residual_rms_many(trace, starts, stops, fs, 20.0), want, rtol=2e-3)
