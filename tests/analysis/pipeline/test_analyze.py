"""``analyze``: channel choice, voltage-clamp refusal, sweeps, the table's columns, warnings."""

from __future__ import annotations

import numpy as np
import pytest

from analysis import CSV_COLUMNS, Recording, RecordingError, Settings, analyze, open_recording
from analysis.pipeline import looks_like_membrane_potential
from tests.analysis.beat_traces import gaussian_train, pacemaker_train

FS = 10_000.0


def _beats(n_s=3.0, **kw):
    v, centres = gaussian_train(FS, n_s, cl_s=0.5, **kw)
    return v, centres


def test_table_has_every_csv_column_then_markers_and_labels():
    v, centres = _beats()
    result = analyze(Recording.from_array(v, FS, source_path="/data/cell_07.abf"))
    b = result.beats
    assert b.names[: len(CSV_COLUMNS)] == list(CSV_COLUMNS)  # CONTRACT.md's order
    for extra in ("i_upstroke", "t_mdp_s", "t_top_s", "t_peak_s", "t_apd20_s", "t_apd50_s", "t_apd90_s", "reject_reason"):
        assert extra in b.names
    assert set(b["file"]) == {"cell_07.abf"} and set(b["condition"]) == {""}
    assert list(b["beat"]) == list(range(len(centres))) and set(b["sweep"]) == {0}
    assert np.all(np.abs(b["t_peak_s"] - centres) < 1e-4)  # construction
    assert np.all(np.abs(b["i_upstroke"] - b["t_upstroke_s"] * FS) <= 0.5)
    assert result.channel == 0 and result.ljp_mV == 0.0 and result.settings == Settings()
    assert analyze(Recording.from_array(v, FS), label="given").beats["file"][0] == "given"


def test_ljp_is_subtracted_and_recorded():
    v, _ = _beats()
    plain = analyze(Recording.from_array(v, FS)).beats
    shifted = analyze(Recording.from_array(v, FS), Settings().replace("preprocess.ljp_mV", 14.0))
    assert shifted.ljp_mV == 14.0
    np.testing.assert_allclose(shifted.beats["mdp_mV"][1:], plain["mdp_mV"][1:] - 14.0, atol=1e-9)  # V_true = V - LJP
    np.testing.assert_allclose(shifted.beats["apd90_ms"][1:], plain["apd90_ms"][1:], atol=1e-9)  # shapes unchanged


def test_sweeps_restart_beat_numbers_and_cycle_lengths():
    v, centres = _beats()
    rec = Recording.from_array(np.stack([v, v, v]), FS)
    b = analyze(rec, sweeps=[0, 2]).beats
    assert sorted(set(b["sweep"])) == [0, 2]
    for s in (0, 2):
        rows = b["sweep"] == s
        assert b["beat"][rows][0] == 0 and np.isnan(b["cl_ms"][rows][0])  # no CL across sweeps
        assert b["flags"][rows][0].startswith("no_diastole")
    with pytest.raises(RecordingError, match="no sweep 5"):
        analyze(rec, sweeps=[5])


def test_channel_choice_says_which_channel_it_took():
    v, _ = _beats()
    rec = Recording.from_array(np.stack([[np.sin(np.arange(v.size))], [v]]), FS, units=["pA", "mV"], channel_names=["Im", "Vm"])
    result = analyze(rec)
    assert result.channel == 1 and result.channel_name == "Vm"
    assert any("channel 1 (Vm, mV)" in w for w in result.warnings)
    assert len(analyze(rec, channel="Vm").beats) == len(result.beats)


def test_voltage_clamp_channel_is_refused_with_a_units_hint_when_it_looks_like_vm():
    v, _ = _beats()
    rec = Recording.from_array(v, FS, units="pA", source_path="cell.abf")
    assert looks_like_membrane_potential(rec, 0)
    with pytest.raises(RecordingError, match=r"cell.abf: channel 0 \(ch0\) is in pA.*--units 0=mV"):
        analyze(rec)
    current = Recording.from_array(200 * np.sin(np.arange(20_000) / 50.0), FS, units="pA")
    assert not looks_like_membrane_potential(current, 0)
    with pytest.raises(RecordingError, match="voltage-clamp"):
        analyze(current)
    assert len(analyze(rec.with_units(0, "mV")).beats) > 0  # the override analyses it


