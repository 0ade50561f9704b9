"""Derivatives, smoothing, filters, hum removal and the LJP correction against exact answers."""

from __future__ import annotations

import math

import numpy as np
import pytest
from scipy.signal import butter, freqz, savgol_filter, sosfreqz
from scipy.special import expit

from analysis.errors import SettingsError
from analysis.signal import remove_hum
from analysis.settings import PreprocessSettings
from analysis.signal import central_difference, correct_ljp, lowpass, noise_matched_window_ms, noise_rms_mV, notch, preprocess, savgol_derivative, savgol_smooth, slope_noise_V_per_s, top_fit_peak
from analysis.beats import rise_time_10_90, upstroke_velocity

FS = 20_000.0


def _t(n: int, fs: float = FS) -> np.ndarray:
    return np.arange(n) / fs


def logistic(t, *, base=-60.0, amp=100.0, centre=0.05, tau=0.001):
    return base + amp * expit((t - centre) / tau)


# -- derivative estimators vs exact analytic derivatives -------------------------------------------
def test_savgol_order2_is_exact_for_a_quadratic_including_the_edges():
    t = _t(2000)
    v = 3.0 + 40.0 * t - 700.0 * t**2
    d = savgol_derivative(v, FS, window_ms=1.0, polyorder=2)
    np.testing.assert_allclose(d, 40.0 - 1400.0 * t, rtol=0, atol=1e-8)  # exact: d/dt of the polynomial


def test_savgol_order3_is_exact_for_a_quartic_derivative():
    t = _t(4000) - 0.1
    v = 5 * t**4 - 2 * t**3 + t
    d = savgol_derivative(v, FS, window_ms=2.0, polyorder=3)
    exact = 20 * t**3 - 6 * t**2 + 1
    h = 20  # the edge fits are order-3 polynomials: exact only in the interior for a quartic
    np.testing.assert_allclose(d[h:-h], exact[h:-h], rtol=0, atol=1e-9)  # SG order 3 is exact to degree 4 (Savitzky & Golay 1964)


def test_savgol_matches_scipy_savgol_filter_everywhere():
    rng = np.random.default_rng(3)
    v = rng.normal(size=3001).cumsum()
    for n, order, deriv in ((5, 3, 1), (41, 2, 1), (301, 3, 0), (21, 3, 2)):
        mine = savgol_derivative(v, FS, window=n, polyorder=order, deriv=deriv) if deriv else savgol_smooth(v, FS, window_ms=n / FS * 1e3, polyorder=order)
        ref = savgol_filter(v, n, order, deriv=deriv, delta=1 / FS, mode="interp")  # reference library: scipy.signal
        np.testing.assert_allclose(mine, ref, rtol=1e-7, atol=1e-9 * np.abs(ref).max())  # FFT rounding only


def test_central_difference_is_exact_for_a_quadratic_in_the_interior():
    t = _t(500)
    d = central_difference(1.0 + 2.0 * t + 3.0 * t**2, FS)
    np.testing.assert_allclose(d[1:-1], 2.0 + 6.0 * t[1:-1], rtol=0, atol=1e-7)  # exact for degree 2 (calculus)


def test_sine_derivative_within_a_tiny_fraction():
    t = _t(20_000)
    d = savgol_derivative(np.sin(2 * np.pi * 7 * t), FS, window_ms=1.0)
    np.testing.assert_allclose(d, 2 * np.pi * 7 * np.cos(2 * np.pi * 7 * t), rtol=0, atol=1e-3 * 2 * np.pi * 7)  # d/dt sin = cos


# -- dV/dt max with a window sized to the upstroke -------------------------------------------------
@pytest.mark.parametrize(
    "fs, amp, dvdt, noise",
    [
        (10_000.0, 50.0, 2.0, 0.0),     # slow nodal upstroke
        (10_000.0, 50.0, 2.0, 0.5),     # the same under 0.5 mV rms of noise
        (50_000.0, 100.0, 500.0, 0.0),  # fast ventricular upstroke
        (20_000.0, 100.0, 100.0, 0.2),
    ],
)
def test_upstroke_velocity_against_the_exact_logistic_slope(fs, amp, dvdt, noise):
    tau = amp / (4.0 * dvdt * 1000.0)  # logistic: dV/dt max = A / (4 tau), exact
    t = np.arange(int(0.2 * fs)) / fs
    v = logistic(t, amp=amp, centre=0.1, tau=tau) + noise * np.random.default_rng(1).normal(size=t.size)
    i_peak = int(0.1 * fs + 12 * tau * fs)
    i_foot = int(0.1 * fs - 8 * tau * fs)
    up = upstroke_velocity(v, fs, i_foot=i_foot, i_peak=i_peak, noise_mV=noise)
    assert up.dvdt_max_V_per_s == pytest.approx(dvdt, rel=0.01 if noise == 0 else 0.05)  # exact slope of the formula
    assert up.index / fs == pytest.approx(0.1, abs=max(2 / fs, 0.05 * tau * 4.4))  # the logistic's midpoint
    assert up.rise_ms == pytest.approx(2 * math.log(9) * tau * 1e3, rel=0.05)  # 10-90 % of a logistic: 2 ln 9 tau


