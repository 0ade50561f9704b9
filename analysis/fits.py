"""Small least-squares fits run many times per beat, written without threaded BLAS calls."""

import numpy as np

__all__ = ["quadratic_fit"]


def quadratic_fit(y: np.ndarray, u0: float) -> tuple[float, float, float]:
    """Least-squares ``c0 + c1 u + c2 u^2`` through ``y`` at ``u = u0, u0 + 1, ...``.

    The moments of the (integer-spaced) abscissae are closed forms, so only three sums over the
    samples are taken: this fit runs several times per beat.
    """
    n = y.size
    j = np.arange(n, dtype=np.float64)
    sy = float(y.sum())
    sjy = float(np.dot(j, y)) if n < 64 else float((j * y).sum())
    sj2y = float((j * j * y).sum())
    # moments of j = 0..n-1
    m1 = n * (n - 1) / 2.0
    m2 = (n - 1) * n * (2 * n - 1) / 6.0
    m3 = m1 * m1
    m4 = (n - 1) * n * (2 * n - 1) * (3 * (n - 1) ** 2 + 3 * (n - 1) - 1) / 30.0
    g = ((n, m1, m2), (m1, m2, m3), (m2, m3, m4))
    r = (sy, sjy, sj2y)

    def det3(m):
        return (m[0][0] * (m[1][1] * m[2][2] - m[1][2] * m[2][1]) - m[0][1] * (m[1][0] * m[2][2] - m[1][2] * m[2][0])
                + m[0][2] * (m[1][0] * m[2][1] - m[1][1] * m[2][0]))

    d = det3(g)
    if d == 0:
        return float(y.mean()), 0.0, 0.0
    sol = []
    for k in range(3):
        mk = [list(row) for row in g]
        for i in range(3):
            mk[i][k] = r[i]
        sol.append(det3(mk) / d)
    b0, b1, b2 = sol  # in j; u = j + u0  ->  j = u - u0
    return b0 - b1 * u0 + b2 * u0 * u0, b1 - 2 * b2 * u0, b2
