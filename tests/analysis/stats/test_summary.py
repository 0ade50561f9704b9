"""Summaries and variability against published definitions and hand-computed values."""

from __future__ import annotations

import math

import numpy as np
import pytest

from analysis.conditions import Condition, SteadyState, parse_condition
from analysis.settings import Settings
from analysis.stats import PARAMETERS, SUMMARY_COLUMNS, eligible_mask, suggest_steady_state, summarize, summary_columns, summary_csv
from analysis.table import BeatTable
from analysis.stats import cell_type_hint, coefficient_of_variation_pct, linear_relation, poincare_sd1_sd2, rmssd, sdnn, stv

CL = np.array([800.0, 810.0, 790.0, 805.0, 795.0])


# -- variability formulas ----------------------------------------------------------------------
def test_sdnn_is_the_sample_sd_of_the_intervals():
    # Task Force of the ESC/NASPE 1996 (Eur Heart J 17:354): SDNN, the SD of the NN intervals.
    # By hand: deviations 0, 10, -10, 5, -5; squares sum to 250; 250 / (5 - 1) = 62.5.
    assert sdnn(CL) == pytest.approx(math.sqrt(62.5), rel=1e-12)
    assert sdnn(CL) == pytest.approx(np.std(CL, ddof=1))  # numpy as a reference library


def test_rmssd_by_hand():
    # Task Force ESC/NASPE 1996: RMSSD, root mean square of successive differences.
    # By hand: differences 10, -20, 15, -10; squares 100, 400, 225, 100; mean 206.25.
    assert rmssd(CL) == pytest.approx(math.sqrt(206.25), rel=1e-12)


def test_cv_is_sd_over_mean():
    # MEASUREMENTS.md: CV = SD / mean; by hand 7.9057 / 800.
    assert coefficient_of_variation_pct(CL) == pytest.approx(100 * math.sqrt(62.5) / 800.0)


def test_sd1_equals_rmssd_over_root_two_when_differences_average_zero():
    # Brennan, Palaniswami & Kamen 2001 (IEEE Trans Biomed Eng 48:1342): SD1 = RMSSD / sqrt 2.
    cl = np.array([800.0, 810.0, 790.0, 800.0])  # differences 10, -20, 10: mean 0
    sd1, sd2 = poincare_sd1_sd2(cl)
    assert sd1 == pytest.approx(rmssd(cl) / math.sqrt(2.0), rel=1e-12)
    assert sd1 == pytest.approx(10.0, rel=1e-12)  # by hand: sqrt(600 / 3) / sqrt 2
    # By hand: pair sums 1610, 1600, 1590 -> population SD sqrt(200/3), divided by sqrt 2.
    assert sd2 == pytest.approx(math.sqrt(200.0 / 3.0) / math.sqrt(2.0), rel=1e-12)


def test_sd1_identity_with_a_nonzero_mean_difference():
    # Brennan et al. 2001: SD1^2 = SDSD^2 / 2, and SDSD^2 = RMSSD^2 - mean(d)^2 (variance identity).
    d_mean = np.mean(np.diff(CL))  # -1.25
    sd1, _ = poincare_sd1_sd2(CL)
    assert sd1**2 == pytest.approx(rmssd(CL) ** 2 / 2 - d_mean**2 / 2, rel=1e-12)


def test_stv_by_hand():
    # Thomsen et al. 2004 (Circulation, from memory): STV = sum |D(n+1) - D(n)| / (N sqrt 2).
    apd = np.array([300.0, 304.0, 298.0, 301.0])  # |differences| 4, 6, 3
    assert stv(apd) == pytest.approx(13.0 / (3 * math.sqrt(2.0)), rel=1e-12)


def test_pairs_skip_links_that_are_not_consecutive():
    # Common practice, no source: no successive difference across a gap or a sweep boundary.
    cl = np.array([800.0, 810.0, 700.0, 790.0])
    linked = np.array([True, False, True])  # beat 2 follows a rejected beat
    # Differences used: 10 and 90.
    assert rmssd(cl, linked) == pytest.approx(math.sqrt((100 + 8100) / 2))
    assert stv(cl, linked) == pytest.approx(100 / (2 * math.sqrt(2)))
    assert math.isnan(rmssd(np.array([800.0])))


