"""The MDP and the peak of all the beats of a stretch at once.

* MDP: the minimum of V smoothed by a Savitzky-Golay fit of order 3 over ``mdp_smoothing_ms``,
  looked for within two windows of where the window's moving average is lowest, and refined by
  a parabola through the three samples around it (the raw minimum of a noisy trace lies 2-3
  noise rms below the true one).
* Peak: the top is where V, smoothed as for dV/dt max, lies within ``max(0.5 mV, 4 x noise)``
  of its maximum, looked for up to 20 ms from the raw maximum (which noise may have put anywhere
  on a flat top); a quartic is fitted there to the raw samples and its maximum taken, so noise
  is averaged instead of its largest excursion being taken, and a sharp or asymmetric top is
  still followed.

The samples around every beat are gathered into one array and worked together (smoothing along
rows, the fits solved as one stack of normal equations). Beats whose windows reach an end of the
samples given, where the smoothing needs its edge fits, are left to the caller (the ``None``
rows of the results), which works them one by one by the same rules.
"""

from __future__ import annotations

import numpy as np

from analysis.beats._repolarisation import _smooth_rows

__all__ = ["mdp_batch", "peak_batch"]


def _parabola(y_left: np.ndarray, y: np.ndarray, y_right: np.ndarray, edge: np.ndarray):
    """Offset (within +-0.5) and height of the vertex through three samples, per row (as
    :func:`analysis.signal.parabolic_peak` for a maximum; 0 and the sample at an edge)."""
    den = y_left - 2.0 * y + y_right
    use = ~edge & (den < 0)
    with np.errstate(divide="ignore", invalid="ignore"):
        off = np.where(use, np.clip(0.5 * (y_left - y_right) / den, -0.5, 0.5), 0.0)
    return off, np.where(use, y - 0.25 * (y_left - y_right) * off, y)


def mdp_batch(v: np.ndarray, w: int, m0: np.ndarray, lo: np.ndarray, hi: np.ndarray):
    """Minimum of the smoothed V within ``[lo, hi)`` and within ``2 w`` of ``m0``, per beat.

    Returns ``(index, value, done)``: fractional indices and values, and which beats were
    worked (the others reach an end of ``v``).
    """
    k = m0.size
    n = v.size
    h = w // 2
    a = np.maximum(lo, m0 - 2 * w)
    b = np.minimum(hi, m0 + 2 * w + 1)
    done = (m0 - 2 * w - 2 * h >= 0) & (m0 + 2 * w + 2 * h + 1 <= n) & (b > a)
    idx_out = np.full(k, np.nan)
    val_out = np.full(k, np.nan)
    rows = np.flatnonzero(done)
    if rows.size == 0:
        return idx_out, val_out, done
    cols = np.arange(-2 * w - h, 2 * w + h + 1)
    sm = _smooth_rows(v[m0[rows, None] + cols[None, :]], w)  # columns: m0 - 2w .. m0 + 2w
    pos = m0[rows, None] + np.arange(-2 * w, 2 * w + 1)[None, :]
    valid = (pos >= a[rows, None]) & (pos < b[rows, None])
    j = np.argmin(np.where(valid, sm, np.inf), axis=1)
    at = np.arange(rows.size)
    first = np.argmax(valid, axis=1)
    last = sm.shape[1] - 1 - np.argmax(valid[:, ::-1], axis=1)
    edge = (j == first) | (j == last)
    jl, jr = np.maximum(j - 1, 0), np.minimum(j + 1, sm.shape[1] - 1)
    off, top = _parabola(-sm[at, jl], -sm[at, j], -sm[at, jr], edge)
    idx_out[rows] = pos[at, j] + off
    val_out[rows] = -top
    return idx_out, val_out, done


