"""The true value of every per-beat parameter of a synthetic train, by MEASUREMENTS.md's definitions.

The truth is computed on the exact waveform and its exact derivative (:class:`BeatTrain.evaluate`),
never on samples: a dense grid brackets each marker and a bisection or golden-section search on the
closed-form function pins it to well below a microsecond. Beats are handled together as arrays.
"""

from __future__ import annotations

from typing import Callable

import numpy as np

from analysis.synthetic._model import TOP_CRITERION_MV_PER_S, BeatTrain
from analysis.table import BeatTable

__all__ = ["beat_truth", "TRUTH_GRID_POINTS"]

#: Points of the dense grid that brackets each marker before it is refined.
TRUTH_GRID_POINTS = 1001
#: Points of the grid that the least-squares DDR is fitted on.
FIT_GRID_POINTS = 4001
_BATCH = 256
_GOLDEN = (np.sqrt(5.0) - 1.0) / 2.0


def _bisect(f: Callable[[np.ndarray], np.ndarray], lo: np.ndarray, hi: np.ndarray, n_iter: int = 60) -> np.ndarray:
    """Roots of f between lo and hi, where sign(f(lo)) != sign(f(hi)), for many brackets at once."""
    lo, hi = lo.astype(float).copy(), hi.astype(float).copy()
    f_lo = f(lo)
    for _ in range(n_iter):
        mid = 0.5 * (lo + hi)
        f_mid = f(mid)
        same = np.sign(f_mid) == np.sign(f_lo)
        lo = np.where(same, mid, lo)
        f_lo = np.where(same, f_mid, f_lo)
        hi = np.where(same, hi, mid)
    return 0.5 * (lo + hi)


def _golden_max(f: Callable[[np.ndarray], np.ndarray], lo: np.ndarray, hi: np.ndarray, n_iter: int = 70) -> np.ndarray:
    """Where f is largest in each [lo, hi] (f unimodal there), for many intervals at once."""
    a, b = lo.astype(float).copy(), hi.astype(float).copy()
    c = b - _GOLDEN * (b - a)
    d = a + _GOLDEN * (b - a)
    fc, fd = f(c), f(d)
    for _ in range(n_iter):
        left = fc > fd
        b = np.where(left, d, b)
        a = np.where(left, a, c)
        c_new = b - _GOLDEN * (b - a)
        d_new = a + _GOLDEN * (b - a)
        c, d = np.where(left, c_new, d), np.where(left, c, d_new)
        f_new = f(np.where(left, c, d))
        fc, fd = np.where(left, f_new, fd), np.where(left, fc, f_new)
    return 0.5 * (a + b)


def _grid(lo: np.ndarray, hi: np.ndarray, n: int = TRUTH_GRID_POINTS) -> np.ndarray:
    return lo[:, None] + (hi - lo)[:, None] * np.linspace(0.0, 1.0, n)[None, :]


def _batched(fn: Callable[..., np.ndarray], *arrays: np.ndarray) -> np.ndarray:
    """Apply fn to the per-beat arrays in batches of beats, to keep the dense grids small."""
    n = len(arrays[0])
    out = [fn(*(a[i:i + _BATCH] for a in arrays)) for i in range(0, n, _BATCH)]
    return np.concatenate(out) if out else np.zeros(0)


