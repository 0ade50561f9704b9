"""The MDP's time on a flat trough: a two-sided parabola fitted to the whole trough.

On a sharp trough the minimum of the smoothed V pins the MDP's time; on a flat one (a slow,
nearly level early diastole) the smoothed minimum wanders along the trough with the noise, and
lands on the flat, diastolic side more often than not: every window that starts there (DDR from
MDP to TOP, the early DDR over its first 100 ms) moves with it. So the MDP's time is the vertex
of ``V = MDP + p (t0 - t)^2`` before ``t0`` and ``MDP + q (t - t0)^2`` after it, least squares on
the samples of the stretch around the minimum where the smoothed V lies within a band of the
MDP: ``mdp_fit_band_mV``, or ``MDP_BAND_NOISE`` times the noise left after the MDP's smoothing
when that is wider. The steep repolarising side and the flat diastolic side each get their own
curvature, so the vertex is not pulled toward the flat side as a band's centre or a symmetric fit
is. The MDP's value is not changed. Common practice, no source (a piecewise-quadratic vertex fit;
checked against the exact minimum of synthetic cells in the tests).
"""

from __future__ import annotations

import numpy as np

from analysis.signal import cached_savgol_coeffs, savgol_smooth, savgol_smooth_interior

__all__ = ["FIRST_BEAT_FALL_MV", "MDP_BAND_MIN_MV", "MDP_BAND_NOISE", "mdp_band_mV", "mdp_vertex_times", "recorded_diastole"]

#: The noise band spans this many rms of the white noise left in the smoothed V (10: the hum and
#: low-frequency noise that smoothing leaves move the smoothed minimum further than white noise).
MDP_BAND_NOISE = 10.0
#: ... and at least this many mV (a clean trace's band: the minimum's own time).
MDP_BAND_MIN_MV = 0.002


def mdp_band_mV(noise_mV: float, w: int) -> float:
    """The band around the MDP (mV) for white noise of ``noise_mV`` rms smoothed over ``w`` samples."""
    gain = 1.0 if w <= 1 else float(np.sqrt(np.sum(cached_savgol_coeffs(w, 3, 0, 1.0) ** 2)))
    return max(MDP_BAND_NOISE * noise_mV * gain, MDP_BAND_MIN_MV)


def mdp_vertex_times(v: np.ndarray, fs_hz: float, w: int, band_mV: float, i_mdp: np.ndarray, mdp: np.ndarray,
                     lo: np.ndarray, hi: np.ndarray, *, noise_band_mV: float = 0.0) -> np.ndarray:
    """Fractional index of each MDP's time: the vertex of a two-sided parabola through its trough.

    Parameters
    ----------
    v : ndarray
        Membrane potential (mV).
    w : int
        The MDP's smoothing window (samples, odd; 1 for none).
    i_mdp, mdp : ndarray
        Each beat's smoothed minimum (fractional index) and the MDP (mV); NaN for none.
    lo, hi : ndarray of int
        The stretch each MDP may span (the previous beat's upstroke and this beat's).
    band_mV : float
        Depth of the trough the parabola is fitted to.
    noise_band_mV : float
        The vertex is kept within the stretch where the smoothed V lies this close to the MDP
        (where the noise leaves the minimum's time undecided): on a clean trace that is the
        minimum itself, whatever the trough's shape.

    Returns
    -------
    ndarray
        The vertex's fractional index, ``i_mdp`` itself where the minimum is NaN or the band
        holds fewer than nine samples.
    """
    out = np.array(i_mdp, dtype=np.float64, copy=True)
    n = v.size
    h = w // 2
    todo, troughs = [], []
    for b in np.flatnonzero(np.isfinite(out)):
        m = round(out[b])
        # The trough is looked for within 250 ms of the minimum (a bounded cost per beat).
        reach = int(0.25 * fs_hz)
        a, z = max(int(lo[b]), 0, m - reach), min(int(hi[b]), n, m + reach + 1)
        if not a <= m < z:
            continue
        ca, cz = max(0, a - 2 * h), min(n, z + 2 * h)
        levels = (float(mdp[b]) + band_mV, float(mdp[b]) + noise_band_mV)
        if w >= 31 and ca == a - 2 * h and cz == z + 2 * h:
            # The same smoothing from running sums (a cost independent of the window), first
            # within 100 ms of the minimum, where troughs end (the band of a slow nodal
            # diastole spans about 80 ms): the whole reach only when a stretch runs to that edge.
            (left, right), (n_left, n_right) = _stretches_near(v, w, m, a, z, levels, int(0.1 * fs_hz))
        else:
            seg = v[ca:cz]
            sm = savgol_smooth(seg, fs_hz, window_ms=w / fs_hz * 1e3, polyorder=3) if w > 1 else seg
            sm = sm[a - ca:z - ca]
            (left, right), (n_left, n_right) = (_stretch(sm, m - a, level) for level in levels)
        if right - left >= 9 and n_right > n_left:
            todo.append((b, a, left, n_left, n_right))
            troughs.append(v[a + left:a + right])
    # The troughs' fits all at once (the same numbers as one by one, without a pass per beat).
    for (b, a, left, n_left, n_right), t0 in zip(todo, _two_sided_vertices(troughs)):
        out[b] = a + min(max(left + t0, n_left - 0.5), n_right - 0.5)
    return out


