"""The demo scenario analysed: Upstroke finds what the generator planted, and the cells are plausible.

The planted events come from the generator's own truth (``app.demo_data``, the same seeds as the
committed files); the analysis runs on the committed files, as ``upstroke demo`` opens them. The
plausibility checks compare the measured steady states with the reference values of
MEASUREMENTS.md, each source named beside its assertion. The cells are invented: these checks
say the demo looks like its kind of cell, not that Upstroke is accurate (the accuracy tests do).
"""

from __future__ import annotations

from pathlib import Path

import numpy as np
import pytest

from analysis import Session, analyze, open_recording
from app import demo_data

pytestmark = pytest.mark.slow  # a three-minute recording is analysed (a few seconds)

SAMPLES = Path(__file__).resolve().parent.parent / "sample_data"


@pytest.fixture(scope="module")
def planted():
    return demo_data.gap_free_scenario().truth


@pytest.fixture(scope="module")
def result():
    return analyze(open_recording(SAMPLES / demo_data.GAP_FREE_ABF))


@pytest.fixture(scope="module")
def session(result):
    s = Session()
    key = s.add(SAMPLES / demo_data.GAP_FREE_ABF, result=result, conditions=demo_data.demo_conditions(None))
    return s, key


@pytest.fixture(scope="module")
def beats(session):
    s, key = session
    return s.beats(key)


@pytest.fixture(scope="module")
def summaries(session):
    s, key = session
    return {x.values["condition"]: x.values for x in s.summaries(key)}


def _flags(beats) -> list[set[str]]:
    return [set(f.split(";")) - {""} for f in beats["flags"]]


def _times(planted, kind: str) -> np.ndarray:
    return planted.times(kind)


def _seal(planted) -> tuple[float, float]:
    ev = planted.events
    i = int(np.flatnonzero(ev["kind"] == "seal")[0])
    return float(ev["t_s"][i]), float(ev["stop_s"][i])


def test_every_beat_is_found_and_no_artefact_is_taken_for_one(beats, planted):
    t, truth_t = np.asarray(beats["t_upstroke_s"]), np.asarray(planted.beats["t_upstroke_s"])
    assert len(t) == len(truth_t)  # the generator's exact beat train
    # A nodal upstroke's dV/dt peak is broad, and noise moves its top by a few samples.
    assert np.median(np.abs(t - truth_t)) < 1e-3 and np.max(np.abs(t - truth_t)) < 5e-3
    for t_art in _times(planted, "artefact"):
        assert np.min(np.abs(t - t_art)) > 0.05, f"the artefact at {t_art} s was taken for a beat"


def test_each_artefact_is_found_as_an_electrical_spike(result, planted):
    spans_s = np.asarray(result.spikes[0], float) / demo_data.FS_HZ
    for t_art in _times(planted, "artefact"):
        assert np.any((spans_s[:, 0] <= t_art + 1e-4) & (t_art <= spans_s[:, 1])), f"no spike found at {t_art} s"
    assert len(spans_s) == len(_times(planted, "artefact"))  # and nothing else taken for one


def test_each_artefact_flags_the_beat_whose_diastole_holds_it(beats, planted):
    t, flags = np.asarray(beats["t_upstroke_s"]), _flags(beats)
    for t_art in _times(planted, "artefact"):
        nxt = int(np.flatnonzero(t > t_art)[0])
        assert "noisy" in flags[nxt], f"the artefact at {t_art} s left beat {nxt} unflagged"
        # noisy is no automatic rejection: the beat waits for the reviewer (quality.review_flags).
        assert beats["verdict"][nxt] == "to_review" and beats["accepted"][nxt] == 0


def test_the_dad_is_flagged_on_the_beat_it_follows(beats, planted):
    t, flags = np.asarray(beats["t_upstroke_s"]), _flags(beats)
    (t_dad,) = _times(planted, "dad")
    before = int(np.flatnonzero(t < t_dad)[-1])
    assert "dad" in flags[before]
    assert 1.5 <= beats["dad_mV"][before] <= 4.0  # of the 4 mV planted, on a rising phase 4
    start, stop = _seal(planted)
    elsewhere = [i for i, f in enumerate(flags) if "dad" in f and not (start <= t[i] <= stop + 1.0)]
    assert elsewhere == [before]  # one DAD outside the seal trouble