def beat_truth(
    train: BeatTrain,
    *,
    start_s: float,
    stop_s: float,
    sweep: int = 0,
    top_criterion_V_per_s: float = TOP_CRITERION_MV_PER_S / 1000.0,
    apd_percent: tuple[int, ...] = (20, 50, 90),
) -> BeatTable:
    """The true parameters of every beat whose upstroke falls in one sweep ``[start_s, stop_s)``.

    Parameters
    ----------
    train : BeatTrain
        The solved waveform.
    start_s, stop_s : float
        The sweep's span on the train's clock; reported times are from ``start_s``.
    sweep : int
        Sweep number written into the table.
    top_criterion_V_per_s : float
        The take-off criterion (MEASUREMENTS.md default 0.5 V/s).
    apd_percent : tuple of int
        Repolarisation levels to report (``apd{x}_ms`` and ``t_apd{x}_s`` columns).

    Returns
    -------
    BeatTable
        The beats CSV's measured columns with their marker times (``t_mdp_s``, ``t_top_s``,
        ``t_peak_s``, ``t_apd{x}_s``), ``flags`` (``no_diastole`` for a first beat without a recorded diastole,
        ``truncated`` when the sweep ends before 90 % repolarisation) and ``train_beat`` (the
        beat's index in the train). Undefined values are NaN, as in the analysis.
    """
    def v_at(t):
        return train.evaluate(t, derivative=False)[0]

    def dv_at(t):
        return train.evaluate(t)[1]

    k = np.flatnonzero((train.t_up_s >= start_s) & (train.t_up_s < stop_s))
    n = len(k)
    # The time of dV/dt max: exact by construction for the cell, refined for drift and shunts.
    lo = train.t_up_s[k] - 0.5 * train.w_s[k]
    hi = train.t_up_s[k] + 0.5 * np.minimum(train.l_s[k], train.w_s[k] * 4)
    t_up = _golden_max(dv_at, lo, hi)
    dvdt_max = dv_at(t_up) / 1000.0

    # Peak: the largest V from the upstroke to the start of the next diastole.
    def peak_search(lo_b, hi_b):
        g = _grid(lo_b, hi_b)
        i = np.argmax(v_at(g), axis=1)
        rows = np.arange(len(lo_b))
        left = g[rows, np.maximum(i - 1, 0)]
        right = g[rows, np.minimum(i + 1, g.shape[1] - 1)]
        return _golden_max(v_at, left, right)

    t_end_ap = train.t_mdp_s[k + 1]
    t_peak = _batched(peak_search, t_up, t_end_ap)
    peak = v_at(t_peak)

    # MDP: the lowest V between the previous beat's peak and this upstroke.
    # The first beat of a sweep has one when the sweep recorded the previous repolarisation
    # falling at least 2 mV into a minimum 20 ms or more after its start (MEASUREMENTS.md: the
    # first beat is measured from the diastole recorded before it when there is enough of it).
    first = np.zeros(n, bool)
    if n:
        t_min = train.t_mdp_s[k[0]]
        whole = t_min - start_s >= 0.02 and float(v_at(np.array([start_s]))[0] - v_at(np.array([t_min]))[0]) >= 2.0
        first[0] = not whole
    prev_peak = np.where(first, np.nan, np.concatenate([[start_s], t_peak[:-1]]))

    def mdp_search(lo_b, hi_b):
        g = _grid(lo_b, hi_b)
        i = np.argmin(v_at(g), axis=1)
        rows = np.arange(len(lo_b))
        left = g[rows, np.maximum(i - 1, 0)]
        right = g[rows, np.minimum(i + 1, g.shape[1] - 1)]
        return _golden_max(lambda t: -v_at(t), left, right)

    has_prev = ~first
    t_mdp = np.full(n, np.nan)
    t_mdp[has_prev] = _batched(mdp_search, prev_peak[has_prev], t_up[has_prev])
    mdp = np.full(n, np.nan)
    mdp[has_prev] = v_at(t_mdp[has_prev])

    # TOP: the last upward crossing of the criterion between the MDP and the upstroke.
    crit = top_criterion_V_per_s * 1000.0

    def top_search(lo_b, hi_b):
        g = _grid(lo_b, hi_b)
        below = dv_at(g) < crit
        rows = np.arange(len(lo_b))
        last_below = g.shape[1] - 1 - np.argmax(below[:, ::-1], axis=1)
        ok = below.any(axis=1) & (last_below < g.shape[1] - 1)
        i = np.clip(last_below, 0, g.shape[1] - 2)
        root = _bisect(lambda t: dv_at(t) - crit, g[rows, i], g[rows, i + 1])
        return np.where(ok, root, np.nan)

    t_top = np.full(n, np.nan)
    t_top[has_prev] = _batched(top_search, t_mdp[has_prev], t_up[has_prev])
    top = np.full(n, np.nan)
    okt = np.isfinite(t_top)
    top[okt] = v_at(t_top[okt])

    # DDR: least-squares slope of V over [t_MDP, t_TOP]; DDR100 over the first 100 ms.
    def slope(lo_b, hi_b):
        g = _grid(lo_b, hi_b, FIT_GRID_POINTS)
        v = v_at(g)
        gc = g - g.mean(axis=1, keepdims=True)
        return (gc * (v - v.mean(axis=1, keepdims=True))).sum(axis=1) / (gc * gc).sum(axis=1)

    ddr = np.full(n, np.nan)
    ddr[okt] = _batched(slope, t_mdp[okt], t_top[okt])
    ok100 = okt & (t_top >= t_mdp + 0.1)
    ddr100 = np.full(n, np.nan)
    ddr100[ok100] = _batched(slope, t_mdp[ok100], t_mdp[ok100] + 0.1)
    apa = peak - mdp

    # APDx: from the upstroke to the first time after the peak that V is at or below the level.
    next_up = np.where(k + 1 < train.n, train.t_up_s[np.minimum(k + 1, train.n - 1)], train.t_mdp_s[-1])
    columns: dict[str, np.ndarray] = {}
    truncated = np.zeros(n, bool)
    for x in apd_percent:
        level = peak - x / 100.0 * apa

        def apd_search(lo_b, hi_b, lev):
            g = _grid(lo_b, hi_b)
            at_or_below = v_at(g) <= lev[:, None]
            rows = np.arange(len(lo_b))
            i = np.argmax(at_or_below, axis=1)
            ok = at_or_below.any(axis=1) & (i > 0)
            i = np.maximum(i, 1)
            root = _bisect(lambda t: v_at(t) - lev, g[rows, i - 1], g[rows, i])
            return np.where(ok, root, np.nan)

        sel = np.isfinite(level)
        t_x = np.full(n, np.nan)
        t_x[sel] = _batched(apd_search, t_peak[sel], next_up[sel], level[sel])
        cut = t_x >= stop_s
        if x == max(apd_percent):
            truncated |= cut | (sel & ~np.isfinite(t_x))
        t_x[cut] = np.nan
        columns[f"apd{x}_ms"] = (t_x - t_up) * 1000.0
        columns[f"t_apd{x}_s"] = t_x - start_s

    peak_cut = t_peak >= stop_s
    truncated |= peak_cut
    peak[peak_cut] = np.nan
    cl = np.full(n, np.nan)
    cl[1:] = np.diff(t_up) * 1000.0
    flags = np.array(
        [";".join(f for f, on in (("no_diastole", a), ("truncated", b)) if on) for a, b in zip(first, truncated)],
        dtype=object,
    )
    with np.errstate(divide="ignore", invalid="ignore"):
        rate = 60000.0 / cl
    table = {
        "sweep": np.full(n, sweep),
        "beat": np.arange(n),
        "t_upstroke_s": t_up - start_s,
        "flags": flags,
        "cl_ms": cl,
        "rate_bpm": rate,
        "mdp_mV": mdp,
        "top_mV": top,
        "ddr_mV_per_s": ddr,
        "ddr100_mV_per_s": ddr100,
        "dvdt_max_V_per_s": dvdt_max,
        "peak_mV": peak,
        "apa_mV": apa,
    }
    table.update({name: columns[name] for name in sorted(columns) if name.startswith("apd")})
    table.update(
        {
            "t_mdp_s": t_mdp - start_s,
            "t_top_s": t_top - start_s,
            "t_peak_s": np.where(peak_cut, np.nan, t_peak - start_s),
        }
    )
    table.update({name: columns[name] for name in sorted(columns) if name.startswith("t_apd")})
    table["train_beat"] = k
    return BeatTable(table)
