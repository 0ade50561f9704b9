"""APD level crossings of all the beats of a stretch at once: the first crossing, then a local fit.

For each beat and each repolarisation level (``peak - x/100 APA``, the levels falling as x rises):

1. the first time after the peak (after the previous level's crossing for the later levels) at
   which V, smoothed by a Savitzky-Golay fit of order 3 over ``repolarisation_smoothing_ms``,
   is at or below the level, interpolated linearly between samples;
2. with ``apd_crossing_method = "local_fit"``, that crossing refined on a quadratic fitted to the
   raw samples around it (:func:`refine_crossings`): the fit's half-width is a quarter of the time
   V takes to fall 10 % of the APA at the local slope (a few ms in phase 3, tens of ms on a
   plateau), so noise and mains hum average out where repolarisation is slow while the curve is
   still followed where it is fast; on a clean trace the result agrees with linear interpolation.

Both steps work on all beats together (samples gathered into one array per step, the fits solved
together); a beat whose repolarisation is longer than the gathered stretch, or that reaches the
end of the samples given, is worked on its own by the same rules (:func:`first_crossings_one`).
"""

from __future__ import annotations

import math

import numpy as np

from analysis.signal import RunningSums, savgol_coeffs, savgol_smooth

__all__ = ["first_crossings", "first_crossings_one", "refine_crossings", "refine_crossing_one"]

#: Repolarisations are gathered up to this long (longer ones are worked beat by beat).
_GATHER_S = 0.6


def _smooth_rows(x: np.ndarray, w: int) -> np.ndarray:
    """Savitzky-Golay smoothing (order 3) of each row at its interior samples (``w // 2`` lost each side)."""
    if w <= 1:
        return x
    if w >= 31:
        # Running sums cost the same for any window (a shifted sum costs two passes per tap);
        # they agree with the convolution to well under a microvolt.
        return _smooth_rows_sums(x, w)

    c = savgol_coeffs(w, 3)  # reversed for convolution; symmetric for smoothing
    # Each output is sum_k c[k] x[:, i + k], accumulated over k in order: a product of the rows'
    # sliding windows with c does that in one pass (numpy's own loop for strided operands, the
    # same additions in the same order as a pass per tap, so the same numbers).
    # (A single window per row would go to BLAS, whose sums run in another order: a pass per tap.)
    m = x.shape[1] - w + 1
    if m >= 2:
        return np.lib.stride_tricks.sliding_window_view(np.asarray(x, dtype=np.float64), w, axis=1) @ c
    out = np.zeros((x.shape[0], max(m, 0)))
    for k in range(w):
        out += c[k] * x[:, k:k + m]
    return out


def _smooth_rows_sums(x: np.ndarray, w: int) -> np.ndarray:
    """:func:`analysis.signal.savgol_smooth_interior` along each row."""
    h = w // 2
    m = x.shape[1] - 2 * h
    # Values near zero and indices centred on the row keep the running sums small, so that the
    # differences of them lose few digits.
    ref = x.mean(axis=1, keepdims=True)
    y = x - ref
    j = np.arange(x.shape[1], dtype=np.float64) - x.shape[1] // 2
    p = np.zeros((3, x.shape[0], x.shape[1] + 1))
    np.cumsum(y, axis=1, out=p[0, :, 1:])
    jy = j * y
    np.cumsum(jy, axis=1, out=p[1, :, 1:])
    np.cumsum(j * jy, axis=1, out=p[2, :, 1:])
    s0 = p[0, :, w:] - p[0, :, :m]
    s1 = p[1, :, w:] - p[1, :, :m]
    s2 = p[2, :, w:] - p[2, :, :m]
    i = j[h:h + m]
    k2y = s2 - 2.0 * i * s1 + i * i * s0
    s2k = h * (h + 1) * (2 * h + 1) / 3.0
    s4k = s2k * (3 * h * h + 3 * h - 1) / 5.0
    return (s4k * s0 - s2k * k2y) / (w * s4k - s2k * s2k) + ref


