"""The closed-form quadratic fit against numpy's least-squares polynomial fit."""

import numpy as np
import pytest

from analysis.signal import quadratic_fit


@pytest.mark.parametrize("n, u0", [(5, -2.0), (41, -20.3), (2001, -1000.7)])
def test_quadratic_fit_matches_numpy_polyfit(n, u0):
    u = u0 + np.arange(n)
    y = -40.0 - 0.01 * u + 2e-6 * u * u + 0.3 * np.random.default_rng(n).normal(size=n)
    ref = np.polynomial.polynomial.polyfit(u, y, 2)  # reference library: numpy.polynomial
    np.testing.assert_allclose(quadratic_fit(y, u0), ref, rtol=1e-7, atol=1e-10)


def test_quadratic_fit_is_exact_on_a_parabola():
    u0 = -3.25
    u = u0 + np.arange(12)
    c = quadratic_fit(1.5 - 2.0 * u + 0.75 * u * u, u0)
    np.testing.assert_allclose(c, [1.5, -2.0, 0.75], atol=1e-9)  # exact by construction


def test_running_sums_give_the_same_fits_as_the_samples():
    from analysis.signal import RunningSums

    y = -40.0 + 0.3 * np.random.default_rng(7).normal(size=3000).cumsum()
    sums = RunningSums(y, 1000, ref=-42.0)  # a stretch starting at sample 1000 of its sweep
    for a, b, u0 in ((1000, 1041, -20.5), (2100, 2105, -2.0), (1500, 4000, -1250.25)):
        direct = np.polynomial.polynomial.polyfit(u0 + np.arange(b - a), y[a - 1000:b - 1000], 2)  # numpy.polynomial
        # running sums over 3000 samples hold ~12 digits: within 1e-6 of the fit's own scale
        np.testing.assert_allclose(sums.fit(a, b, u0), direct, rtol=0, atol=1e-6 * np.abs(direct).max())
    assert sums.covers(1000, 4000) and not sums.covers(999, 1010)


def test_poly_lsq_grid_gives_the_per_fit_polynomials_on_real_upstrokes(real_abf_dir):
    """The cached grid operator against the fit it replaces (poly_lsq) and numpy.polynomial, on
    the dV/dt tops of the upstrokes of a recording from a working lab (../shared/real-abf)."""
    from analysis.beats import detect_beats
    from analysis.readers import open_recording
    from analysis.signal import poly_lsq, poly_lsq_grid, savgol_derivative

    rec = open_recording(real_abf_dir / "File_axon_2.abf")
    fs = rec.sampling_rate_hz
    v = rec.sweep(0, rec.current_clamp_channels()[0])
    ups = detect_beats(v, fs).i_upstroke[:20]
    assert ups.size >= 5
    d = savgol_derivative(v, fs, window=7, polyorder=3) / 1000.0
    for g in ups:
        i = int(g) - 40 + int(np.argmax(d[int(g) - 40:int(g) + 40]))
        for lo, hi, deg in ((i - 9, i + 14, 3), (i - 3, i + 3, 2), (i - 30, i + 11, 4)):
            x = np.arange(lo, hi + 1, dtype=np.float64) - i
            scale = max(abs(x[0]), abs(x[-1]), 1.0)
            y = d[lo:hi + 1]
            got = poly_lsq_grid(y, lo - i, scale, deg)
            np.testing.assert_allclose(got, poly_lsq(x / scale, y, deg), rtol=1e-9, atol=1e-9 * np.abs(y).max())
            ref = np.polynomial.polynomial.polyfit(x / scale, y, deg)  # reference library: numpy.polynomial
            np.testing.assert_allclose(got, ref, rtol=1e-9, atol=1e-9 * np.abs(y).max())