def _stretches_near(v: np.ndarray, w: int, m: int, a: int, z: int, levels: tuple[float, ...],
                    near: int) -> list[tuple[int, int]]:
    """:func:`_stretch` of each level around ``m``, relative to ``a``, in V smoothed over ``w``
    samples by running sums (``v`` holds ``2 (w // 2)`` samples of context on each side of
    ``a:z``): ``m - near:m + near + 1`` is smoothed first, all of ``a:z`` only when a stretch
    found there runs to one of its edges."""
    h = w // 2
    lo, hi = max(a, m - near), min(z, m + near + 1)
    while True:
        sm = savgol_smooth_interior(v[lo - 2 * h:hi + 2 * h], w)[h:hi - lo + h]
        found = [_stretch(sm, m - lo, level) for level in levels]
        if (lo, hi) == (a, z) or all((left > 0 or lo == a) and (right < sm.size or hi == z) for left, right in found):
            return [(left + lo - a, right + lo - a) for left, right in found]
        lo, hi = a, z


def _stretch(sm: np.ndarray, j: int, level: float) -> tuple[int, int]:
    """The samples ``[left, right)`` around ``j`` where ``sm`` stays at or below ``level``."""
    if sm[j] > level:
        return j, j + 1
    above_left = np.flatnonzero(sm[:j] > level)
    above_right = np.flatnonzero(sm[j:] > level)
    left = int(above_left[-1]) + 1 if above_left.size else 0
    right = j + int(above_right[0]) if above_right.size else sm.size
    return left, right