def test_the_pause_is_flagged(beats, planted):
    t, flags = np.asarray(beats["t_upstroke_s"]), _flags(beats)
    (t_pause,) = _times(planted, "pause")
    i = int(np.argmin(np.abs(t - t_pause)))
    assert abs(t[i] - t_pause) < 1e-3
    assert [j for j, f in enumerate(flags) if "pause" in f] == [i]
    median = np.nanmedian(beats["cl_ms"][i - 5:i + 5])
    assert beats["cl_ms"][i] == pytest.approx(2.5 * median, rel=0.05)  # the factor planted


def test_the_seal_trouble_is_flagged(beats, planted):
    t, flags = np.asarray(beats["t_upstroke_s"]), _flags(beats)
    start, stop = _seal(planted)
    inside = np.flatnonzero((t > start + 0.5) & (t < stop))
    assert inside.size >= 4
    assert all({"noisy", "mdp_drift"} <= flags[i] for i in inside)
    drifted = [i for i, f in enumerate(flags) if "mdp_drift" in f]
    assert all(start <= t[i] <= stop + 1.0 for i in drifted)


def test_no_flag_without_a_planted_cause(beats, planted):
    t, flags = np.asarray(beats["t_upstroke_s"]), _flags(beats)
    start, stop = _seal(planted)
    explained = {0}  # the first beat: no_diastole
    explained |= {int(np.flatnonzero(t > a)[0]) for a in _times(planted, "artefact")}
    explained |= {int(np.flatnonzero(t < d)[-1]) for d in _times(planted, "dad")}
    explained |= {int(np.argmin(np.abs(t - p))) for p in _times(planted, "pause")}
    explained |= {int(i) for i in np.flatnonzero((t >= start) & (t <= stop + 1.0))}
    flagged = {i for i, f in enumerate(flags) if f}
    assert flagged <= explained, f"unexplained flags: {[(round(t[i], 3), flags[i]) for i in sorted(flagged - explained)]}"
    assert flags[0] == {"no_diastole"}


def test_rate_falls_during_wash_in_and_recovers_in_washout(summaries, planted):
    base, drug, wash = (summaries[c.name] for c in demo_data.demo_conditions(None))
    assert drug["rate_mean_bpm"] < 0.75 * base["rate_mean_bpm"]  # planted: phase 4 at 55 %
    assert wash["rate_mean_bpm"] == pytest.approx(base["rate_mean_bpm"], rel=0.03)
    assert drug["ddr_mean_mV_per_s"] < 0.6 * base["ddr_mean_mV_per_s"]  # the flattened phase 4
    # The compound changes neither the upstroke nor the repolarisation (as planted).
    assert drug["dvdt_max_mean_V_per_s"] == pytest.approx(base["dvdt_max_mean_V_per_s"], rel=0.02)
    assert drug["apd90_mean_ms"] == pytest.approx(base["apd90_mean_ms"], rel=0.02)
    # Each steady-state mean CL agrees with the generator's truth over the same window.
    tt, cl = np.asarray(planted.beats["t_upstroke_s"]), np.asarray(planted.beats["cl_ms"])
    for s in (base, drug, wash):
        sel = (tt >= s["window_start_s"] - 1e-3) & (tt <= s["window_end_s"] + 1e-3) & np.isfinite(cl)
        assert s["cl_mean_ms"] == pytest.approx(np.mean(cl[sel]), rel=0.005)


