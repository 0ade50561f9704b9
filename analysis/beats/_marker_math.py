"""Small numeric helpers of the beat markers: a strided running mean and a quartic's maximum."""

from __future__ import annotations

import numpy as np

from analysis.signal import moving_mean

__all__ = ["quartic_max", "strided_mean"]


def strided_mean(v: np.ndarray, w: int, q: int) -> np.ndarray:
    """The mean of ``v`` over about ``w`` samples around samples 0, q, 2q, ...

    Built from sums of blocks of ``q`` samples (the block starting at each grid sample and the
    ``w // (2 q)`` blocks on either side; fewer at the ends), so one pass over the samples: the
    average only has to show where a diastole's minimum lies to within an eighth of the window.
    """
    if w <= 1 or q <= 1:
        return moving_mean(np.asarray(v, dtype=np.float64), max(w, 1) | 1)[::max(q, 1)]
    n = v.size
    nb = -(-n // q)
    sums = np.zeros(nb)
    counts = np.full(nb, float(q))
    full = n // q
    ref = float(v[0]) if n else 0.0
    if full:
        # einsum sums each block (a row of q samples) in one pass, unlike a reduction per row
        sums[:full] = np.einsum("ij->i", v[:full * q].reshape(full, q)) - q * ref
    if full < nb:
        sums[full] = float(np.sum(v[full * q:] - ref))
        counts[full] = n - full * q
    r = max(0, w // (2 * q))
    cs = np.concatenate(([0.0], np.cumsum(sums)))
    cc = np.concatenate(([0.0], np.cumsum(counts)))
    j = np.arange(nb)
    a, b = np.maximum(j - r, 0), np.minimum(j + r + 1, nb)
    return (cs[b] - cs[a]) / (cc[b] - cc[a]) + ref


def quartic_max(coef: np.ndarray, u0: float, u1: float, n: int) -> tuple[float, float] | None:
    """Where in (u0, u1) the quartic ``coef`` (lowest order first) is highest, and its value.

    The quartic is scanned at two points per sample (``n`` samples span the interval) and the
    best point refined by Newton's method on its derivative; None when the highest point is an
    end of the interval (the top is not inside the fitted samples).
    """
    grid = np.linspace(u0, u1, 2 * n + 1)
    val = np.polynomial.polynomial.polyval(grid, coef)
    k = int(np.argmax(val))
    if not 0 < k < grid.size - 1:
        return None
    c0, c1, c2, c3, c4 = (float(c) for c in coef)
    u, lo, hi = float(grid[k]), float(grid[k - 1]), float(grid[k + 1])
    for _ in range(6):
        d1 = c1 + u * (2 * c2 + u * (3 * c3 + u * 4 * c4))
        d2 = 2 * c2 + u * (6 * c3 + u * 12 * c4)
        if d2 >= 0:
            break
        step = d1 / d2
        u = min(max(u - step, lo), hi)
        if abs(step) < 1e-12:
            break
    best = c0 + u * (c1 + u * (c2 + u * (c3 + u * c4)))
    if best < float(val[k]):
        return float(grid[k]), float(val[k])
    return u, best
