"""Per-beat parameters against the formulas of hand-built beats and against scipy.stats.linregress.

Definitions are MEASUREMENTS.md's; the truths come from each trace's formula (see beat_traces).
"""

from __future__ import annotations

import math

import numpy as np
import pytest
from scipy.optimize import brentq
from scipy.stats import linregress

from analysis import Recording, Settings, analyze
from analysis.beats import FEATURES, measure_beats
from analysis.table import CSV_COLUMNS
from tests.analysis.beat_traces import gaussian_dvdt_V_per_s, gaussian_train, gaussian_truth, pacemaker_train

FS = 20_000.0
W = 0.025


#: The Gaussian beats rise from a flat base (no phase 4): the take-off tests read their TOP anyway.
KEEP_TOP = Settings().replace("measurement.no_phase4_min_mV", 0.0)


def _run(v, fs=FS, settings=None):
    return analyze(Recording.from_array(v, fs), settings or KEEP_TOP).beats


@pytest.fixture(scope="module")
def gauss():
    v, centres = gaussian_train(FS, 3.2, cl_s=0.5)
    return v, centres, _run(v)


def test_gaussian_beats_match_their_formulas(gauss):
    v, centres, b = gauss
    assert len(b) == len(centres)
    for k, c in enumerate(centres):
        truth = gaussian_truth(c)
        assert b["t_upstroke_s"][k] == pytest.approx(truth["t_upstroke_s"], abs=5e-6)  # formula: c - w / sqrt 2 (0.1 sample)
        assert b["dvdt_max_V_per_s"][k] == pytest.approx(truth["dvdt_max_V_per_s"], rel=0.005)  # A sqrt(2/e) / w
        assert b["peak_mV"][k] == pytest.approx(20.0, abs=0.01)  # base + A
        if k == 0:
            continue
        assert b["mdp_mV"][k] == pytest.approx(-60.0, abs=0.01)  # base (tails are < 1e-80 mV)
        assert b["apa_mV"][k] == pytest.approx(80.0, abs=0.02)
        for x in (20, 50, 90):
            assert b[f"apd{x}_ms"][k] == pytest.approx(truth[f"apd{x}_ms"], abs=0.02)  # w sqrt(-ln(1 - x))
        assert b["cl_ms"][k] == pytest.approx(500.0, abs=0.01) and b["rate_bpm"][k] == pytest.approx(120.0, abs=0.01)


def test_take_off_is_where_the_exact_dvdt_rises_through_half_a_volt_per_second(gauss):
    v, centres, b = gauss
    c = centres[1]
    t_cross = brentq(lambda t: gaussian_dvdt_V_per_s(np.array([t]), c)[0] - 0.5, c - 6 * W, c - W)  # exact derivative
    assert b["t_top_s"][1] == pytest.approx(t_cross, abs=2e-4)
    v_cross = -60 + 80 * math.exp(-(((t_cross - c) / W) ** 2))
    assert b["top_mV"][1] == pytest.approx(v_cross, abs=0.05)  # MEASUREMENTS.md: V at the 0.5 V/s crossing


def test_take_off_alternatives(gauss):
    v, centres, _ = gauss
    c = centres[1]
    frac = _run(v, settings=KEEP_TOP.replace("measurement.top_method", "dvdt_fraction"))
    d_at = gaussian_dvdt_V_per_s(np.array([frac["t_top_s"][1]]), c)[0]
    assert d_at == pytest.approx(0.1 * frac["dvdt_max_V_per_s"][1], rel=0.02)  # 10 % of dV/dt max (MEASUREMENTS.md)
    d2 = _run(v, settings=KEEP_TOP.replace("measurement.top_method", "d2v_max"))
    assert d2["t_top_s"][1] == pytest.approx(c - W * math.sqrt(1.5), abs=3e-4)  # d2V/dt2 of a Gaussian peaks at u = -sqrt(3/2)
    fits = _run(v, settings=KEEP_TOP.replace("measurement.top_method", "linear_fits"))
    # The definition on the exact curve: a line fitted to the 50 ms of diastole before the 0.5 V/s
    # crossing, and the tangent at dV/dt max; where they meet.
    t_c = brentq(lambda t: gaussian_dvdt_V_per_s(np.array([t]), c)[0] - 0.5, c - 6 * W, c - W)
    tt = np.linspace(t_c - 0.05, t_c, 2001)
    b1, a1 = np.polyfit(tt, -60 + 80 * np.exp(-(((tt - c) / W) ** 2)), 1)
    up = gaussian_truth(c)
    v_up = -60 + 80 * math.exp(-0.5)
    b2 = up["dvdt_max_V_per_s"] * 1e3
    t_meet = (a1 - (v_up - b2 * up["t_upstroke_s"])) / (b2 - b1)
    assert fits["t_top_s"][1] == pytest.approx(t_meet, abs=1e-4)  # from memory: older microelectrode work
    assert fits["top_mV"][1] == pytest.approx(a1 + b1 * t_meet, abs=0.05)


