"""Accuracy against a published model with exact truth: DiFrancesco & Noble 1985 Purkinje fibre.

Source of every check below: the DiFrancesco-Noble 1985 model (Phil Trans R Soc B 307:353),
as shipped with myokit and integrated by myokit's CVODES simulation (general-purpose reference
library), with the truth computed on its dense solution and its own dV/dt by MEASUREMENTS.md's
definitions (tests/analysis/reference/dn1985.py). Tolerances are those of the measurement
specification's acceptance list.
"""

from __future__ import annotations

from pathlib import Path

import numpy as np
import pytest
from scipy import stats

from analysis.recording import Recording

from .reference import dn1985

pytestmark = pytest.mark.slow  # a CVODES run of ~2 minutes of model time on a cold cache

#: (column, tolerance, relative?) on clean 20 kHz samples.
CLEAN = (
    ("cl_ms", 0.25, False),
    ("mdp_mV", 0.5, False),
    ("top_mV", 2.0, False),
    ("ddr_mV_per_s", 0.10, True),
    ("ddr100_mV_per_s", 0.10, True),
    ("dvdt_max_V_per_s", 0.05, True),
    ("peak_mV", 0.5, False),
    ("apa_mV", 1.0, False),
    ("apd20_ms", 1.0, False),
    ("apd50_ms", 1.0, False),
    ("apd90_ms", 1.0, False),
)
#: Noisy 10 kHz: twice the clean tolerances, and CL within 1 ms.
NOISY = tuple((c, 1.0 if c == "cl_ms" else 2 * tol, rel) for c, tol, rel in CLEAN)


@pytest.fixture(scope="module")
def reference(myokit_data_dir, request):
    cache = getattr(request.config, "cache", None)
    cache_dir = Path(cache.mkdir("upstroke-dn1985")) if cache is not None else None
    sol = dn1985.load_or_simulate(myokit_data_dir / dn1985.MODEL_FILE, cache_dir)
    start, stop = dn1985.window_in_diastole(sol, 8)
    return sol, start, stop, dn1985.truth(sol, start, stop)


def _analyze(samples: np.ndarray, fs_hz: float):
    from analysis import analyze

    return analyze(Recording.from_array(samples, fs_hz)).beats


def _compare(beats, truth, checks) -> list[str]:
    """Every beat found and none extra; then each parameter of each beat within its tolerance."""
    problems = []
    t_found = np.asarray(beats["t_upstroke_s"])
    t_true = np.array([b["t_upstroke_s"] for b in truth])
    if len(t_found) != len(t_true) or np.max(np.abs(t_found - t_true)) > 0.005:
        return [f"beats at {np.round(t_found, 4).tolist()}, truth at {np.round(t_true, 4).tolist()}"]
    for i, tb in enumerate(truth):
        for col, tol, rel in checks:
            want, got = tb[col], float(beats[col][i])
            if np.isnan(want):
                if not np.isnan(got):
                    problems.append(f"beat {i} {col}: {got:.4g} where the definition leaves it empty")
                continue
            limit = tol * abs(want) if rel else tol
            if not abs(got - want) <= limit:
                problems.append(f"beat {i} {col}: {got:.4f}, truth {want:.4f} (tolerance {limit:.3g})")
    return problems


def test_the_reference_itself_is_a_steady_rhythm_with_a_consistent_truth(reference):
    sol, start, stop, truth = reference
    cl = np.array([b["cl_ms"] for b in truth[1:]])
    # Pre-run long enough: consecutive cycles differ by < 0.1 % (DN1985 model, myokit CVODES).
    assert np.max(np.abs(np.diff(cl))) < 1e-3 * cl.mean()
    assert len(truth) == 8
    # The model's own dV/dt is the derivative of its V (myokit logs both): the numerical
    # derivative of the 100 kHz solution agrees to 0.5 % of dV/dt max.
    numeric = np.gradient(sol["v_mV"], sol["t_s"]) / 1000.0
    assert np.max(np.abs(numeric - sol["dvdt_V_per_s"])) < 5e-3 * sol["dvdt_V_per_s"].max()
    # DDR of the truth equals scipy.stats.linregress over [t_MDP, t_TOP] (reference library).
    b = truth[3]
    t = sol["t_s"] - start
    window = (t >= b["t_mdp_s"]) & (t <= b["t_top_s"])
    assert stats.linregress(t[window], sol["v_mV"][window]).slope == pytest.approx(b["ddr_mV_per_s"], rel=1e-9)


def test_clean_20_khz_samples_measure_within_the_tolerances(reference):
    sol, start, stop, truth = reference
    beats = _analyze(dn1985.sample(sol, start, stop, 20_000.0), 20_000.0)
    # DN1985 model's dense truth; tolerances: CL 0.25 ms, MDP 0.5 mV, TOP 2 mV, DDR 10 %,
    # dV/dt max 5 %, peak 0.5 mV, APA 1 mV, APDs 1 ms; every beat found, none extra.
    assert _compare(beats, truth, CLEAN) == []
    # The first beat of a sweep has no preceding diastole (MEASUREMENTS.md).
    assert "no_diastole" in str(beats["flags"][0]).split(";")


def test_noisy_10_khz_samples_measure_within_twice_the_tolerances(reference):
    sol, start, stop, truth = reference
    fs = 10_000.0
    beats = _analyze(_noisy(sol, start, stop, fs), fs)
    # DN1985 model's dense truth with 0.3 mV rms noise and 0.3 mV of 50 Hz hum: twice the clean
    # tolerances and CL within 1 ms; every beat found, none extra.
    assert _compare(beats, truth, NOISY) == []


def _noisy(sol, start, stop, fs, seed=1985):
    clean = dn1985.sample(sol, start, stop, fs)
    rng = np.random.default_rng(seed)
    t = np.arange(clean.size) / fs
    return clean + rng.normal(0.0, 0.3, clean.size) + 0.3 * np.sin(2 * np.pi * 50.0 * t + rng.uniform(0, 2 * np.pi))


def test_dvdt_max_of_the_narrow_dn1985_upstroke_is_within_2_percent_clean_and_5_percent_noisy(reference):
    sol, start, stop, truth = reference
    want = np.array([b["dvdt_max_V_per_s"] for b in truth])
    clean = _analyze(dn1985.sample(sol, start, stop, 20_000.0), 20_000.0)
    err = np.asarray(clean["dvdt_max_V_per_s"]) / want - 1.0
    # DN1985 model's own dV/dt (myokit), its peak about 1 ms wide at half height: clean 20 kHz
    # within 2 % and the measured width within 10 % of the model's
    assert np.max(np.abs(err)) <= 0.02
    i = dn1985.upstroke_indices(sol["dvdt_V_per_s"])[3]
    dv = sol["dvdt_V_per_s"]
    above = np.flatnonzero(dv[i - 500:i + 500] >= 0.5 * dv[i])
    width_ms = (above[-1] - above[0]) * dn1985.LOG_INTERVAL_MS
    assert float(np.median(clean["dvdt_peak_width_ms"])) == pytest.approx(width_ms, rel=0.1)
    for seed in (1985, 7):
        noisy = _analyze(_noisy(sol, start, stop, 10_000.0, seed), 10_000.0)
        err = np.asarray(noisy["dvdt_max_V_per_s"]) / want - 1.0
        # 10 kHz, 0.3 mV rms noise and 0.3 mV of 50 Hz hum: every beat within 5 %
        assert np.max(np.abs(err)) <= 0.05