def first_crossings_one(v: np.ndarray, w_rep: int, ip: int, limit: int, levels: list[float]) -> list[float]:
    """The first smoothed downward crossing of each level after ``ip``, before ``limit`` (one beat).

    The search goes in blocks from the peak, smoothing only from where the raw samples come
    within 5 mV of the level (the smoothed trace cannot cross it before).
    """
    n = v.size
    h = w_rep // 2
    out = []
    start = ip
    for level in levels:  # levels fall as the percentage rises
        if not math.isfinite(level):
            out.append(math.nan)
            continue
        x = math.nan
        a = start
        block = max(4096, 20 * w_rep)
        while a < limit:
            b = min(limit, a + block)
            raw = np.flatnonzero(v[a:b] <= level + 5.0)
            if raw.size == 0:
                a = b
                continue
            a2 = a + int(raw[0])
            b2 = min(limit, a2 + block)
            lo, hi = max(0, a2 - 2 * h), min(n, b2 + 2 * h)
            if w_rep > 1:
                sm = savgol_smooth(v[lo:hi], 1.0, window_ms=w_rep * 1e3, polyorder=3, edges=lo == 0 or hi == n)
            else:
                sm = v[lo:hi]
            part = sm[a2 - lo:b2 - lo]
            below = np.flatnonzero(part <= level)
            if below.size == 0:
                a = b2
                continue
            j = a2 + int(below[0])
            if j > start and j - 1 - lo >= 0:
                y0, y1 = sm[j - 1 - lo], sm[j - lo]
                x = j - 1 + (y0 - level) / (y0 - y1) if y0 != y1 else float(j)
            else:
                x = float(j)
            break
        out.append(x)
        if not math.isnan(x):
            start = int(x)
    return out


def first_crossings(v: np.ndarray, fs_hz: float, w_rep: int, ip: np.ndarray, limit: np.ndarray,
                    levels: np.ndarray) -> np.ndarray:
    """:func:`first_crossings_one` for every beat: ``levels`` has one row per beat (NaN: skip).

    Returns fractional indices, shape ``levels.shape`` (NaN where a level is not crossed). The
    repolarisations are gathered and smoothed in stages of 50 ms after each peak, up to
    :data:`_GATHER_S`, each beat only about as far as its deepest level lies.
    """
    k, n_lv = levels.shape
    out = np.full((k, n_lv), np.nan)
    n = v.size
    h = w_rep // 2
    cap = int(round(_GATHER_S * fs_hz))
    span = np.minimum(limit - ip, cap)
    inside = (ip - 2 * h - 1 > 0) & (ip + span + 2 * h < n) & (span > 1)
    cur = np.zeros(k, np.int64)  # the level each beat is looking for
    start = np.zeros(k, np.int64)  # from this sample after the peak
    # Stages of 50 ms: a beat is gathered only about as far as its deepest level lies.
    stages = sorted({int(round(t * fs_hz)) for t in np.arange(0.05, _GATHER_S, 0.05)} | {cap})
    c_lo = 0
    for c_hi in stages:
        if c_hi <= c_lo:
            continue
        rows = np.flatnonzero(inside & (cur < n_lv) & (span > c_lo))
        if rows.size:
            # columns c_lo - 1 .. c_hi - 1 of the smoothed trace (one before, for interpolation)
            # (the raw samples with h more on each side, smoothed along the rows: only the
            # stretches still searched are smoothed, not the whole trace)
            c = np.arange(c_lo - 1, c_hi)
            idx = np.clip(ip[rows, None] + np.arange(c_lo - 1 - h, c_hi + h)[None, :], 0, n - 1)
            sm = _smooth_rows(v[idx], w_rep)
            col = np.arange(c.size)[None, :]
            for p in range(n_lv):
                mine = cur[rows] == p
                lv = levels[rows, p]
                skip = mine & ~np.isfinite(lv)
                cur[rows[skip]] += 1
                sel = np.flatnonzero(mine & ~skip)
                if sel.size == 0:
                    continue
                r, lv = rows[sel], lv[sel]
                smr = sm[sel]
                # Columns searched: from the beat's start (never the column before the stage,
                # which only serves the interpolation) to the end of its span.
                first = np.maximum(start[r] - (c_lo - 1), 1)
                stop = span[r] - (c_lo - 1)
                below = (smr <= lv[:, None]) & (col >= first[:, None]) & (col < stop[:, None])
                has = below.any(axis=1)
                j = np.argmax(below, axis=1)  # column of sm
                at = np.arange(sel.size)
                y0, y1 = smr[at, np.maximum(j - 1, 0)], smr[at, j]
                jc = c[j]  # samples after the peak
                interp = (jc > start[r]) & (y0 != y1)
                with np.errstate(divide="ignore", invalid="ignore"):
                    x = np.where(interp, jc - 1 + (y0 - lv) / (y0 - y1), jc.astype(np.float64))
                got = r[has]
                out[got, p] = ip[got] + x[has]
                start[got] = np.floor(x[has]).astype(np.int64)
                cur[got] += 1
        c_lo = c_hi
    # Beats worked on their own: at the ends of the samples given, or repolarising for longer
    # than the gathered stretch (from where the gathered search stopped).
    for b in np.flatnonzero(~inside):
        out[b] = first_crossings_one(v, w_rep, int(ip[b]), int(limit[b]), list(levels[b]))
    for b in np.flatnonzero(inside & (cur < n_lv) & (limit - ip > cap)):
        p = int(cur[b])
        out[b, p:] = first_crossings_one(v, w_rep, int(ip[b] + start[b]), int(limit[b]), list(levels[b, p:]))
    return out


