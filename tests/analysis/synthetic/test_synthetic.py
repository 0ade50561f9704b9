"""The synthetic-cell generator: exact derivative, truth by the definitions, seeds, events, writers."""

from __future__ import annotations

import numpy as np
import pytest
from scipy import integrate, stats

from analysis.synthetic import DAD, EAD, PRESETS, Artefact, Pause, SealTrouble, Stretch, preset, synthesize
from analysis.synthetic import write_abf, write_nwb

MEASURED = (
    "cl_ms", "mdp_mV", "top_mV", "ddr_mV_per_s", "ddr100_mV_per_s", "dvdt_max_V_per_s",
    "peak_mV", "apa_mV", "apd20_ms", "apd50_ms", "apd90_ms",
)


def _dense(syn, k0: int, k1: int, step_s: float = 2e-6):
    tr = syn.train
    t = np.arange(tr.t_mdp_s[k0], tr.t_mdp_s[k1], step_s)
    v, dv = tr.evaluate(t)
    return t, v, dv


@pytest.mark.parametrize("name", sorted(PRESETS))
def test_exact_derivative_matches_the_waveform(name):
    syn = synthesize(
        preset(name), duration_s=6.0, fs_hz=10_000.0, seed=2, drift_mV_per_min=6.0,
        dads=[DAD(1, amplitude_mV=2.0)], eads=[EAD(2, amplitude_mV=4.0)],
        seal_troubles=[SealTrouble(1.0, 3.0, depolarisation_mV=5.0, ramp_s=0.4)],
    )
    t, v, dv = _dense(syn, 1, 4)
    # Central differences of the dense waveform (2 us steps) agree with the closed-form
    # derivative to 0.1 % of the upstroke (numerical differentiation, common practice, no source).
    numeric = np.gradient(v, t)
    assert np.max(np.abs(numeric[1:-1] - dv[1:-1])) < 1e-3 * dv.max()
    # and integrating the derivative gives back the waveform (scipy.integrate, reference library).
    rebuilt = v[0] + integrate.cumulative_trapezoid(dv, t, initial=0.0)
    assert np.max(np.abs(rebuilt - v)) < 0.01  # mV


@pytest.mark.parametrize("name", sorted(PRESETS))
def test_phases_join_smoothly_and_the_mdp_is_a_round_minimum(name):
    syn = synthesize(preset(name), duration_s=6.0, fs_hz=2000.0, seed=2)
    tr = syn.train
    h = 1e-7

    def d2(t0: float, side: int) -> float:
        # one-sided second derivative at t0 from the exact dV/dt, extrapolated to the join
        # (finite differences, common practice, no source)
        f = tr.evaluate(t0 + side * h * np.arange(1, 4))[1]
        near, far = (f[1] - f[0]) / h, (f[2] - f[1]) / h
        return side * (2.5 * near - 1.5 * far)

    for k in (2, 3):
        for t_join in (tr.t_mdp_s[k], tr.t_up_s[k], tr.t_peak_s[k]):
            left, right = d2(t_join, -1), d2(t_join, +1)
            # d2V/dt2 is continuous across every phase join: the two sides agree to 0.1 % of the
            # typical curvature nearby (the range of dV/dt within 1 ms, per ms)
            near = tr.evaluate(np.linspace(t_join - 1e-3, t_join + 1e-3, 2001))[1]
            typical = np.ptp(near) / 1e-3
            assert abs(left - right) < 1e-3 * max(abs(left), abs(right), typical), (t_join, left, right)
        # at the MDP dV/dt changes sign with a positive curvature (a minimum, not a flat stretch)
        assert tr.evaluate(np.array([tr.t_mdp_s[k] - 1e-3]))[1][0] < 0 < tr.evaluate(np.array([tr.t_mdp_s[k] + 1e-3]))[1][0]