def test_volts_are_converted_to_millivolts():
    v, _ = _beats()
    in_mv = analyze(Recording.from_array(v, FS)).beats
    in_v = analyze(Recording.from_array(v / 1000.0, FS, units="V")).beats
    np.testing.assert_allclose(in_v["peak_mV"], in_mv["peak_mV"], atol=1e-6)  # 1 V = 1000 mV


def test_low_sampling_rate_warns_that_dvdt_max_cannot_be_trusted():
    fs = 1000.0
    v, _ = pacemaker_train(fs, 5.0, dvdt_max_V_per_s=100.0, amp_mV=100.0, mdp_mV=-80.0, ddr_mV_per_s=20.0, repol_ms=200.0)
    result = analyze(Recording.from_array(v, fs))
    assert len(result.beats) > 0
    assert any("dV/dt max cannot be trusted" in w and "1 kHz" in w for w in result.warnings)  # MEASUREMENTS.md: < ~10 samples
    v20, _ = pacemaker_train(20_000.0, 2.0)
    assert not any("cannot be trusted" in w for w in analyze(Recording.from_array(v20, 20_000.0)).warnings)


def test_no_beats_gives_an_empty_table_and_a_warning():
    result = analyze(Recording.from_array(np.full(20_000, -70.0), FS))
    assert len(result.beats) == 0 and list(result.beats.names[: len(CSV_COLUMNS)]) == list(CSV_COLUMNS)
    assert any("no beats found" in w for w in result.warnings)


def test_chunked_pipeline_equals_unchunked():
    v, _ = pacemaker_train(FS, 30.0, cl_s=0.41)
    v = v + 0.2 * np.random.default_rng(0).normal(size=v.size)
    rec = Recording.from_array(v, FS)
    big = analyze(rec, Settings().updated({"detection.chunk_s": 3600.0, "detection.level_window_s": 0.5}))
    small = analyze(rec, Settings().updated({"detection.chunk_s": 2.0, "detection.level_window_s": 0.5}))
    np.testing.assert_array_equal(small.beats["i_upstroke"], big.beats["i_upstroke"])
    for name in ("mdp_mV", "top_mV", "ddr_mV_per_s", "dvdt_max_V_per_s", "peak_mV", "apd90_ms", "cl_ms"):
        np.testing.assert_allclose(small.beats[name], big.beats[name], rtol=1e-9, atol=1e-9, equal_nan=True)


def test_an_artefact_detection_is_not_a_beat_of_the_cycle_length_chain():
    from analysis.synthetic import preset, synthesize

    # A 60 mV, 3 ms wide bump in the diastole of beat 4 of a nodal-like cell: wide enough to be
    # detected, far too short to be an action potential (APD90 ~7 ms < artefact_min_apd90_ms).
    syn = synthesize(preset("nodal-like"), duration_s=10.0, fs_hz=FS, seed=4)
    truth = syn.truth.beats
    t_bump = truth["t_mdp_s"][4] + 0.3 * (truth["t_top_s"][4] - truth["t_mdp_s"][4])
    t = np.arange(syn.recording.n_samples(0)) / FS
    v = syn.recording.sweep(0) + 60.0 * np.exp(-(((t - t_bump) / 0.003) ** 2))
    b = analyze(Recording.from_array(v, FS)).beats
    assert len(b) == len(truth) + 1
    row = int(np.argmin(np.abs(b["t_upstroke_s"] - t_bump)))
    assert b["accepted"][row] == 0 and b["reject_reason"][row].startswith("auto: artefact")
    real = np.delete(np.arange(len(b)), row)
    # Artefacts are not beats (MEASUREMENTS.md, Beats): the real beats' cycle lengths, MDPs and
    # DDRs are those of the cell (analysis.synthetic._cells's exact truth; clean tolerances CL 0.25 ms,
    # MDP 0.5 mV, DDR 10 %), the one after the artefact included.
    np.testing.assert_allclose(b["cl_ms"][real][1:], truth["cl_ms"][1:], atol=0.25)
    np.testing.assert_allclose(b["mdp_mV"][real][1:], truth["mdp_mV"][1:], atol=0.5)
    np.testing.assert_allclose(b["ddr_mV_per_s"][real][1:], truth["ddr_mV_per_s"][1:], rtol=0.10)
    np.testing.assert_allclose(b["apd90_ms"][real][1:], truth["apd90_ms"][1:], atol=1.0)