def test_linear_relation_matches_scipy_linregress():
    from scipy.stats import linregress  # reference library

    rng = np.random.default_rng(4)
    ddr = rng.uniform(40, 120, 50)
    cl = 1200 - 5 * ddr + rng.normal(0, 20, 50)
    slope, r, n = linear_relation(ddr, cl)
    ref = linregress(ddr, cl)
    assert n == 50
    assert slope == pytest.approx(ref.slope, rel=1e-10)
    assert r == pytest.approx(ref.rvalue, rel=1e-10)


@pytest.mark.parametrize(
    "kw, expected",
    [
        # MEASUREMENTS.md thresholds (from memory): nodal-like dV/dt max < ~10 V/s, depolarised
        # MDP, prominent phase 4; ventricular-like APD90/APD50 <= ~1.4; atrial-like >= ~1.7.
        (dict(apd90_ms=160, apd50_ms=110, dvdt_max_V_per_s=4.6, mdp_mV=-61.7, ddr_mV_per_s=50), "nodal-like"),
        (dict(apd90_ms=300, apd50_ms=250, dvdt_max_V_per_s=150, mdp_mV=-80, ddr_mV_per_s=5), "ventricular-like"),
        (dict(apd90_ms=180, apd50_ms=90, dvdt_max_V_per_s=90, mdp_mV=-72, ddr_mV_per_s=5), "atrial-like"),
        (dict(apd90_ms=240, apd50_ms=160, dvdt_max_V_per_s=90, mdp_mV=-72, ddr_mV_per_s=5), "unclassified"),
    ],
)
def test_cell_type_hint_names_its_rule(kw, expected):
    label, rule = cell_type_hint(**kw)
    assert label == expected
    assert rule  # the rule is always shown beside the label
    if expected != "nodal-like":
        assert "APD90/APD50" in rule


# -- steady state ------------------------------------------------------------------------------
def test_steady_state_found_after_a_wash_in():
    # A wash-in that lengthens CL from 500 to 800 ms over 150 s, then a plateau; "steady" as
    # less than 3 %/min change of the rolling mean (common practice, no source).
    rng = np.random.default_rng(1)
    t = np.arange(0.0, 300.0, 1.0)
    cl = np.where(t < 150, 500 + 2.0 * t, 800.0) * (1 + rng.normal(0, 0.002, t.size))
    apd = np.full(t.size, 200.0) * (1 + rng.normal(0, 0.002, t.size))
    window, note = suggest_steady_state(t, cl, apd, window_s=60.0, tolerance_pct_per_min=3.0, min_beats=10)
    assert window is not None, note
    assert 140.0 <= window[0] <= 185.0
    assert window[1] == 299.0
    assert "3" in note


def test_no_steady_state_during_a_steady_drift():
    t = np.arange(0.0, 120.0, 0.5)
    cl = 600 + 1.0 * t  # 10 %/min of 600 ms
    window, note = suggest_steady_state(t, cl, np.full(t.size, 200.0), window_s=30.0, tolerance_pct_per_min=3.0, min_beats=10)
    assert window is None
    assert "no 30 s window" in note


# -- summaries of a hand-built table -------------------------------------------------------------
def _table(n=40, cl_ms=800.0):
    rng = np.random.default_rng(7)
    cl = cl_ms + rng.normal(0, 10, n)
    t_up = 0.5 + np.concatenate([[0.0], np.cumsum(cl[1:]) / 1000.0])
    flags = [""] * n
    flags[0] = "no_diastole"
    flags[-1] = "truncated"
    accepted = np.ones(n, dtype=int)
    accepted[5] = 0
    cols = {
        "file": ["c1"] * n, "sweep": [0] * n, "beat": np.arange(n), "t_upstroke_s": t_up,
        "accepted": accepted, "flags": flags, "condition": [""] * n, "cl_ms": cl, "rate_bpm": 60000 / cl,
        "mdp_mV": rng.normal(-62, 0.5, n), "top_mV": rng.normal(-45, 0.5, n), "ddr_mV_per_s": rng.normal(60, 3, n),
        "ddr100_mV_per_s": rng.normal(80, 3, n), "dvdt_max_V_per_s": rng.normal(5, 0.2, n),
        "peak_mV": rng.normal(18, 0.5, n), "apa_mV": rng.normal(80, 0.5, n), "apd20_ms": rng.normal(60, 1, n),
        "apd50_ms": rng.normal(110, 1, n), "apd90_ms": rng.normal(160, 2, n),
        "t_mdp_s": t_up - 0.4,
    }
    cols["cl_ms"][0] = np.nan
    return BeatTable(cols)


