"""The closed-form quadratic fit against numpy's least-squares polynomial fit."""

import numpy as np
import pytest

from analysis.fits import quadratic_fit


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
