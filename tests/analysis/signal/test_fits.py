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


def _real_upstroke_tops(real_abf_dir, window: int = 7):
    """dV/dt (V/s) of a recording from a working lab (../shared/real-abf) and its upstrokes' maxima."""
    from analysis.beats import detect_beats
    from analysis.readers import open_recording
    from analysis.signal import savgol_derivative

    rec = open_recording(real_abf_dir / "File_axon_2.abf")
    fs = rec.sampling_rate_hz
    v = rec.sweep(0, rec.current_clamp_channels()[0])
    ups = detect_beats(v, fs).i_upstroke[:20]
    assert ups.size >= 5
    d = savgol_derivative(v, fs, window=window, polyorder=3) / 1000.0
    return d, [int(g) - 40 + int(np.argmax(d[int(g) - 40:int(g) + 40])) for g in ups]


def test_poly_lsq_centred_gives_the_per_fit_polynomials_on_real_upstrokes(real_abf_dir):
    """The cached operator against the fit it replaces (poly_lsq) and numpy.polynomial, on the
    dV/dt tops of real upstrokes."""
    from analysis.signal import poly_lsq, poly_lsq_centred

    d, tops = _real_upstroke_tops(real_abf_dir)
    for i in tops:
        for lo, hi, deg in ((i - 9, i + 14, 3), (i - 3, i + 3, 2), (i - 30, i + 11, 4), (i - 2, i + 2, 3)):
            y = d[lo:hi + 1]
            u = np.linspace(-1.0, 1.0, y.size)
            got = poly_lsq_centred(y, deg)
            np.testing.assert_allclose(got, poly_lsq(u, y, deg), rtol=1e-9, atol=1e-9 * np.abs(y).max())
            ref = np.polynomial.polynomial.polyfit(u, y, deg)  # reference library: numpy.polynomial
            np.testing.assert_allclose(got, ref, rtol=1e-9, atol=1e-9 * np.abs(y).max())


def test_top_fit_peak_is_the_maximum_of_the_least_squares_cubic_on_real_upstrokes(real_abf_dir):
    """The refined dV/dt max against numpy: the cubic fitted by numpy.polynomial to the same
    samples (those at or above half the peak), its maximum from numpy's roots of its slope."""
    from analysis.signal import top_fit_peak

    d, tops = _real_upstroke_tops(real_abf_dir, window=31)  # broad tops: cubics of 7 samples or more
    checked = 0
    for i in tops:
        off, val = top_fit_peak(d, i, fraction=0.5)
        level = 0.5 * d[i]
        lo, hi = i, i
        while d[lo - 1] >= level:
            lo -= 1
        while d[hi + 1] >= level:
            hi += 1
        if hi - lo < 6:
            continue
        x = np.arange(lo, hi + 1) - i
        poly = np.polynomial.Polynomial.fit(x, d[lo:hi + 1], 3)  # reference library: numpy.polynomial
        roots = [r.real for r in poly.deriv().roots() if abs(r.imag) < 1e-12 and x[0] <= r.real <= x[-1]]
        best = max(roots, key=poly)
        assert off == pytest.approx(best, abs=1e-9)
        assert val == pytest.approx(poly(best), rel=1e-12)
        checked += 1
    assert checked >= 5