def test_the_nodal_like_baseline_is_plausible(summaries):
    base = summaries["baseline"]
    # Human SAN myocytes, CL 828 +- 15 ms (Verkerk et al. 2007, Eur Heart J 28:2472): within 25 %.
    assert 600 <= base["cl_mean_ms"] <= 1000
    # Nodal-like cells: MDP -50 to -65 mV, dV/dt max 2-20 V/s, amplitude 50-90 mV (MEASUREMENTS.md,
    # "Beats"); human SAN MDP -61.7 +- 4.3 mV, dV/dt max 4.6 +- 1.2 V/s (Verkerk et al. 2007).
    assert -65 <= base["mdp_mean_mV"] <= -50
    assert abs(base["mdp_mean_mV"] - -61.7) <= 4.3
    assert 2 <= base["dvdt_max_mean_V_per_s"] <= 20
    assert abs(base["dvdt_max_mean_V_per_s"] - 4.6) <= 1.2
    assert 50 <= base["apa_mean_mV"] <= 90
    # Rabbit SAN model: APA 80 mV, APD50 108 ms (Severi et al. 2012, J Physiol 590:4483): within 20 %.
    assert base["apd50_mean_ms"] == pytest.approx(108, rel=0.2)
    # SA node: threshold about -40 mV, peak about +10 mV (common practice, no source).
    assert abs(base["top_mean_mV"] - -40) <= 10
    assert 0 <= base["peak_mean_mV"] <= 30


def test_the_ventricular_like_episodic_cell_is_plausible_and_its_ead_is_flagged():
    rec = open_recording(SAMPLES / demo_data.EPISODIC_ABF)
    result = analyze(rec)
    b = result.beats
    assert rec.n_sweeps == demo_data.EPISODIC_SWEEPS
    assert not [w for w in result.warnings if "cannot be trusted" in w]  # 50 kHz is enough
    measured = np.asarray(["no_diastole" not in f for f in b["flags"]])
    mdp = np.nanmean(b["mdp_mV"][measured])
    dvdt = np.nanmean(b["dvdt_max_V_per_s"])
    apd90 = np.nanmean(b["apd90_ms"][measured])
    # Adult human ventricle: MDP about -90 mV, dV/dt max 254-303 V/s, APD 228-259 ms (review table
    # of PSC-CM vs adult values, from memory; MEASUREMENTS.md reference table). A spontaneously
    # beating ventricular-like cell sits a little depolarised: -75 to -90 mV.
    assert -90 <= mdp <= -75
    assert 254 <= dvdt <= 303
    assert 228 <= apd90 <= 259
    truth = demo_data.episodic_scenario().truth
    (t_ead,) = truth.times("ead")
    sweep = int(truth.events["sweep"][0])
    rows = np.flatnonzero((b["sweep"] == sweep) & (b["t_upstroke_s"] < t_ead))
    ead_row = int(rows[-1])
    assert "ead" in b["flags"][ead_row]
    assert [i for i, f in enumerate(b["flags"]) if "ead" in f] == [ead_row]