def refine_crossing_one(v: np.ndarray, fs_hz: float, x0: float, level: float, amp: float, lo: int, hi: int) -> float:
    """:func:`refine_crossings` for one crossing."""
    if math.isnan(x0) or not math.isfinite(amp) or amp <= 0:
        return x0
    w_min, w_max, w = _widths(fs_hz)
    xc = x0
    sums = None  # running sums over the windows near xc, rebuilt when a window leaves them
    for _ in range(8):
        a, b = max(lo, int(xc) - w), min(hi, int(xc) + w + 1)
        if b - a < 5:
            return x0
        if sums is None or not sums.covers(a, b):
            ra, rb = max(lo, int(xc) - 3 * w), min(hi, int(xc) + 3 * w + 2)
            sums = RunningSums(v[ra:rb], ra, level)
        c0, c1, c2 = sums.fit(a, b, a - xc)
        slope = c1  # mV per sample at the centre
        disc = c1 * c1 - 4 * c2 * (c0 - level)
        if slope >= 0 or disc < 0:
            # Noise or hum outweighs a slow repolarisation over this window: widen it.
            if w >= w_max:
                return x0
            w = min(2 * w, w_max)
            continue
        # Roots of c2 u^2 + c1 u + (c0 - level) = 0; keep the one nearest the centre.
        if abs(c2) < 1e-12:
            root = (level - c0) / c1
        else:
            r1 = (-c1 - math.sqrt(disc)) / (2 * c2)
            r2 = (-c1 + math.sqrt(disc)) / (2 * c2)
            root = r1 if abs(r1) < abs(r2) else r2
        # A root beyond the window: move towards it and fit again.
        x_new = xc + min(max(root, -w), w)
        w_new = int(round(min(max(0.25 * 0.1 * amp / -slope, w_min), w_max)))
        settled = abs(w_new - w) <= 0.25 * w
        if abs(x_new - xc) < 0.25 and settled:
            return float(x_new)
        xc = x_new
        if not settled:
            w = w_new
    return float(xc) if abs(xc - x0) < w_max else x0


def _widths(fs_hz: float) -> tuple[int, int, int]:
    """Smallest, largest and first half-width of the local fit (0.5, 50 and 5 ms)."""
    w_min = max(3, int(round(0.5e-3 * fs_hz)))
    w_max = max(w_min, int(round(50e-3 * fs_hz)))
    return w_min, w_max, max(w_min, int(round(5e-3 * fs_hz)))


