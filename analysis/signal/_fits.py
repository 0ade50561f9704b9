"""Small least-squares fits run many times per beat, written without threaded BLAS calls.

Polynomials through a few tens to hundreds of samples (:func:`poly_lsq`, :func:`quadratic_fit`,
:class:`RunningSums`) and the tops of peaks (:func:`parabolic_peak`, :func:`top_fit_peak`).
"""

import functools
import math

import numpy as np

__all__ = ["quadratic_fit", "quadratic_from_sums", "RunningSums", "poly_lsq", "poly_lsq_centred", "parabolic_peak", "top_fit_peak"]


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


def parabolic_peak(y: np.ndarray, i: int) -> tuple[float, float]:
    """Sub-sample position and height of a peak at sample ``i`` from a parabola through 3 samples.

    Returns ``(offset, value)`` with ``offset`` in samples, within [-0.5, 0.5]; at an edge the
    sample itself.
    """
    if i <= 0 or i >= len(y) - 1:
        return 0.0, float(y[i])
    a, b, c = float(y[i - 1]), float(y[i]), float(y[i + 1])
    den = a - 2.0 * b + c
    if den >= 0:
        return 0.0, b
    off = 0.5 * (a - c) / den
    off = min(max(off, -0.5), 0.5)
    return off, b - 0.25 * (a - c) * off


def poly_lsq(x: np.ndarray, y: np.ndarray, deg: int) -> np.ndarray:
    """Least-squares polynomial coefficients, lowest order first (as numpy.polynomial).

    Solved from the normal equations built with plain sums: for the few-hundred-sample fits
    done per beat this avoids multithreaded BLAS calls, whose start-up costs more than the fit
    on a busy machine. ``x`` should be scaled to about [-1, 1] by the caller.
    """
    x = np.asarray(x, dtype=np.float64)
    y = np.asarray(y, dtype=np.float64)
    # The moments sum(x^p) and sum(x^p y), then the small symmetric system solved in Python:
    # for fits of tens to hundreds of samples, each numpy call costs more than its arithmetic.
    # The powers as rows of one table, each from the one before (the same products and sums as
    # one power at a time, in a third of the numpy calls).
    powers = np.empty((2 * deg + 1, x.size))
    powers[0] = 1.0
    for p in range(1, 2 * deg + 1):
        np.multiply(powers[p - 1], x, out=powers[p])
    moments = powers.sum(axis=1).tolist()
    rhs = (powers[:deg + 1] * y).sum(axis=1).tolist()
    sol = _solve_small([[moments[r + c] for c in range(deg + 1)] for r in range(deg + 1)], rhs)
    if sol is None:
        return np.polynomial.polynomial.polyfit(x, y, deg)
    return np.array(sol)


def poly_lsq_centred(y: np.ndarray, deg: int) -> np.ndarray:
    """:func:`poly_lsq` of ``y`` at ``u`` evenly spaced from -1 to 1 (``u_k = (k - c) / c`` with
    ``c = (len(y) - 1) / 2``), lowest order first.

    The fits made per beat (the tops of peaks) take this form once the abscissa is centred on the
    window, so the least-squares solution operator of each length (the pseudo-inverse of its
    Vandermonde matrix) is computed once per process and a fit is one small product with it: the
    coefficients are those of :func:`poly_lsq` on the same ``u`` to rounding.
    """
    y = np.asarray(y, dtype=np.float64)
    return _centred_operator(y.size, int(deg)).dot(y)


@functools.lru_cache(maxsize=1024)
def _centred_operator(n: int, deg: int) -> np.ndarray:
    c = (n - 1) / 2.0
    u = (np.arange(n, dtype=np.float64) - c) / max(c, 1.0)
    return np.ascontiguousarray(np.linalg.pinv(np.vander(u, deg + 1, increasing=True)))