def test_the_washout_summary_leaves_the_seal_trouble_out_until_it_is_reviewed(result, session, beats, planted):
    # The seal trouble depolarises the MDP by up to 12 mV (planted); its beats are flagged noisy and
    # mdp_drift and wait for review, so the washout means are those of the clean beats.
    s, key = session
    t = np.asarray(beats["t_upstroke_s"])
    start, stop = _seal(planted)
    wash = np.asarray(beats["condition"]) == "washout"
    held = np.flatnonzero(wash & (np.asarray(beats["verdict"]) == "to_review"))
    seal = np.flatnonzero(wash & (t >= start) & (t <= stop + 1.0) & (np.asarray(beats["flags"]) != ""))
    assert set(seal) <= set(held) and seal.size >= 5
    (t_art,) = [a for a in _times(planted, "artefact") if a > demo_data.WASH_OUT_S]
    assert set(held) == set(seal) | {int(np.flatnonzero(t > t_art)[0])}  # and the artefact's beat
    summary = {x.values["condition"]: x for x in s.summaries(key)}["washout"]
    v, used = summary.values, summary.beat_rows
    assert v["n_beats"] == int(wash.sum()) and v["n_to_review"] == held.size and v["n_rejected"] == 0
    assert not set(used) & set(held)
    lo, hi = v["window_start_s"], v["window_end_s"]
    assert v["n_in_window"] == int((wash & (t >= lo) & (t <= hi)).sum())
    assert v["n_used"] == used.size == v["n_in_window"] - int(((t[held] >= lo) & (t[held] <= hi)).sum())
    mdp = np.asarray(beats["mdp_mV"])
    assert v["mdp_mean_mV"] == pytest.approx(np.mean(mdp[used]), rel=1e-12)  # numpy: the beats used
    # Clean washout beats sit near the baseline MDP: the generator's truth over the window, without
    # the seal trouble, within 0.5 mV (the drift of 0.8 mV/min is in both).
    truth_t, truth_mdp = np.asarray(planted.beats["t_upstroke_s"]), np.asarray(planted.beats["mdp_mV"])
    clean_truth = (truth_t >= lo) & (truth_t <= hi) & ~((truth_t >= start) & (truth_t <= stop + 1.0))
    assert v["mdp_mean_mV"] == pytest.approx(np.nanmean(truth_mdp[clean_truth]), abs=0.5)
    assert v["mdp_sd_mV"] < 0.5  # the seal trouble's beats would spread it to several mV

    # Once the reviewer accepts them, they count and pull the MDP up (by the leak's depolarisation).
    review = Session()  # a session of its own: the shared one stays unreviewed
    k2 = review.add(SAMPLES / demo_data.GAP_FREE_ABF, result=result, conditions=demo_data.demo_conditions(None))
    review.accept(k2, held.tolist())
    after = {x.values["condition"]: x for x in review.summaries(k2)}["washout"].values
    assert after["n_to_review"] == 0 and after["n_used"] > v["n_used"]
    assert after["mdp_mean_mV"] > v["mdp_mean_mV"] + 1.0


def test_the_command_line_says_how_many_beats_wait_and_keeps_them_out_of_the_washout(tmp_path, capsys, beats):
    import csv

    from app.cli import main

    summary_csv, beats_csv = tmp_path / "summary.csv", tmp_path / "beats.csv"
    args = [a for t in demo_data.CONDITION_TEXTS for a in ("--condition", t)]
    assert main(["analyze", str(SAMPLES / demo_data.GAP_FREE_ABF), *args, "--summary-csv", str(summary_csv),
                 "--csv", str(beats_csv)]) == 0
    out = capsys.readouterr().out
    verdict = np.asarray(beats["verdict"])
    n, waiting = len(verdict), int((verdict == "to_review").sum())
    # The scenario: 3 artefacts' beats and the 6 beats of the seal trouble wait; nothing is rejected.
    assert (n, waiting) == (189, 9)
    assert "189 beats (180 used, 0 rejected, 9 waiting for review)" in out
    with open(summary_csv, newline="") as fh:
        wash = next(r for r in csv.DictReader(fh) if r["condition"] == "washout")
    assert (wash["n_beats"], wash["n_in_window"], wash["n_used"], wash["n_rejected"], wash["n_to_review"]) == (
        "67", "37", "31", "0", "7")
    with open(beats_csv, newline="") as fh:
        rows = list(csv.DictReader(fh))
    lo, hi = float(wash["window_start_s"]), float(wash["window_end_s"])
    used = [r for r in rows if r["condition"] == "washout" and r["accepted"] == "1"
            and lo - 1e-3 <= float(r["t_upstroke_s"]) <= hi + 1e-3]
    assert len(used) == 31
    # The summary's means are those of the beats the CSV marks used (numpy on the CSV's values).
    for col in ("mdp_mV", "cl_ms", "apd90_ms", "dvdt_max_V_per_s"):
        mean = np.mean([float(r[col]) for r in used if r[col] != ""])  # empty: undefined, left out
        stem = col.rsplit("_", 1)[0] if col != "dvdt_max_V_per_s" else "dvdt_max"
        unit = col[len(stem) + 1:]
        assert float(wash[f"{stem}_mean_{unit}"]) == pytest.approx(mean, abs=2e-3)
    assert -62.0 < float(wash["mdp_mean_mV"]) < -59.0  # the clean beats only (seal trouble: about -48 mV)