def test_adaptive_window_beats_a_central_difference_on_a_noisy_nodal_upstroke():
    fs, tau = 10_000.0, 50.0 / (4 * 2000.0)
    t = np.arange(int(0.3 * fs)) / fs
    v = logistic(t, amp=50.0, centre=0.15, tau=tau) + 0.5 * np.random.default_rng(7).normal(size=t.size)
    kw = dict(i_foot=int((0.15 - 8 * tau) * fs), i_peak=int((0.15 + 12 * tau) * fs))
    adaptive = upstroke_velocity(v, fs, noise_mV=0.5, **kw)
    plain = upstroke_velocity(v, fs, method="central_difference", **kw)
    assert abs(adaptive.dvdt_max_V_per_s - 2.0) < 0.1  # within 5 % of the exact 2 V/s
    assert abs(plain.dvdt_max_V_per_s - 2.0) > 1.0  # a per-sample difference is swamped (MEASUREMENTS.md's arithmetic)


def test_time_of_dvdt_max_of_a_slow_noisy_upstroke_does_not_jitter():
    # A 4.6 V/s upstroke (human SAN myocytes: Verkerk et al. 2007, Eur Heart J 28:2472) at 10 kHz
    # under 0.3 mV rms of noise, 40 noise sequences.
    fs, amp, dvdt = 10_000.0, 60.0, 4.6
    tau = amp / (4.0 * dvdt * 1000.0)
    t = np.arange(int(0.3 * fs)) / fs
    errors_ms, ratios = [], []
    for seed in range(40):
        v = logistic(t, amp=amp, centre=0.15, tau=tau) + 0.3 * np.random.default_rng(seed).normal(size=t.size)
        up = upstroke_velocity(v, fs, i_foot=int((0.15 - 8 * tau) * fs), i_peak=int((0.15 + 12 * tau) * fs), noise_mV=0.3)
        errors_ms.append((up.index / fs - 0.15) * 1e3)
        ratios.append(up.dvdt_max_V_per_s / dvdt)
    # The logistic's steepest point is its midpoint (exact): within 0.2 ms rms, so that cycle
    # lengths (differences of two such times) stay well inside the noisy 1 ms tolerance; and
    # dV/dt max itself within 2 % on average (the acceptance list allows 10 % with noise).
    assert math.sqrt(np.mean(np.square(errors_ms))) < 0.2
    assert abs(np.mean(ratios) - 1.0) < 0.02


def test_window_never_clips_a_fast_upstroke_at_20_khz():
    fs, tau = 20_000.0, 100.0 / (4 * 400_000.0)  # 400 V/s
    t = np.arange(2000) / fs
    v = logistic(t, amp=100.0, centre=0.05, tau=tau)
    up = upstroke_velocity(v, fs, i_foot=int(0.05 * fs) - 20, i_peak=int(0.05 * fs) + 30)
    assert up.window_ms <= 0.26  # 5 samples: the shortest window
    assert up.dvdt_max_V_per_s == pytest.approx(400.0, rel=0.03)  # exact A / (4 tau)


def test_top_fit_peak_recovers_a_parabola_vertex_between_samples():
    x = np.arange(41, dtype=float)
    y = 10.0 - 0.01 * (x - 20.3) ** 2
    off, val = top_fit_peak(y, 20)
    assert off == pytest.approx(0.3, abs=1e-9) and val == pytest.approx(10.0, abs=1e-9)  # vertex of the parabola


def test_rise_time_of_a_ramp():
    v = np.concatenate([np.zeros(100), np.linspace(0, 100, 101), np.full(100, 100.0)])
    rise_ms, i10, i90 = rise_time_10_90(v, 1000.0, i_foot=100, i_peak=200)
    assert (i10, i90) == (pytest.approx(110.0), pytest.approx(190.0))  # linear ramp: 10 % and 90 % by hand
    assert rise_ms == pytest.approx(80.0)


# -- noise and window sizing -----------------------------------------------------------------------
def test_noise_estimate_of_white_noise_under_a_slow_signal():
    t = _t(200_000)
    v = -60 + 10 * np.sin(2 * np.pi * 2 * t) + 0.4 * np.random.default_rng(0).normal(size=t.size)
    assert noise_rms_mV(v) == pytest.approx(0.4, rel=0.03)  # the noise put in


def test_slope_noise_formula_matches_simulation():
    rng = np.random.default_rng(5)
    n = 21
    d = savgol_derivative(rng.normal(size=100_000), FS, window=n, polyorder=2) / 1000.0
    assert np.std(d[n:-n]) == pytest.approx(slope_noise_V_per_s(1.0, FS, n), rel=0.03)  # standard error of a regression slope


def test_noise_matched_window_widens_only_when_needed():
    assert noise_matched_window_ms(0.0, 10_000.0, criterion_V_per_s=0.5, fraction=0.1, min_ms=1.0, max_ms=10.0) == 1.0
    w = noise_matched_window_ms(0.3, 10_000.0, criterion_V_per_s=0.5, fraction=0.1, min_ms=1.0, max_ms=10.0)
    n = int(round(w * 10))
    assert slope_noise_V_per_s(0.3, 10_000.0, n | 1) <= 0.05 * 1.05  # the target noise, 10 % of 0.5 V/s
    assert 1.0 < w < 10.0