def refine_crossings(v: np.ndarray, fs_hz: float, x0: np.ndarray, level: np.ndarray, amp: np.ndarray,
                     lo: np.ndarray, hi: np.ndarray) -> np.ndarray:
    """Crossings ``x0`` of ``level`` refined on local quadratic fits, all at once (flat arrays).

    The same steps as :func:`refine_crossing_one`, taken by every crossing together: each round
    fits a quadratic to the raw samples of each window, then widens, moves or settles it.
    """
    x0 = np.asarray(x0, dtype=np.float64)
    out = x0.copy()
    ok = np.isfinite(x0) & np.isfinite(amp) & (amp > 0)
    w_min, w_max, w_first = _widths(fs_hz)
    act = np.flatnonzero(ok)
    xc = x0[act].copy()
    w = np.full(act.size, w_first, np.int64)
    for _ in range(8):
        if act.size == 0:
            break
        lv, am = level[act], amp[act]
        base = np.floor(xc).astype(np.int64)
        a = np.maximum(lo[act], base - w)
        b = np.minimum(hi[act], base + w + 1)
        short = b - a < 5
        out[act[short]] = x0[act[short]]
        if short.all():
            act = act[:0]
            break
        sums = _window_sums(v, a, np.maximum(b - a, 1), lv)
        c0, c1, c2 = _quadratic_from_sums((b - a).astype(np.float64), *sums, (a - xc))
        # c0 is relative to the level already: the roots of c2 u^2 + c1 u + c0 = 0
        disc = c1 * c1 - 4.0 * c2 * c0
        bad = ~short & ((c1 >= 0) | (disc < 0))
        give_up = bad & (w >= w_max)
        out[act[give_up]] = x0[act[give_up]]
        widen = bad & ~give_up
        good = ~short & ~bad
        with np.errstate(divide="ignore", invalid="ignore"):
            sq = np.sqrt(np.where(good, disc, 0.0))
            r1 = (-c1 - sq) / (2.0 * c2)
            r2 = (-c1 + sq) / (2.0 * c2)
            root = np.where(np.abs(c2) < 1e-12, -c0 / c1, np.where(np.abs(r1) < np.abs(r2), r1, r2))
            x_new = xc + np.clip(root, -w, w)
            w_new = np.rint(np.clip(0.25 * 0.1 * am / -c1, w_min, w_max)).astype(np.int64)
        settled = np.abs(w_new - w) <= 0.25 * w
        done = good & (np.abs(x_new - xc) < 0.25) & settled
        out[act[done]] = x_new[done]
        xc = np.where(good, x_new, xc)
        w = np.where(widen, np.minimum(2 * w, w_max), np.where(good & ~settled, w_new, w))
        keep = (widen | (good & ~done))
        act, xc, w = act[keep], xc[keep], w[keep]
    # Rounds used up: the last centre, unless it wandered off.
    if act.size:
        out[act] = np.where(np.abs(xc - x0[act]) < w_max, xc, x0[act])
    return out


def _window_sums(v: np.ndarray, a: np.ndarray, length: np.ndarray, ref: np.ndarray):
    """Sums of ``y``, ``j y`` and ``j^2 y`` over ``v[a:a + length] - ref`` for each window.

    Windows are gathered in groups of similar length (sorted, 64 at a time), so that one long
    window does not make every row of the gathered array long.
    """
    k = a.size
    out = np.zeros((3, k))
    order = np.argsort(length, kind="stable")
    n = v.size
    for g0 in range(0, k, 64):
        rows = order[g0:g0 + 64]
        width = int(length[rows].max())
        j = np.arange(width, dtype=np.float64)
        idx = np.minimum(a[rows, None] + np.arange(width)[None, :], n - 1)
        y = np.where(j[None, :] < length[rows, None], v[idx] - ref[rows, None], 0.0)
        out[0, rows] = y.sum(axis=1)
        y *= j
        out[1, rows] = y.sum(axis=1)
        y *= j
        out[2, rows] = y.sum(axis=1)
    return out[0], out[1], out[2]


def _quadratic_from_sums(n, sy, sjy, sj2y, u0):
    """:func:`analysis.signal.quadratic_from_sums` for arrays of windows (Cramer's rule)."""
    m1 = n * (n - 1) / 2.0
    m2 = (n - 1) * n * (2 * n - 1) / 6.0
    m3 = m1 * m1
    m4 = (n - 1) * n * (2 * n - 1) * (3 * (n - 1) ** 2 + 3 * (n - 1) - 1) / 30.0
    g = np.array([[n, m1, m2], [m1, m2, m3], [m2, m3, m4]])  # (3, 3, k)
    r = np.array([sy, sjy, sj2y])

    def det3(mm):
        return (mm[0][0] * (mm[1][1] * mm[2][2] - mm[1][2] * mm[2][1])
                - mm[0][1] * (mm[1][0] * mm[2][2] - mm[1][2] * mm[2][0])
                + mm[0][2] * (mm[1][0] * mm[2][1] - mm[1][1] * mm[2][0]))

    d = det3(g)
    sol = []
    for k in range(3):
        mk = g.copy()
        mk[:, k] = r
        with np.errstate(divide="ignore", invalid="ignore"):
            sol.append(det3(mk) / d)
    b0, b1, b2 = sol
    return b0 - b1 * u0 + b2 * u0 * u0, b1 - 2 * b2 * u0, b2
