"""Properties of the analysis that hold for any valid beat train (hypothesis).

- It never crashes on a valid train of beats.
- Every output is a finite number, or undefined (NaN) where a flag says why.
- A DC offset shifts the voltages by exactly the offset and changes nothing else; prepending
  diastole (the same cell recorded from earlier in its first diastole, noise and hum going on)
  shifts the times and changes nothing that matters (common practice, no source: a measurement of a membrane
  potential must not depend on where zero or the start of the file is). "Nothing that matters"
  is 2 % of each accuracy tolerance: the extra samples legitimately move the sweep's noise
  estimate a little, and with it the noise-matched take-off window.
"""

from __future__ import annotations

import numpy as np
from hypothesis import HealthCheck, Phase, given, settings, strategies as st

from analysis.recording import Recording
from analysis.synthetic import DAD, preset, synthesize

from .test_accuracy_synthetic import CLEAN, EXTRA_CLEAN

VOLTAGES = ("mdp_mV", "top_mV", "peak_mV")
#: Columns that do not move with a DC offset; DDR100 is left undefined, without a flag, when TOP
#: comes within 100 ms of the MDP (MEASUREMENTS.md), so it is checked apart.
INVARIANT = ("cl_ms", "rate_bpm", "ddr_mV_per_s", "ddr100_mV_per_s", "dvdt_max_V_per_s", "apa_mV",
             "apd20_ms", "apd50_ms", "apd90_ms")
TIMES = ("t_upstroke_s",)
NUMERIC = ("t_upstroke_s",) + VOLTAGES + INVARIANT

#: Time shift: at most 2 % of the clean accuracy tolerances (test_accuracy_synthetic.CLEAN).
SHIFT_TOLERANCE = {col: (tol / 50.0, rel) for col, tol, rel in CLEAN + EXTRA_CLEAN}
SHIFT_TOLERANCE["rate_bpm"] = (SHIFT_TOLERANCE["cl_ms"][0] / 500.0, True)  # CL 0.005 ms at ~500 ms

# derandomize: CI sees the same examples on every run; no shrinking, which costs minutes of
# analyses (the smallest failing cases found so far are written out as plain tests below)
SETTINGS = settings(
    max_examples=10, deadline=None, derandomize=True, phases=[Phase.explicit, Phase.reuse, Phase.generate],
    suppress_health_check=[HealthCheck.too_slow],
)


@st.composite
def beat_trains(draw):
    """Settings of a valid synthetic recording: any preset, rate, rhythm, noise and events."""
    name = draw(st.sampled_from(["nodal-like", "atrial-like", "ventricular-like", "purkinje-like"]))
    base = preset(name)
    changes = dict(
        cl_ms=round(base.cl_ms * draw(st.floats(0.9, 1.6)), 1),
        mdp_mV=round(base.mdp_mV + draw(st.floats(-3.0, 3.0)), 2),
        peak_mV=round(base.peak_mV + draw(st.floats(-5.0, 5.0)), 2),
        dvdt_max_V_per_s=round(base.dvdt_max_V_per_s * draw(st.floats(0.7, 1.3)), 2),
        apd90_ms=round(base.apd90_ms * draw(st.floats(0.85, 1.1)), 1),
    )
    duration = round(draw(st.floats(2.5, 5.0)), 2)
    artefacts = tuple(
        (round(draw(st.floats(0.2, duration - 0.2)), 4), round(draw(st.floats(-60.0, 60.0)), 1))
        for _ in range(draw(st.integers(0, 2)))
    )
    return dict(
        name=name, changes=changes, duration_s=duration, fs_hz=draw(st.sampled_from([10_000.0, 20_000.0])),
        seed=draw(st.integers(0, 2**16)), noise_mV=draw(st.sampled_from([0.0, 0.1, 0.5])),
        hum_mV=draw(st.sampled_from([0.0, 0.3])), drift_mV_per_min=round(draw(st.floats(-5.0, 5.0)), 2),
        artefacts=artefacts, dad=draw(st.booleans()) and duration > 2.5 * changes["cl_ms"] / 1000,
        start_phase=round(draw(st.floats(0.3, 0.8)), 3),
    )


