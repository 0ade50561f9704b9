"""correlate_valid: the FFT overlap-save filter against numpy's direct correlation."""

import numpy as np
import pytest
from scipy.signal import savgol_coeffs

from analysis.signal import correlate_valid


@pytest.mark.parametrize("taps_n", [5, 21, 101, 1001])
@pytest.mark.parametrize("n", [30, 9_000, 200_003])
def test_correlate_valid_matches_numpy_correlate(taps_n, n):
    rng = np.random.default_rng(taps_n + n)
    x = np.cumsum(rng.normal(size=n)) * 0.2 - 65.0  # a wandering trace in mV
    taps = rng.normal(size=taps_n)  # not symmetric: the orientation is checked too
    got = correlate_valid(x, taps)
    # numpy.correlate(x, taps, "valid") is the definition (numpy reference).
    want = np.correlate(x, taps, mode="valid") if n >= taps_n else np.empty(0)
    assert got.shape == want.shape
    assert np.allclose(got, want, rtol=0.0, atol=1e-9 * np.abs(x).max() * np.abs(taps).sum())


def test_correlate_valid_smooths_as_savitzky_golay():
    # scipy.signal.savgol_coeffs with use="dot" weights the window's samples in order: the
    # smoothed value at the window's centre (scipy reference).
    t = np.arange(50_000) / 20_000.0
    v = -60.0 + 40.0 * np.sin(2 * np.pi * 3.0 * t) + np.random.default_rng(1).normal(0.0, 0.5, t.size)
    c = savgol_coeffs(21, 3, use="dot")
    got = correlate_valid(v, c)
    want = np.array([c @ v[i:i + 21] for i in range(0, v.size - 20, 997)])
    assert np.allclose(got[::997], want, atol=1e-9)