def _solve_small(a: list[list[float]], b: list[float]) -> list[float] | None:
    """``a x = b`` for a small system, by Gaussian elimination with partial pivoting (None when
    singular)."""
    n = len(b)
    m = [row[:] + [b[i]] for i, row in enumerate(a)]
    for col in range(n):
        piv = max(range(col, n), key=lambda r: abs(m[r][col]))
        if m[piv][col] == 0.0:
            return None
        m[col], m[piv] = m[piv], m[col]
        inv = 1.0 / m[col][col]
        for r in range(col + 1, n):
            f = m[r][col] * inv
            if f:
                row_r, row_c = m[r], m[col]
                for c in range(col, n + 1):
                    row_r[c] -= f * row_c[c]
    out = [0.0] * n
    for r in range(n - 1, -1, -1):
        acc = m[r][n] - sum(m[r][c] * out[c] for c in range(r + 1, n))
        out[r] = acc / m[r][r]
    return out


def top_fit_peak(y: np.ndarray, i: int, *, fraction: float = 0.9, max_half: int = 200) -> tuple[float, float]:
    """Position and height of a peak from a least-squares cubic (or parabola) through its top.

    The curve is fitted to the contiguous samples around ``i`` that are at least ``fraction``
    of the peak's height (at least the 3 samples around it), so that on a broad, noisy peak many
    samples are averaged (no bias from taking the largest of noisy samples) while on a sharp one
    it reduces to the three-point parabola; a cubic (from 7 samples on) follows an asymmetric top
    without shifting its position. Returns ``(offset, value)``, ``offset`` in samples.
    """
    n = len(y)
    peak = float(y[i])
    if n < 3 or peak <= 0:
        return parabolic_peak(y, i) if 0 < i < n - 1 else (0.0, peak)
    level = fraction * peak
    # The contiguous run of samples at or above the level around i (at most max_half each side).
    a, b = max(0, i - max_half), min(n, i + max_half + 1)
    below = np.flatnonzero(np.asarray(y[a:b]) < level) + a
    k = int(np.searchsorted(below, i))
    lo = int(below[k - 1]) + 1 if k > 0 else a
    hi = int(below[k]) - 1 if k < below.size else b - 1
    if hi - lo < 3:
        return parabolic_peak(y, i)
    yy = np.asarray(y[lo:hi + 1], dtype=np.float64)
    # The fits are in u from -1 to 1 across the window (sample lo + half + half u):
    # :func:`poly_lsq_centred`.
    half = (hi - lo) / 2.0
    centre = lo - i + half
    if hi - lo >= 6:
        # A cubic follows an asymmetric top (an upstroke's dV/dt rises and falls at different rates).
        c = poly_lsq_centred(yy, 3)
        best = None
        # Where the cubic's slope c1 + 2 c2 u + 3 c3 u^2 is zero (closed form).
        qa, qb, qc = 3.0 * c[3], 2.0 * c[2], c[1]
        disc = qb * qb - 4.0 * qa * qc
        if disc < 0:
            roots: tuple = ()
        else:
            # The cancellation-free form of the quadratic formula (a nearly parabolic top has
            # a tiny cubic term).
            q = -0.5 * (qb + math.copysign(math.sqrt(disc), qb))
            roots = tuple(r for r in ((q / qa) if qa != 0.0 else None, (qc / q) if q != 0.0 else None) if r is not None)
        for u in roots:
            if -1.0 <= u <= 1.0:
                val = c[0] + u * (c[1] + u * (c[2] + u * c[3]))
                if best is None or val > best[1]:
                    best = (centre + half * u, val)
        if best is not None:
            return float(best[0]), float(best[1])
    c0, c1, c2 = poly_lsq_centred(yy, 2)
    if c2 >= 0:
        return parabolic_peak(y, i)
    off = -c1 / (2 * c2)
    if not (-1.0 <= off <= 1.0):
        return parabolic_peak(y, i)
    return float(centre + half * off), float(c0 - c1 * c1 / (4 * c2))