def _two_sided_vertices(troughs: list[np.ndarray]) -> np.ndarray:
    """Where a minimum with different curvatures on its two sides lies in each trough (samples).

    ``y = c + p (t0 - t)^2`` before ``t0`` and ``c + q (t - t0)^2`` after it, fitted by least
    squares for each candidate ``t0`` (linear in c, p, q), the best ``t0`` taken on a coarse grid
    and then by quarter samples around it: a trough whose repolarising side is steep and whose
    diastolic side is flat is followed without the shift toward the flat side that a smoothed
    minimum, a band's centre or a symmetric fit shows. The troughs are fitted together, each on
    its own rows (padding never enters a trough's sums).
    """
    k = len(troughs)
    if k == 0:
        return np.empty(0)
    ys, qs = [], []
    for y in troughs:
        # A long trough is fitted on block means of at most 256 points (its shape is slow; the
        # cost per beat stays small on long, finely sampled diastoles).
        q = max(1, -(-y.size // 256))
        if q > 1:
            y = y[:(y.size // q) * q].reshape(-1, q).mean(axis=1)
        ys.append(y - y.mean())  # centred: the constant absorbs the mean
        qs.append(q)
    ms = np.array([y.size for y in ys], np.int64)
    width = int(ms.max())
    yy = np.array([float(y @ y) for y in ys])
    y_sum = np.array([float(y.sum()) for y in ys])
    fwd, rev = np.zeros((k, width)), np.zeros((k, width))
    for r, y in enumerate(ys):
        fwd[r, :y.size] = y
        rev[r, :y.size] = y[::-1]  # u = m - 1 - t: the right side as a left one
    # The least-squares fit at every candidate from running sums of t^p and t^p y (t scaled to
    # [0, 1) per trough): the two sides never overlap, so the normal equations eliminate to
    # closed form, and each candidate costs a few operations, not a pass over the trough.
    s = np.arange(width, dtype=np.float64)[None, :] / ms[:, None]
    fwd, rev = _power_sums(s, fwd), _power_sums(s, rev)
    rows = np.arange(k)[:, None]
    mc = ms[:, None]

    def best(t0: np.ndarray, valid: np.ndarray) -> np.ndarray:
        kk = np.floor(t0).astype(np.int64) + 1  # samples t <= t0 on the left, the rest on the right
        s_l, s_ll, s_ly = _side(fwd[:, rows, kk], t0 / mc)
        s_r, s_rr, s_ry = _side(rev[:, rows, mc - kk], (mc - 1 - t0) / mc)
        c = (y_sum[:, None] - s_l * s_ly / s_ll - s_r * s_ry / s_rr) / (mc - s_l * s_l / s_ll - s_r * s_r / s_rr)
        p = (s_ly - c * s_l) / s_ll
        q = (s_ry - c * s_r) / s_rr
        sse = yy[:, None] - (c * y_sum[:, None] + p * s_ly + q * s_ry)
        return t0[np.arange(k), np.argmin(np.where(valid, sse, np.inf), axis=1)]

    steps = np.maximum(1, ms // 64)
    coarse = best(*_padded([np.arange(1, m - 1, st, dtype=np.float64) for m, st in zip(ms, steps)]))
    fine = best(*_padded([np.arange(max(1.0, c - st), min(m - 2.0, c + st) + 0.25, 0.25)
                          for m, st, c in zip(ms, steps, coarse)]))
    q = np.array(qs, np.float64)
    return fine * q + 0.5 * (q - 1)


def _padded(grids: list[np.ndarray]) -> tuple[np.ndarray, np.ndarray]:
    """The candidates of every trough as rows (padded with 1.0, a valid candidate) and a mask."""
    n = max(g.size for g in grids)
    out = np.ones((len(grids), n))
    valid = np.zeros((len(grids), n), bool)
    for r, g in enumerate(grids):
        out[r, :g.size] = g
        valid[r, :g.size] = True
    return out, valid


def _power_sums(s: np.ndarray, y: np.ndarray) -> np.ndarray:
    """Running sums along the rows, shape ``(8,) + y.shape[:-1] + (n + 1,)``: s^0..s^4, then
    y s^0..y s^2; column ``k`` over a row's first ``k`` samples."""
    out = np.zeros((8,) + y.shape[:-1] + (y.shape[-1] + 1,))
    r = out[..., 1:]
    r[0] = 1.0
    r[1] = s
    np.multiply(s, s, out=r[2])
    np.multiply(r[2], s, out=r[3])
    np.multiply(r[2], r[2], out=r[4])
    np.multiply(r[:3], y, out=r[5:])
    np.cumsum(r, axis=-1, out=r)
    return out


def _side(sums: np.ndarray, a: np.ndarray):
    """From the running sums at each candidate's count of samples, with ``x = (a - s)^2``:
    sum x, sum x^2, sum x y."""
    p0, p1, p2, p3, p4, q0, q1, q2 = sums
    a2 = a * a
    s_x = a2 * p0 - 2.0 * a * p1 + p2
    s_xx = a2 * a2 * p0 - 4.0 * a2 * a * p1 + 6.0 * a2 * p2 - 4.0 * a * p3 + p4
    s_xy = a2 * q0 - 2.0 * a * q1 + q2
    return s_x, s_xx, s_xy

#: The first beat of a sweep is measured from the diastole recorded before it when V fell by at
#: least this many mV (or 10 x the noise rms) from the sweep's start into a minimum that lies two
#: MDP windows or more from both the start and the upstroke: the previous beat's repolarisation
#: is on record, so the minimum is the MDP the definition asks for, not a sample where the
#: recording happened to begin (common practice, no source).
FIRST_BEAT_FALL_MV = 2.0


def recorded_diastole(v: np.ndarray, g: int, w: int, m0: int, noise_mV: float) -> bool:
    """Whether the samples before a sweep's first upstroke ``g`` hold a whole diastole.

    ``v`` starts where the sweep starts; ``m0`` is where V, averaged over the MDP window ``w``,
    is lowest in ``[0, g]``.
    """
    edge = 2 * max(w, 1)
    if m0 < edge or g - m0 < edge:
        return False
    start = float(np.mean(v[:max(w, 1)]))
    lowest = float(np.mean(v[max(0, m0 - w // 2):m0 + w // 2 + 1]))
    return start - lowest >= max(FIRST_BEAT_FALL_MV, 10.0 * noise_mV)