def peak_batch(v: np.ndarray, fs_hz: float, g: np.ndarray, end: np.ndarray, ip0: np.ndarray, w: np.ndarray,
               delta: float):
    """The peak of each beat: ``(index, value, done)`` as :func:`mdp_batch` returns them.

    ``g`` and ``end`` bound each beat's search (its upstroke and the next diastole's minimum),
    ``ip0`` is its raw maximum, ``w`` the odd smoothing window of each beat (samples), ``delta``
    the depth of the top in mV.
    """
    k = ip0.size
    n = v.size
    idx_out = np.full(k, np.nan)
    val_out = np.full(k, np.nan)
    done = np.zeros(k, bool)
    for width in np.unique(w):
        rows = np.flatnonzero(w == width)
        width = int(width)
        h = width // 2
        reach = max(3 * width, int(round(0.02 * fs_hz)))
        ok = (ip0[rows] - reach - 2 * h >= 0) & (ip0[rows] + reach + 2 * h + 1 <= n)
        rows = rows[ok]
        if rows.size == 0:
            continue
        done[rows] = True
        span = np.arange(-reach, reach + 1)
        if width > 1:
            cols = np.arange(-reach - h, reach + h + 1)
            sm = _smooth_rows(v[ip0[rows, None] + cols[None, :]], width)
        else:
            sm = v[ip0[rows, None] + span[None, :]]
        raw = v[ip0[rows, None] + span[None, :]]
        pos = ip0[rows, None] + span[None, :]
        a = np.maximum(g[rows], ip0[rows] - reach)
        b = np.minimum(end[rows], ip0[rows] + reach + 1)
        valid = (pos >= a[:, None]) & (pos < b[:, None])
        at = np.arange(rows.size)
        j = np.argmax(np.where(valid, sm, -np.inf), axis=1)
        first = np.argmax(valid, axis=1)
        last = sm.shape[1] - 1 - np.argmax(valid[:, ::-1], axis=1)
        edge = (j == first) | (j == last)
        off, top_v = _parabola(sm[at, np.maximum(j - 1, 0)], sm[at, j], sm[at, np.minimum(j + 1, sm.shape[1] - 1)], edge)
        idx_out[rows] = pos[at, j] + off
        val_out[rows] = top_v
        # The top: the samples around j whose smoothed V is within delta of it. Its left end is
        # the first sample to fall below (kept, as the single-beat rule keeps it), its right end
        # the last one above.
        c = np.arange(sm.shape[1])
        below = valid & (sm < sm[at, j][:, None] - delta)
        left = np.where(below & (c[None, :] <= j[:, None]), c[None, :], -1).max(axis=1)
        lo = np.where(left >= 0, left, first)
        right = np.where(below & (c[None, :] >= j[:, None]), c[None, :], sm.shape[1]).min(axis=1)
        hi = np.minimum(right, last + 1)
        fit = hi - lo >= 7
        if not fit.any():
            continue
        fr = np.flatnonzero(fit)
        scale = (hi - lo)[fr].astype(np.float64)
        # Only the columns some top spans: the normal equations from the moments of u there.
        c_lo, c_hi = int(lo[fr].min()), int(hi[fr].max())
        cc = c[c_lo:c_hi]
        u = (cc[None, :] - j[fr, None]) / scale[:, None]
        inside = (cc[None, :] >= lo[fr, None]) & (cc[None, :] < hi[fr, None])
        y = np.where(inside, raw[fr, c_lo:c_hi], 0.0)
        up = inside.astype(np.float64)
        mom = np.empty((fr.size, 9))
        rhs = np.empty((fr.size, 5))
        for p in range(9):
            mom[:, p] = up.sum(axis=1)
            if p < 5:
                rhs[:, p] = (up * y).sum(axis=1)
            up *= u
        gram = mom[:, np.add.outer(np.arange(5), np.arange(5))]
        coef = np.linalg.solve(gram, rhs[:, :, None])[:, :, 0]
        u0 = (lo[fr] - j[fr]) / scale
        u1 = (hi[fr] - 1 - j[fr]) / scale
        found, u_top, v_top = _quartic_max_rows(coef, u0, u1, (hi - lo)[fr])
        sel = fr[found]
        idx_out[rows[sel]] = pos[sel, j[sel]] + u_top[found] * scale[found]
        val_out[rows[sel]] = v_top[found]
    return idx_out, val_out, done


def _quartic_max_rows(coef: np.ndarray, u0: np.ndarray, u1: np.ndarray, n: np.ndarray):
    """:func:`analysis.beats._marker_math.quartic_max` for a stack of quartics: (found, u, value).

    Each row is scanned at its own ``2 n + 1`` points, as one quartic alone would be.
    """
    r = coef.shape[0]
    count = 2 * n + 1
    i = np.arange(int(count.max()))
    grid = u0[:, None] + (u1 - u0)[:, None] * (i[None, :] / (count - 1)[:, None])
    c0, c1, c2, c3, c4 = (coef[:, i:i + 1] for i in range(5))
    val = c0 + grid * (c1 + grid * (c2 + grid * (c3 + grid * c4)))
    val = np.where(i[None, :] < count[:, None], val, -np.inf)
    kk = np.argmax(val, axis=1)
    found = (kk > 0) & (kk < count - 1)
    at = np.arange(r)
    kk = np.clip(kk, 1, np.maximum(count - 2, 1))
    u = grid[at, kk].copy()
    lo, hi = grid[at, kk - 1], grid[at, kk + 1]
    c0, c1, c2, c3, c4 = (coef[:, i] for i in range(5))
    live = found.copy()
    for _ in range(6):
        d1 = c1 + u * (2 * c2 + u * (3 * c3 + u * 4 * c4))
        d2 = 2 * c2 + u * (6 * c3 + u * 12 * c4)
        live &= d2 < 0
        with np.errstate(divide="ignore", invalid="ignore"):
            step = np.where(live, d1 / d2, 0.0)
        u = np.where(live, np.clip(u - step, lo, hi), u)
        live &= np.abs(step) >= 1e-12
    best = c0 + u * (c1 + u * (c2 + u * (c3 + u * c4)))
    at_grid = val[at, kk]
    worse = best < at_grid
    return found, np.where(worse, grid[at, kk], u), np.where(worse, at_grid, best)