def test_summary_leaves_out_rejected_and_unmeasurable_beats():
    t = _table()
    eligible = eligible_mask(t)
    assert not eligible[0] and not eligible[-1] and not eligible[5]  # MEASUREMENTS.md, Beats
    s = summarize(
        t, label="c1", sweep_starts_s=[0.0], sweep_durations_s=[40.0], settings=Settings().summary,
        settings_hash="abc",
    )
    assert len(s) == 1
    row = s[0].values
    used = eligible
    assert row["n_beats"] == 40 and row["n_rejected"] == 1 and row["n_used"] == int(used.sum())
    assert row["mdp_mean_mV"] == pytest.approx(np.mean(t["mdp_mV"][used]))  # numpy reference
    assert row["apd90_sd_ms"] == pytest.approx(np.std(t["apd90_ms"][used], ddof=1))
    # RMSSD over consecutive eligible beats only (beats 4-5 and 5-6 break at the rejected beat).
    idx = np.flatnonzero(used)
    pairs = [(a, b) for a, b in zip(idx, idx[1:]) if b == a + 1]
    d = np.array([t["cl_ms"][b] - t["cl_ms"][a] for a, b in pairs])
    assert row["cl_rmssd_ms"] == pytest.approx(math.sqrt(np.mean(d**2)))  # Task Force 1996
    assert row["settings_hash"] == "abc" and row["window"] == "all"
    assert row["cell_type_hint"] == "nodal-like"


def test_summary_per_condition_and_window_rules():
    t = _table(60)
    t_up = t["t_upstroke_s"]
    conds = [
        parse_condition("baseline=0-20s,steady=last10beats"),
        Condition("drug", 20.0, math.inf, steady=SteadyState("last_s", 10.0)),
    ]
    from analysis.conditions import assign_conditions

    t = t.with_columns(condition=assign_conditions(t["sweep"], t_up, conds))
    s = summarize(t, label="c1", sweep_starts_s=[0.0], sweep_durations_s=[60.0], conditions=conds, settings=Settings().summary)
    by = {x.values["condition"]: x for x in s}
    assert set(by) == {"baseline", "drug"}
    assert by["baseline"].values["n_used"] == 10
    drug = by["drug"].values
    last = t_up[eligible_mask(t) & (t["condition"] == "drug")].max()
    inside = eligible_mask(t) & (t["condition"] == "drug") & (t_up > last - 10.0 - 1e-12)
    assert drug["n_used"] == int(inside.sum())
    assert drug["window"] == "last10s"


def test_summary_csv_has_the_documented_columns_and_empty_undefined_cells():
    t = _table()
    s = summarize(t, label="c1", sweep_starts_s=[0.0], sweep_durations_s=[40.0], settings=Settings().summary)
    text = summary_csv(summary_columns(s))
    import csv
    import io

    lines = list(csv.reader(io.StringIO(text)))
    assert lines[0] == list(SUMMARY_COLUMNS)
    cells = dict(zip(SUMMARY_COLUMNS, lines[1]))
    assert cells["ensemble_n"] == "0" and cells["ensemble_mdp_mV"] == ""  # no traces given: undefined
    assert cells["file"] == "c1" and cells["n_beats"] == "40"


def test_ensemble_beat_matches_the_synthetic_truth():
    # analysis.synthetic._cells's exact waveform gives each beat's true parameters; on a clean, steady
    # cell the ensemble-averaged beat measured by the core must match their means.
    from analysis.session import Session
    from analysis.synthetic import preset, synthesize

    syn = synthesize(preset("ventricular-like"), duration_s=30.0, fs_hz=20_000.0, seed=2)
    s = Session()
    key = s.add(syn.recording, label="v1")
    (summary,) = s.summaries(key)
    ens = summary.ensemble
    truth = syn.truth.beats
    ok = np.array([f == "" for f in truth["flags"]])
    assert ens is not None and ens.n_beats == summary.values["n_used"] >= 20
    assert ens.t0_s < 0 and ens.v_mV.size == round(np.median(truth["cl_ms"][ok]) * 20)
    p = ens.parameters
    assert p["mdp_mV"] == pytest.approx(np.mean(truth["mdp_mV"][ok]), abs=0.5)
    assert p["peak_mV"] == pytest.approx(np.mean(truth["peak_mV"][ok]), abs=0.5)
    assert p["apd90_ms"] == pytest.approx(np.mean(truth["apd90_ms"][ok]), abs=2.0)
    assert p["dvdt_max_V_per_s"] == pytest.approx(np.mean(truth["dvdt_max_V_per_s"][ok]), rel=0.05)