def test_apd_reference_and_custom_percentages(gauss):
    v, centres, b = gauss
    s = Settings().updated({"measurement.apd_reference": "peak", "measurement.apd_percent": [30, 75]})
    p = _run(v, settings=s)
    c = centres[1]
    for x in (30, 75):
        assert p[f"apd{x}_ms"][1] == pytest.approx(W * math.sqrt(-math.log(1 - x / 100)) * 1e3, abs=0.02)  # from the peak
    assert np.isnan(p["apd90_ms"][1])  # not asked for: empty, never a made-up number
    top = _run(v, settings=KEEP_TOP.replace("measurement.apd_reference", "top"))
    assert top["apd90_ms"][1] - b["apd90_ms"][1] == pytest.approx((b["t_upstroke_s"][1] - b["t_top_s"][1]) * 1e3, abs=1e-6)
    assert c > 0


def test_upstroke_time_at_a_voltage_level(gauss):
    v, centres, _ = gauss
    b = _run(v, settings=KEEP_TOP.replace("measurement.upstroke_time_method", "voltage_level"))
    c = centres[1]
    assert b["t_upstroke_s"][1] == pytest.approx(c - W * math.sqrt(math.log(2.0)), abs=2e-5)  # -60 + 80 e^-u^2 = -20 mV
    assert b["cl_ms"][2] == pytest.approx(500.0, abs=0.01)


def test_ddr_equals_linregress_on_the_same_window():
    fs = 10_000.0
    v, beats = pacemaker_train(fs, 3.0, ddr_mV_per_s=60.0)
    b = _run(v, fs)
    t = np.arange(v.size) / fs
    for k in range(1, len(b)):
        sel = (t >= b["t_mdp_s"][k]) & (t <= b["t_top_s"][k])
        ref = linregress(t[sel], v[sel]).slope  # reference library: scipy.stats.linregress
        assert b["ddr_mV_per_s"][k] == pytest.approx(ref, rel=1e-9)
        sel100 = (t >= b["t_mdp_s"][k]) & (t <= b["t_mdp_s"][k] + 0.1)
        assert b["ddr100_mV_per_s"][k] == pytest.approx(linregress(t[sel100], v[sel100]).slope, rel=1e-9)  # Verkerk 2007 window
        assert b["ddr100_mV_per_s"][k] == pytest.approx(60.0, rel=0.01)  # the slope built in
        assert b["mdp_mV"][k] == pytest.approx(-62.0, abs=0.1)  # construction


def test_exponential_and_early_late_phase_4():
    fs = 10_000.0
    v, _ = pacemaker_train(fs, 4.0, cl_s=0.8, phase4_tau_ms=300.0, ddr_mV_per_s=100.0, dvdt_max_V_per_s=5.0)
    e = _run(v, fs, KEEP_TOP.replace("measurement.ddr_method", "exponential"))
    assert e["ddr_tau_ms"][1] == pytest.approx(300.0, rel=0.03)  # tau built in
    assert e["ddr_vinf_mV"][1] == pytest.approx(-62.0 + 100.0 * 0.3, abs=1.0)  # MDP + DDR tau
    el = _run(v, fs, KEEP_TOP.replace("measurement.ddr_method", "early_late"))
    assert el["ddr_early_mV_per_s"][1] > 2 * el["ddr_late_mV_per_s"][1] > 0  # a decelerating phase 4
    assert el["ddr_mV_per_s"][1] == el["ddr_late_mV_per_s"][1]


def test_first_beat_has_no_diastole_and_a_cut_off_last_beat_is_truncated():
    v, centres = gaussian_train(FS, 1.67, cl_s=0.5)  # the last beat (1.65 s) is cut before its APD90 (1.688 s)
    b = _run(v)
    assert b["flags"][0].split(";")[0] == "no_diastole"
    for name in ("mdp_mV", "top_mV", "ddr_mV_per_s", "apa_mV", "apd50_ms", "apd90_ms", "cl_ms", "rate_bpm"):
        assert np.isnan(b[name][0]), name  # MEASUREMENTS.md: empty for the first beat
    assert np.isfinite(b["dvdt_max_V_per_s"][0]) and np.isfinite(b["peak_mV"][0])
    assert "truncated" in b["flags"][-1].split(";") and np.isnan(b["apd90_ms"][-1])
    mine = {"no_diastole", "truncated"}  # this module's flags; the events module may add others
    assert not mine & set(b["flags"][-2].split(";")) and not mine & set(b["flags"][1].split(";"))


def test_measure_beats_directly_with_explicit_neighbours():
    v, centres = gaussian_train(FS, 2.0, cl_s=0.5)
    ups = np.rint((centres - W / math.sqrt(2)) * FS).astype(int)
    m = measure_beats(v, FS, ups[1:3], i_previous=ups[0:2], i_next=ups[2:4], settings=KEEP_TOP.measurement)
    assert m.has_previous.all() and m.flags == [[], []]
    np.testing.assert_allclose(m.values["mdp_mV"], -60.0, atol=0.01)


def test_registry_covers_every_measured_csv_column():
    measured = [c for c in CSV_COLUMNS if c not in ("file", "sweep", "beat", "accepted", "flags", "condition")]
    for name in measured:
        if name.startswith("apd"):
            continue  # APD columns follow the settings' percentages
        f = FEATURES[name]
        assert f.unit and f.description and f.source
        assert name.endswith(f.unit.replace("/", "_per_").replace("bpm", "bpm")) or f.unit in name