def _samples(p: dict, lead_fraction: float = 0.0) -> tuple[np.ndarray, float, int]:
    """The recording the drawn settings describe (printed by hypothesis when a check fails).

    ``lead_fraction`` of the diastole before the recording's start is recorded too, with the
    same noise and hum going on: the same cell, the recording started earlier. Returns the
    samples, the rate and how many samples the lead adds at the front.
    """
    syn = synthesize(
        preset(p["name"], **p["changes"]), duration_s=p["duration_s"], fs_hz=p["fs_hz"], seed=p["seed"],
        drift_mV_per_min=p["drift_mV_per_min"], dads=[DAD(1, amplitude_mV=2.0)] if p["dad"] else [],
        start_phase=p["start_phase"],
    )
    fs, train = p["fs_hz"], syn.train
    lead = int(lead_fraction * -train.t_mdp_s[0] * fs)
    t = np.arange(-lead, int(round(p["duration_s"] * fs))) / fs
    x = train.evaluate(t, derivative=False, assume_sorted=True)[0]
    rng = np.random.default_rng(p["seed"])
    x = x + p["noise_mV"] * rng.standard_normal(t.size)
    x = x + p["hum_mV"] * np.sin(2 * np.pi * 50.0 * t + rng.uniform(0, 2 * np.pi))
    for t_a, amplitude in p["artefacts"]:
        i = lead + int(round(t_a * fs))
        x[i:i + 3] += amplitude
    return x, fs, lead


def _beats(samples: np.ndarray, fs: float):
    from analysis import analyze

    return analyze(Recording.from_array(samples, fs)).beats


@SETTINGS
@given(beat_trains())
def test_valid_trains_never_crash_and_every_value_is_finite_or_flagged(train):
    samples, fs, _ = _samples(train)
    beats = _beats(samples, fs)
    assert len(beats) > 0
    for i in range(len(beats)):
        flags = str(beats["flags"][i])
        for col in NUMERIC:
            value = float(beats[col][i])
            if col == "ddr100_mV_per_s" and np.isfinite(beats["ddr_mV_per_s"][i]):
                continue  # undefined without a flag when TOP comes within 100 ms of the MDP
            assert np.isfinite(value) or flags, f"beat {i} {col} is {value} with no flag to say why"


@SETTINGS
@given(beat_trains(), st.floats(-15.0, 15.0).filter(lambda x: abs(x) > 0.01))
def test_a_dc_offset_moves_voltages_by_the_offset_only(train, offset_mV):
    samples, fs, _ = _samples(train)
    a = _beats(samples, fs)
    b = _beats(samples + offset_mV, fs)
    assert len(a) == len(b)
    assert list(a["flags"]) == list(b["flags"])
    for col in VOLTAGES:
        np.testing.assert_allclose(b[col], a[col] + offset_mV, atol=1e-6, err_msg=col)
    for col in INVARIANT + TIMES:
        np.testing.assert_allclose(b[col], a[col], rtol=1e-7, atol=1e-6, err_msg=col)


def _check_shift(train: dict, fraction: float) -> None:
    longer, fs, n_prepend = _samples(train, lead_fraction=fraction)
    a = _beats(longer[n_prepend:], fs)
    b = _beats(longer, fs)
    shift = n_prepend / fs
    assert len(a) == len(b)
    assert list(a["flags"]) == list(b["flags"])
    np.testing.assert_allclose(b["t_upstroke_s"], a["t_upstroke_s"] + shift, atol=SHIFT_TOLERANCE["cl_ms"][0] / 1000)
    for col in VOLTAGES + INVARIANT:
        tol, rel = SHIFT_TOLERANCE[col]
        np.testing.assert_allclose(b[col], a[col], rtol=tol if rel else 0.0, atol=0.0 if rel else tol, err_msg=col)


@SETTINGS
@given(beat_trains(), st.floats(0.01, 0.9))
def test_prepended_diastole_shifts_times_only(train, fraction):
    _check_shift(train, fraction)


def test_hum_removal_does_not_depend_on_where_the_sweep_starts():
    # A clean nodal-like cell with 0.3 mV of 50 Hz hum, recorded from half-way into its first
    # diastole or from its MDP onwards (hypothesis's smallest failing case).
    train = dict(
        name="nodal-like", changes={}, duration_s=3.0, fs_hz=10_000.0, seed=0, noise_mV=0.0, hum_mV=0.3,
        drift_mV_per_min=0.0, artefacts=(), dad=False, start_phase=0.5,
    )
    _check_shift(train, 0.5)


def test_prepended_diastole_without_hum_shifts_times_only():
    # The same cell and noise without hum: nothing in the analysis may follow the sweep's start.
    for seed, name in ((1, "nodal-like"), (2, "ventricular-like"), (3, "purkinje-like")):
        train = dict(
            name=name, changes={}, duration_s=4.0, fs_hz=10_000.0, seed=seed, noise_mV=0.3, hum_mV=0.0,
            drift_mV_per_min=2.0, artefacts=((1.7, 40.0),), dad=False, start_phase=0.6,
        )
        _check_shift(train, 0.7)