@pytest.mark.parametrize("name", sorted(PRESETS))
def test_clean_truth_meets_the_cell_as_set(name):
    cell = preset(name)
    syn = synthesize(cell, duration_s=12.0, fs_hz=10_000.0, seed=4)
    b = syn.truth.beats
    full = b["flags"] == ""
    assert full.sum() >= 5
    # The knobs are met exactly on a clean recording (construction of the model).
    np.testing.assert_allclose(b["mdp_mV"][full], cell.mdp_mV, atol=1e-6)
    np.testing.assert_allclose(b["top_mV"][full], cell.top_mV, atol=1e-6)
    np.testing.assert_allclose(b["peak_mV"][full], cell.peak_mV, atol=1e-6)
    np.testing.assert_allclose(b["dvdt_max_V_per_s"], cell.dvdt_max_V_per_s, rtol=1e-9)
    np.testing.assert_allclose(b["apd90_ms"][full], cell.apd90_ms, atol=1e-4)
    np.testing.assert_allclose(b["apa_mV"][full], cell.peak_mV - cell.mdp_mV, atol=1e-6)
    assert np.all(b["apd20_ms"][full] < b["apd50_ms"][full])
    assert np.all(b["apd50_ms"][full] < b["apd90_ms"][full])
    assert np.all(b["ddr_mV_per_s"][full] > 0)
    cl = b["cl_ms"][1:]
    assert abs(cl.mean() - cell.cl_ms) < 3 * cell.cl_sd_ms  # the rhythm varies about its mean
    assert cl.std() > 0


def test_presets_are_plausible_against_the_reference_table():
    nodal = synthesize(preset("nodal-like"), duration_s=10.0, fs_hz=5000.0).truth.beats
    # Human SAN myocytes: CL 828 +- 15 ms, MDP -61.7 +- 4.3 mV, dV/dt max 4.6 +- 1.2 V/s
    # (Verkerk et al. 2007, Eur Heart J 28:2472).
    assert abs(np.nanmean(nodal["cl_ms"]) - 828) < 3 * 15
    assert abs(np.nanmean(nodal["mdp_mV"]) + 61.7) < 4.3
    assert abs(np.mean(nodal["dvdt_max_V_per_s"]) - 4.6) < 1.2
    # Rabbit SAN model: APA 80 mV, APD50 108 ms (Severi et al. 2012, J Physiol 590:4483): near.
    assert abs(np.nanmean(nodal["apa_mV"]) - 80) < 5
    assert abs(np.nanmean(nodal["apd50_ms"]) - 108) < 15
    ratio = {}
    for name in ("atrial-like", "ventricular-like"):
        b = synthesize(preset(name), duration_s=10.0, fs_hz=5000.0).truth.beats
        ratio[name] = np.nanmean(b["apd90_ms"] / b["apd50_ms"])
    # Cell-type hint thresholds (MEASUREMENTS.md, from memory): ventricular-like APD90/APD50
    # <= ~1.3-1.4, atrial-like >= ~1.7.
    assert ratio["ventricular-like"] <= 1.3
    assert ratio["atrial-like"] >= 1.7
    vent = synthesize(preset("ventricular-like"), duration_s=10.0, fs_hz=5000.0).truth.beats
    # Adult human ventricle: dV/dt max 254-303 V/s, APD 228-259 ms (review table, from memory).
    assert 254 <= np.mean(vent["dvdt_max_V_per_s"]) <= 303
    assert 228 <= np.nanmean(vent["apd90_ms"]) <= 259


def test_truth_follows_the_definitions_on_a_brute_force_grid():
    syn = synthesize(preset("nodal-like"), duration_s=4.0, fs_hz=10_000.0, seed=5, drift_mV_per_min=5.0)
    b = syn.truth.beats
    k = 2
    t, v, dv = _dense(syn, int(b["train_beat"][k]) - 1, int(b["train_beat"][k]) + 2, 5e-6)
    t_up = b["t_upstroke_s"][k]
    prev_peak = b["t_peak_s"][k - 1]
    # MDP: lowest V between the previous peak and this upstroke (MEASUREMENTS.md).
    diastole = (t > prev_peak) & (t < t_up)
    assert v[diastole].min() == pytest.approx(b["mdp_mV"][k], abs=1e-6)
    # dV/dt max in phase 0, at the upstroke time.
    ap = (t > t_up - 0.05) & (t < t_up + 0.05)
    assert dv[ap].max() / 1000 == pytest.approx(b["dvdt_max_V_per_s"][k], rel=1e-6)
    assert t[ap][np.argmax(dv[ap])] == pytest.approx(t_up, abs=1e-5)
    # TOP: V at the last upward crossing of 0.5 V/s before the upstroke.
    i = np.flatnonzero(diastole & (t > b["t_mdp_s"][k]) & (dv < 500.0))[-1]
    assert v[i] == pytest.approx(b["top_mV"][k], abs=0.01)
    # DDR equals scipy.stats.linregress over [t_MDP, t_TOP] (reference library).
    window = (t >= b["t_mdp_s"][k]) & (t <= b["t_top_s"][k])
    assert stats.linregress(t[window], v[window]).slope == pytest.approx(b["ddr_mV_per_s"][k], rel=1e-3)
    first100 = (t >= b["t_mdp_s"][k]) & (t <= b["t_mdp_s"][k] + 0.1)
    assert stats.linregress(t[first100], v[first100]).slope == pytest.approx(b["ddr100_mV_per_s"][k], rel=1e-3)
    # APD90: first time after the peak at which V <= peak - 0.9 APA, from the upstroke.
    level = b["peak_mV"][k] - 0.9 * b["apa_mV"][k]
    after = np.flatnonzero((t > b["t_peak_s"][k]) & (v <= level))[0]
    assert (t[after] - t_up) * 1000 == pytest.approx(b["apd90_ms"][k], abs=0.01)
    # CL: this upstroke minus the previous one.
    assert b["cl_ms"][k] == pytest.approx((t_up - b["t_upstroke_s"][k - 1]) * 1000, abs=1e-9)