# -- filters and corrections ------------------------------------------------------------------------
def test_ljp_correction_subtracts_the_junction_potential():
    v = np.array([-50.0, 0.0, 20.0])
    np.testing.assert_array_equal(correct_ljp(v, 12.5), v - 12.5)  # V_true = V_measured - LJP (Barry & Lynch 1991)


def test_lowpass_is_zero_phase_and_has_the_butterworth_gain_squared():
    fs, fc = 10_000.0, 500.0
    t = _t(20_000, fs)
    x = np.sin(2 * np.pi * fc * t)
    y = lowpass(x, fs, cutoff_hz=fc, order=4)
    sos = butter(4, fc, fs=fs, output="sos")
    _, h = sosfreqz(sos, worN=[fc], fs=fs)
    mid = slice(5000, 15000)
    assert np.std(y[mid]) / np.std(x[mid]) == pytest.approx(abs(h[0]) ** 2, rel=0.01)  # forward-backward: |H|^2 (scipy.signal)
    lag = np.argmax(np.correlate(y[mid], x[mid], mode="full")) - (mid.stop - mid.start - 1)
    assert lag == 0  # zero phase


def test_lowpass_above_nyquist_is_a_settings_error():
    with pytest.raises(SettingsError, match="half the sampling rate"):
        lowpass(np.zeros(1000), 1000.0, cutoff_hz=600.0)


def test_notch_removes_mains_and_keeps_a_slow_signal():
    fs = 10_000.0
    t = _t(50_000, fs)
    slow = 5 * np.sin(2 * np.pi * 1.0 * t)
    y = notch(slow + np.sin(2 * np.pi * 50 * t), fs, mains_hz=50.0, q=30.0)
    b, a = __import__("scipy.signal", fromlist=["iirnotch"]).iirnotch(50.0, 30.0, fs=fs)
    _, h = freqz(b, a, worN=[1.0], fs=fs)
    mid = slice(10_000, 40_000)
    assert np.max(np.abs(y[mid] - slow[mid] * abs(h[0]) ** 2)) < 0.02  # notch gain at 50 Hz is 0 (scipy.signal.iirnotch)


def test_hum_removal_subtracts_a_sinusoid_and_leaves_a_clean_trace_untouched():
    fs = 10_000.0
    t = _t(100_000, fs)
    beats = -70 + 90 * np.exp(-(((t % 0.8) - 0.4) / 0.02) ** 2)
    out, amp = remove_hum(beats + 0.3 * np.sin(2 * np.pi * 50 * t + 0.7) + 0.1 * np.sin(2 * np.pi * 150 * t), fs)
    assert amp == pytest.approx(0.3, abs=0.02)  # the hum put in
    assert np.max(np.abs(out - beats)) < 0.05
    same, amp0 = remove_hum(beats, fs)
    assert amp0 == 0.0 and np.array_equal(same, beats)  # nothing to remove: samples unchanged


def test_hum_removal_is_the_same_on_a_chunk_with_context():
    fs = 10_000.0
    t = _t(80_000, fs)
    v = -60 + 0.5 * np.sin(2 * np.pi * 60 * t + 0.2) + 0.1 * np.random.default_rng(2).normal(size=t.size)
    whole, _ = remove_hum(v, fs)
    pad = 25_000
    part, _ = remove_hum(v[40_000 - pad:50_000 + pad], fs, offset=40_000 - pad)
    np.testing.assert_allclose(part[pad:-pad], whole[40_000:50_000], atol=1e-9)


def test_hum_removal_does_not_depend_on_where_the_sweep_starts():
    # Beats and 0.3 mV of 50 Hz hum recorded from two starting points 0.37 s apart: beyond half a
    # window of the later start, the two estimates agree (common practice, no source: a
    # measurement must not depend on where the file starts).
    fs = 10_000.0
    t = _t(80_000, fs)
    v = -70 + 90 * np.exp(-(((t % 0.8) - 0.4) / 0.02) ** 2) + 0.3 * np.sin(2 * np.pi * 50 * t + 0.4)
    v = v + 0.1 * np.random.default_rng(5).normal(size=t.size)
    from analysis.signal import hum_survey

    survey = hum_survey(v, fs)
    whole, _ = remove_hum(v, fs, present=survey)
    k = 3700
    later, _ = remove_hum(v[k:], fs, offset=0, present=survey)
    # the same hum (its phase taken from each recording's own start) is removed from both
    np.testing.assert_allclose(later[int(0.6 * fs):], whole[k + int(0.6 * fs):], atol=1e-9)


def test_preprocess_applies_ljp_then_filters():
    s = PreprocessSettings(ljp_mV=10.0, hum_removal="off")
    v = np.full(1000, -50.0)
    np.testing.assert_allclose(preprocess(v, 10_000.0, s), -60.0)  # V_true = V_measured - LJP