def test_progress_reaches_the_total():
    v, _ = _beats()
    seen = []
    analyze(Recording.from_array(v, FS), progress=lambda done, total: seen.append((done, total)))
    assert seen and seen[-1][0] == seen[-1][1] and all(a <= b for a, b in seen)


def test_progress_moves_during_detection_of_a_long_sweep():
    """A sweep of several detection chunks reports each chunk, so a progress bar moves before the
    measurement starts (the first half of the total is detection; common practice, no source)."""
    from analysis.settings import Settings

    v, _ = _beats()
    rec = Recording.from_array(np.tile(v, 8), FS)  # 24 s: detection works it in blocks of several seconds
    seen = []
    analyze(rec, Settings().replace("detection.chunk_s", 1.0),
            progress=lambda done, total: seen.append((done, total)))
    total = seen[-1][1]
    during_detection = [d for d, _ in seen if d < total // 2]
    assert len(during_detection) >= 3 and all(a <= b for a, b in zip(seen, seen[1:]))
    assert seen[-1][0] == total


# -- real recordings from working labs (../shared/real-abf) ---------------------------------------
@pytest.mark.realdata
def test_real_multichannel_file_analyses_its_only_mv_channel(real_abf_dir):
    rec = open_recording(real_abf_dir / "16d22006_kim_gapfree.abf")  # channels dB | mV (MANIFEST.csv)
    result = analyze(rec)
    assert rec.channels[result.channel].units == "mV" and result.channel == 1
    assert any("analysed channel 1" in w for w in result.warnings)


@pytest.mark.realdata
def test_real_mislabelled_file_is_refused_then_analysed_with_the_override(real_abf_dir):
    path = real_abf_dir / "opto_aps_bad_units.abf"  # action potentials stored as pA (README.md there)
    with pytest.raises(RecordingError, match="--units 0=mV"):
        analyze(open_recording(path))
    result = analyze(open_recording(path, units={0: "mV"}))
    assert result.channel == 0 and any("overridden (pA -> mV)" in w for w in result.warnings)
    assert sum(len(a[0]) for a in result.artefacts.values()) > 0  # its 1 ms spikes were seen and judged


@pytest.mark.realdata
def test_real_mislabelled_file_warns_that_its_values_are_no_membrane_potential(real_abf_dir):
    # Stored as pA, its samples span -1595 to 816 in sweep 0 (MANIFEST.csv) and -1600 to 816 over
    # its three sweeps (pyabf's scaling, read here): declared mV, that is no membrane potential,
    # so the gain must be wrong as well as the units (the same cell's good-units file spans -79
    # to 41 mV, MANIFEST.csv).
    result = analyze(open_recording(real_abf_dir / "opto_aps_bad_units.abf", units={0: "mV"}))
    note = [w for w in result.warnings if "implausible for a membrane potential" in w]
    assert len(note) == 1 and "spans -1600 to 816 mV" in note[0] and "gain" in note[0]
    good = analyze(open_recording(real_abf_dir / "opto_aps_good_units.abf", units={0: "mV"}))
    assert not any("implausible" in w for w in good.warnings)  # -79 to 41 mV (MANIFEST.csv)


def test_a_units_override_to_plausible_millivolts_says_nothing_more():
    v, _ = _beats()
    result = analyze(Recording.from_array(v, FS, units="pA").with_units(0, "mV"))
    assert any("overridden (pA -> mV)" in w for w in result.warnings)
    assert not any("implausible" in w for w in result.warnings)
    wrong_gain = analyze(Recording.from_array(v * 20.0, FS, units="pA").with_units(0, "mV"))
    # a gain 20 times too large: -1200 to +400 "mV" (construction)
    assert any("implausible for a membrane potential" in w for w in wrong_gain.warnings)


@pytest.mark.realdata
def test_real_1_khz_recording_warns_about_dvdt_max(real_abf_dir):
    rec = open_recording(real_abf_dir / "File_axon_2.abf")  # 20 min at 1 kHz, current clamp (README.md)
    result = analyze(rec)
    assert len(result.beats) > 0
    assert any("dV/dt max cannot be trusted" in w for w in result.warnings)