def test_sweep_edges_flag_first_and_truncated_beats():
    syn = synthesize(preset("ventricular-like"), duration_s=5.0, fs_hz=5000.0, seed=1, start_phase=0.2)
    b = syn.truth.beats
    assert b["flags"][0] == "no_diastole"
    for col in ("mdp_mV", "top_mV", "ddr_mV_per_s", "apa_mV", "apd90_ms", "cl_ms"):
        assert np.isnan(b[col][0])
    assert np.isfinite(b["dvdt_max_V_per_s"][0]) and np.isfinite(b["peak_mV"][0])
    # a recording cut off mid-repolarisation: the last beat's APD90 is not there
    tr = syn.train
    last = int(np.flatnonzero(tr.t_up_s < 5.0)[-1])
    stop = tr.t_up_s[last] + 0.17  # after APD20 (about 153 ms), before APD50 (about 200 ms)
    cut = synthesize(preset("ventricular-like"), duration_s=stop, fs_hz=5000.0, seed=1, start_phase=0.2)
    cb = cut.truth.beats
    assert "truncated" in cb["flags"][-1]
    assert np.isnan(cb["apd90_ms"][-1]) and np.isnan(cb["apd50_ms"][-1]) and np.isfinite(cb["apd20_ms"][-1])


def test_same_seed_same_samples_and_other_seed_other_noise():
    kw = dict(duration_s=3.0, fs_hz=10_000.0, noise_mV=0.5, hum_mV=0.3)
    a = synthesize(preset("nodal-like"), seed=11, **kw).recording.sweep(0)
    b = synthesize(preset("nodal-like"), seed=11, **kw).recording.sweep(0)
    c = synthesize(preset("nodal-like"), seed=12, **kw).recording.sweep(0)
    assert np.array_equal(a, b)
    assert not np.array_equal(a, c)
    # the rhythm too is drawn from the seed
    ta = synthesize(preset("nodal-like"), seed=11, **kw).truth.beats["t_upstroke_s"]
    tc = synthesize(preset("nodal-like"), seed=12, **kw).truth.beats["t_upstroke_s"]
    assert not np.array_equal(ta[: min(len(ta), len(tc))], tc[: min(len(ta), len(tc))])


def test_noise_hum_and_drift_are_as_requested():
    fs = 10_000.0
    syn = synthesize(
        preset("nodal-like"), duration_s=10.0, fs_hz=fs, seed=3, noise_mV=0.4, hum_mV=0.3, hum_hz=60.0,
        drift_mV_per_min=6.0,
    )
    x = syn.recording.sweep(0)
    t = np.arange(x.size) / fs
    clean = syn.train.evaluate(t, derivative=False)[0]
    rest = x - clean
    # The residual is noise plus a 60 Hz sinusoid of 0.3 mV amplitude: its power spectrum
    # (numpy FFT) has the hum at 60 Hz and a white floor of 0.4 mV rms elsewhere.
    spectrum = np.fft.rfft(rest) / x.size
    freqs = np.fft.rfftfreq(x.size, 1 / fs)
    hum_bin = np.argmin(np.abs(freqs - 60.0))
    assert 2 * np.abs(spectrum[hum_bin]) == pytest.approx(0.3, rel=0.05)
    hum = 2 * np.real(spectrum[hum_bin] * np.exp(2j * np.pi * 60.0 * t))
    assert np.std(rest - hum) == pytest.approx(0.4, rel=0.02)
    # Drift is in the clean waveform (and so in the truth): MDP climbs 6 mV/min.
    b = syn.truth.beats
    ok = np.isfinite(b["mdp_mV"])
    slope = stats.linregress(b["t_mdp_s"][ok], b["mdp_mV"][ok]).slope
    assert slope * 60 == pytest.approx(6.0, rel=0.02)


