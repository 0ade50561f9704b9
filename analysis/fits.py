"""Small least-squares fits run many times per beat, written without threaded BLAS calls."""

import numpy as np

__all__ = ["quadratic_fit", "quadratic_from_sums", "RunningSums"]


def quadratic_fit(y: np.ndarray, u0: float) -> tuple[float, float, float]:
    """Least-squares ``c0 + c1 u + c2 u^2`` through ``y`` at ``u = u0, u0 + 1, ...``.

    The moments of the (integer-spaced) abscissae are closed forms, so only three sums over the
    samples are taken: this fit runs several times per beat.
    """
    n = y.size
    j = np.arange(n, dtype=np.float64)
    sy = float(y.sum())
    # Plain sums, not np.dot: on a busy machine a threaded BLAS call costs far more than the sum.
    sjy = float((j * y).sum())
    sj2y = float((j * j * y).sum())
    return quadratic_from_sums(n, sy, sjy, sj2y, u0)


def quadratic_from_sums(n: int, sy: float, sjy: float, sj2y: float, u0: float) -> tuple[float, float, float]:
    """:func:`quadratic_fit` from the sums of ``y``, ``j y`` and ``j^2 y`` (``j = 0..n-1``)."""
    if n < 3:
        return (sy / n if n else 0.0), 0.0, 0.0
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
        return sy / n, 0.0, 0.0
    sol = []
    for k in range(3):
        mk = [list(row) for row in g]
        for i in range(3):
            mk[i][k] = r[i]
        sol.append(det3(mk) / d)
    b0, b1, b2 = sol  # in j; u = j + u0  ->  j = u - u0
    return b0 - b1 * u0 + b2 * u0 * u0, b1 - 2 * b2 * u0, b2


class RunningSums:
    """Running sums of ``y``, ``j y`` and ``j^2 y`` over a stretch, for many quadratic fits on it.

    Each fit over a window of the stretch then costs a few subtractions instead of three passes
    over the window's samples. ``y`` is kept as ``y - ref`` and the index relative to the
    stretch's start, so the sums stay small enough for float64 to hold them to ~1e-10.
    """

    def __init__(self, y: np.ndarray, start: int, ref: float = 0.0) -> None:
        z = np.asarray(y, dtype=np.float64) - ref
        j = np.arange(z.size, dtype=np.float64)
        self.start, self.stop, self.ref = start, start + z.size, ref
        self._p = np.zeros((3, z.size + 1))
        np.cumsum(z, out=self._p[0, 1:])
        np.cumsum(j * z, out=self._p[1, 1:])
        np.cumsum(j * j * z, out=self._p[2, 1:])

    def covers(self, a: int, b: int) -> bool:
        return self.start <= a and b <= self.stop

    def fit(self, a: int, b: int, u0: float) -> tuple[float, float, float]:
        """:func:`quadratic_fit` of the samples ``[a, b)`` (sweep indices) at ``u = u0, u0 + 1, ...``."""
        i, k = a - self.start, b - self.start
        s0, s1, s2 = self._p[:, k] - self._p[:, i]
        # from j relative to the stretch to j' = j - i relative to the window
        sjy = s1 - i * s0
        sj2y = s2 - 2.0 * i * s1 + i * i * s0
        c0, c1, c2 = quadratic_from_sums(b - a, float(s0), float(sjy), float(sj2y), u0)
        return c0 + self.ref, c1, c2