def test_the_cell_type_hint_is_judged_once_on_the_baseline_condition():
    t = _table(60)
    t_up = t["t_upstroke_s"]
    conds = [Condition("baseline", 0.0, 20.0), Condition("drug", 20.0, 40.0), Condition("washout", 40.0, math.inf)]
    from analysis.conditions import assign_conditions

    cond = assign_conditions(t["sweep"], t_up, conds)
    # under the drug the beats alone would not read as nodal-like: a 60 V/s upstroke
    dvdt = np.where(cond == "drug", 60.0, np.asarray(t["dvdt_max_V_per_s"], float))
    alone, _ = cell_type_hint(apd90_ms=160, apd50_ms=110, dvdt_max_V_per_s=60, mdp_mV=-60, ddr_mV_per_s=80)
    assert alone != "nodal-like"  # the rule's own verdict on the drug's beats (MEASUREMENTS.md thresholds)
    t = t.with_columns(condition=cond, dvdt_max_V_per_s=dvdt)
    s = summarize(t, label="c1", sweep_starts_s=[0.0], sweep_durations_s=[60.0], conditions=conds, settings=Settings().summary)
    hints = {x.values["condition"]: (x.values["cell_type_hint"], x.values["cell_type_rule"]) for x in s}
    assert set(hints) == {"baseline", "drug", "washout"}
    # one cell, one type: the baseline's, on every condition, saying where it was judged
    assert {h for h, _ in hints.values()} == {"nodal-like"}
    assert all("judged once, on baseline" in why for _, why in hints.values())
def test_summary_counts_are_unambiguous_and_the_means_are_those_of_the_beats_used():
    # 60 beats in one condition, a 10 s window at its end; some beats wait for review, one is rejected.
    from analysis.decisions import apply_status

    t = _table(60)
    flags = np.array(t["flags"], dtype=object)
    flags[[50, 52, 20]] = "noisy"  # two in the window, one before it
    reasons = np.full(60, "", dtype=object)
    reasons[5] = "auto: artefact"
    t = apply_status(t.with_columns(flags=flags, reject_reason=reasons, condition=["drug"] * 60), None, ("noisy",))
    t_up = t["t_upstroke_s"]
    cond = Condition("drug", 0.0, math.inf, steady=SteadyState("last_s", 10.0))
    (s,) = summarize(t, label="c1", sweep_starts_s=[0.0], sweep_durations_s=[60.0], conditions=[cond],
                     settings=Settings().summary)
    v = s.values
    used = s.beat_rows
    assert v["n_beats"] == 60 and v["n_rejected"] == 1 and v["n_to_review"] == 3
    lo, hi = v["window_start_s"], v["window_end_s"]
    in_window = (t_up >= lo) & (t_up <= hi)
    assert v["n_in_window"] == int(in_window.sum())
    # Used: accepted, in the window, not truncated (the last beat): counted by hand from the table.
    expected = np.flatnonzero(in_window & (t["verdict"] == "accepted") & (t["flags"] != "truncated"))
    assert v["n_used"] == used.size == expected.size and sorted(used) == expected.tolist()
    assert not {50, 52} & set(used.tolist())
    for col, stem, unit in PARAMETERS:  # numpy reference: the plain mean of the used beats
        x = np.asarray(t[col], float)[expected]
        x = x[np.isfinite(x)]
        assert v[f"{stem}_mean_{unit}"] == pytest.approx(np.mean(x), rel=1e-12)


def test_eligible_mask_reads_each_flag_of_a_combined_flag_string():
    # MEASUREMENTS.md, Beats: `no_diastole` and `truncated` beats stay in the table but out of
    # summaries; other flags (here `noisy`) do not keep a beat out, and a flag is a whole name
    # in the `;`-separated list ("no_diastole_like" is not `no_diastole`: common practice, no source).
    flags = ["", "noisy", "no_diastole", "noisy;truncated", "no_diastole_like", "truncated;no_diastole", "noisy", ""]
    accepted = [1, 1, 1, 1, 1, 1, 0, 0]
    t = BeatTable({"accepted": np.array(accepted), "flags": np.array(flags, dtype=object)})
    assert eligible_mask(t).tolist() == [True, True, False, False, True, False, False, False]
    assert eligible_mask(t.take(np.array([], dtype=np.int64))).shape == (0,)