def test_artefacts_dads_eads_and_pauses_are_planted_where_asked():
    fs = 20_000.0
    syn = synthesize(
        preset("ventricular-like"), duration_s=12.0, fs_hz=fs, seed=7,
        artefacts=[Artefact(2.2, amplitude_mV=60.0, n_samples=3)],
        dads=[DAD(2, amplitude_mV=4.0)], eads=[EAD(4, amplitude_mV=5.0)], pauses=[Pause(6, factor=2.5)],
    )
    x = syn.recording.sweep(0)
    t = np.arange(x.size) / fs
    clean = syn.train.evaluate(t, derivative=False)[0]
    i0 = int(round(2.2 * fs))
    np.testing.assert_allclose(x[i0:i0 + 3] - clean[i0:i0 + 3], 60.0)
    assert np.all(x[i0 + 3:i0 + 10] == clean[i0 + 3:i0 + 10])
    ev = syn.truth.events
    assert sorted(ev["kind"]) == ["artefact", "dad", "ead", "pause"]
    b = syn.truth.beats
    # the DAD peaks in the diastole after beat 2, a few mV up, below take-off
    t_dad = syn.truth.times("dad")[0]
    assert b["t_peak_s"][2] < t_dad < b["t_top_s"][3]
    v_dad = syn.train.evaluate(np.array([t_dad]))[0][0]
    assert v_dad < b["top_mV"][3] - 1.0
    # the EAD: dV/dt turns positive during repolarisation, before APD90 (MEASUREMENTS.md)
    t_ead = syn.truth.times("ead")[0]
    assert b["t_peak_s"][4] < t_ead < b["t_apd90_s"][4]
    assert syn.train.evaluate(np.array([t_ead + 1e-4]))[1][0] > 0
    assert b["apd90_ms"][4] > b["apd90_ms"][3] + 1.0  # an EAD prolongs the action potential
    # a pause: CL > 2x the running median (MEASUREMENTS.md, from memory)
    assert b["cl_ms"][6] > 2 * np.nanmedian(b["cl_ms"])
    assert syn.truth.times("pause")[0] == pytest.approx(b["t_upstroke_s"][6])


def test_wash_in_flattens_phase_4_and_slows_the_rate_and_seal_trouble_depolarises():
    syn = synthesize(
        preset("nodal-like"), duration_s=60.0, fs_hz=2000.0, seed=9,
        stretches=[Stretch(20.0, 40.0, phase4_factor=0.6, ramp_s=4.0)],
        seal_troubles=[SealTrouble(50.0, 56.0, depolarisation_mV=6.0, noise_mV=2.0)],
    )
    b = syn.truth.beats
    t = b["t_upstroke_s"]
    base, drug = (t > 2) & (t < 18), (t > 26) & (t < 38)
    assert np.nanmean(b["ddr_mV_per_s"][drug]) < 0.75 * np.nanmean(b["ddr_mV_per_s"][base])
    assert np.nanmean(b["cl_ms"][drug]) > 1.2 * np.nanmean(b["cl_ms"][base])
    seal = (t > 51) & (t < 55)
    assert np.nanmean(b["mdp_mV"][seal]) == pytest.approx(preset("nodal-like").mdp_mV + 6.0, abs=0.2)
    x = syn.recording.sweep(0)
    clean = syn.train.evaluate(np.arange(x.size) / 2000.0, derivative=False)[0]
    assert np.std((x - clean)[int(51 * 2000):int(55 * 2000)]) == pytest.approx(2.0, rel=0.05)


def test_episodic_sweeps_each_have_their_own_truth():
    syn = synthesize(preset("ventricular-like"), duration_s=4.0, fs_hz=5000.0, n_sweeps=3, sweep_gap_s=1.5)
    rec, b = syn.recording, syn.truth.beats
    assert rec.n_sweeps == 3 and rec.sweep_starts_s == (0.0, 5.5, 11.0)
    for s in range(3):
        rows = b["sweep"] == s
        assert rows.sum() >= 2
        assert b["beat"][rows][0] == 0
        # a first beat has no diastole unless the sweep recorded its MDP (then the exact one)
        assert b["flags"][rows][0] == "no_diastole" or b["mdp_mV"][rows][0] == pytest.approx(-85.0, abs=1e-6)
        assert np.isnan(b["cl_ms"][rows][0])
        assert np.all((b["t_upstroke_s"][rows] >= 0) & (b["t_upstroke_s"][rows] < 4.0))


@pytest.mark.parametrize(
    "changes, words",
    [
        (dict(top_mV=-90.0), "MDP < TOP"),
        (dict(apd90_ms=1100.0), "diastole"),
        (dict(dvdt_max_V_per_s=0.5), "at least 2 V/s"),
    ],
)
def test_impossible_cells_are_refused(changes, words):
    with pytest.raises(ValueError, match=words):
        synthesize(preset("ventricular-like", **changes), duration_s=3.0, fs_hz=2000.0)


def test_events_that_cannot_happen_are_refused():
    with pytest.raises(ValueError, match="take-off"):
        synthesize(preset("nodal-like"), duration_s=5.0, fs_hz=2000.0, dads=[DAD(1, amplitude_mV=30.0)])
    with pytest.raises(ValueError, match="next upstroke"):
        synthesize(preset("nodal-like"), duration_s=5.0, fs_hz=2000.0, dads=[DAD(1, at_fraction=0.95)])
    with pytest.raises(ValueError, match="no preset"):
        preset("hepatocyte-like")


def test_abf_writer_matches_pyabf_byte_for_byte_and_reads_back(tmp_path):
    pyabf = pytest.importorskip("pyabf")
    import pyabf.abfWriter

    syn = synthesize(preset("nodal-like"), duration_s=1.5, fs_hz=10_000.0, noise_mV=0.3, n_sweeps=2, seed=1)
    data = np.stack([syn.recording.sweep(i) for i in range(2)])
    write_abf(syn.recording, tmp_path / "fast.abf")
    pyabf.abfWriter.writeABF1(data, str(tmp_path / "ref.abf"), 10_000.0, units="mV")
    # pyabf's own ABF1 writer is the reference (general-purpose library).
    assert (tmp_path / "fast.abf").read_bytes() == (tmp_path / "ref.abf").read_bytes()
    abf = pyabf.ABF(str(tmp_path / "fast.abf"))
    abf.setSweep(1)
    assert abf.sweepCount == 2 and abf.dataRate == 10_000
    assert np.max(np.abs(abf.sweepY - data[1])) < 1 / 327.68 + 1e-9  # int16 step at +-100 mV


def test_nwb_writer_reads_back_with_pynwb(tmp_path):
    from pynwb import NWBHDF5IO

    syn = synthesize(preset("nodal-like"), duration_s=1.5, fs_hz=10_000.0, n_sweeps=2, sweep_gap_s=0.5, seed=1)
    write_nwb(syn.recording, tmp_path / "cell.nwb", cell_id="cell-A7")
    with NWBHDF5IO(str(tmp_path / "cell.nwb"), "r") as io:  # pynwb reads it (open standard)
        f = io.read()
        series = [f.acquisition[name] for name in sorted(f.acquisition)]
        assert [type(s).__name__ for s in series] == ["CurrentClampSeries"] * 2
        assert series[1].starting_time == pytest.approx(2.0) and series[1].rate == 10_000.0
        volts = series[1].data[:] * series[1].conversion
        np.testing.assert_allclose(volts * 1000.0, syn.recording.sweep(1), atol=1e-4)
        assert series[0].electrode.name == "cell-A7"


@pytest.mark.parametrize("umask", [0o022, 0o077, 0o002])
def test_written_recordings_follow_the_umask(tmp_path, umask):
    """Like every other output, not private (0600) files: POSIX open(2) gives a new file 0666 & ~umask."""
    import os

    from analysis.synthetic import preset, synthesize, write_abf, write_nwb

    syn = synthesize(preset("nodal-like"), duration_s=0.5, fs_hz=10_000.0, seed=2)
    old = os.umask(umask)
    try:
        write_abf(syn.recording, tmp_path / "a.abf")
        write_nwb(syn.recording, tmp_path / "a.nwb")
    finally:
        os.umask(old)
    for name in ("a.abf", "a.nwb"):
        assert (tmp_path / name).stat().st_mode & 0o777 == 0o666 & ~umask, name
