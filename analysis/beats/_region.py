"""One region of a sweep: smoothing, adaptive hysteresis levels and the candidates' checks.

Steps 1 to 4 of the method in :mod:`analysis.beats._detect`, on the samples of one chunk with its
context; the caller keeps the candidates whose rising crossing lies in the chunk's core.
"""

from __future__ import annotations

import math

import numpy as np

from analysis.settings import DetectionSettings

__all__ = ["box_slope_noise", "detect_region"]


def box_slope_noise(noise_mV: float, fs_hz: float, h: int) -> float:
    # Difference of two means of h samples whose centres are h samples apart.
    return noise_mV * math.sqrt(2.0 / h) / (h / fs_hz) / 1000.0


def _cumsum0(x: np.ndarray) -> np.ndarray:
    c = np.empty(x.size + 1)
    c[0] = 0.0
    np.cumsum(x - x[0], out=c[1:])
    return c


def _box_slope(x: np.ndarray, h: int, fs_hz: float, c: np.ndarray | None = None) -> np.ndarray:
    """Smoothed dV/dt (V/s for mV): mean of the next h samples minus mean of the previous h, / h dt.

    ``c`` is the running sum of ``x - x[0]`` with a leading 0 when the caller has it.
    """
    n = x.size
    if c is None:
        c = _cumsum0(x)
    out = np.zeros(n)
    if n > 2 * h + 1:
        # i from h to n-h-2: left = mean x[i-h:i], right = mean x[i+1:i+h+1]; their difference
        # from the sums directly (the h's cancel into one scale)
        i0, i1 = h, n - h - 1
        out[i0:i1] = ((c[i0 + h + 1:i1 + h + 1] - c[i0 + 1:i1 + 1]) - (c[i0:i1] - c[0:i1 - h])) * (
            fs_hz / 1000.0 / (h * (h + 1)))
        out[:i0] = out[i0]
        out[i1:] = out[i1 - 1]
    return out


def _mean_from_sums(x: np.ndarray, m: int, c: np.ndarray) -> np.ndarray:
    """:func:`analysis.signal.moving_mean` of ``x`` over ``m`` (odd) samples from its running sum ``c``."""
    if m <= 1 or x.size == 0:
        return x
    n = x.size
    h = m // 2
    out = np.empty(n)
    if n > 2 * h:
        out[h:n - h] = (c[m:] - c[:n + 1 - m]) * (1.0 / m)
    edge = np.r_[0:min(h, n), max(h, n - h):n]
    a = np.clip(edge - h, 0, n)
    b = np.clip(edge + h + 1, 0, n)
    out[edge] = (c[b] - c[a]) / (b - a)
    return out + x[0]


def _ramps(offset: int, size: int, centres: list[float], values: list[float]) -> np.ndarray:
    """``np.interp`` of ``values`` at ``centres`` over the samples ``offset .. offset + size - 1``,
    one straight line per interval between centres (flat beyond the ends)."""
    out = np.empty(size)
    x0 = offset
    cs = np.asarray(centres, dtype=np.float64)
    vs = np.asarray(values, dtype=np.float64)
    # Sample boundaries of the intervals between centres.
    cut = np.clip(np.ceil(cs - x0).astype(np.int64), 0, size)
    out[:cut[0]] = vs[0]
    out[cut[-1]:] = vs[-1]
    for k in range(cs.size - 1):
        a, b = cut[k], cut[k + 1]
        if b > a:
            t = (np.arange(a, b, dtype=np.float64) + (x0 - cs[k])) * ((vs[k + 1] - vs[k]) / (cs[k + 1] - cs[k]))
            out[a:b] = t + vs[k]
    return out


def _levels(vs: np.ndarray, offset: int, lo: int, hi: int, block: int, n_total: int, s: DetectionSettings):
    """Per-sample low and high hysteresis levels of the region ``[lo, hi)`` (global indices)."""
    edges = list(range(lo - lo % block, hi, block)) + [hi]
    edges[0] = lo
    # A short last block of the sweep joins the one before it.
    if len(edges) > 2 and hi == n_total and edges[-1] - edges[-2] < block // 2:
        del edges[-2]
    stride = max(1, block // 8192)
    pairs = list(zip(edges[:-1], edges[1:]))
    p1 = np.empty(len(pairs))
    p99 = np.empty(len(pairs))
    # The whole blocks as the rows of one strided view, their percentiles in one call (the same
    # numbers as block by block: numpy works each row alike); a partial first or last block alone.
    whole = [k for k, (a, b) in enumerate(pairs) if b - a == block]
    if len(whole) > 1 and whole == list(range(whole[0], whole[-1] + 1)):
        a0 = pairs[whole[0]][0] - offset
        rows = vs[a0:a0 + len(whole) * block].reshape(len(whole), block)[:, ::stride]
        q = np.percentile(rows, [1.0, 99.0], axis=1)
        p1[whole], p99[whole] = q[0], q[1]
        rest = [k for k in range(len(pairs)) if not whole[0] <= k <= whole[-1]]
    else:
        rest = list(range(len(pairs)))
    for k in rest:
        a, b = pairs[k]
        p1[k], p99[k] = np.percentile(vs[a - offset:b - offset:stride], [1.0, 99.0])
    span = np.maximum(p99 - p1, s.min_amplitude_mV)
    centres = [0.5 * (a + b) for a, b in pairs]
    low = list(p1 + s.low_fraction * span)
    high = list(p1 + s.high_fraction * span)
    return _ramps(offset, vs.size, centres, low), _ramps(offset, vs.size, centres, high)


def detect_region(v, offset, fs_hz, s, threshold, *, levels_from, block, n_total, core):
    m = max(1, int(round(s.smoothing_ms * 1e-3 * fs_hz))) | 1
    c = _cumsum0(v)  # one running sum for the smoothing and the smoothed dV/dt
    vs = _mean_from_sums(v, m, c)
    h_der = max(1, int(round(s.derivative_window_ms * 1e-3 * fs_hz / 2)))
    dvs = _box_slope(v, h_der, fs_hz, c)
    lo_lvl, hi_lvl = _levels(vs, offset, levels_from[0], levels_from[1], block, n_total, s)
    state = np.zeros(vs.size, np.int8)
    state[vs < lo_lvl] = -1
    state[vs > hi_lvl] = 1
    nz = np.flatnonzero(state)
    empty = np.empty(0, np.int64)
    if nz.size < 2:
        return empty, empty, empty, []
    st = state[nz]
    change = np.flatnonzero(st[1:] != st[:-1]) + 1
    rises = change[st[change] == 1]
    falls_all = nz[change[st[change] == -1]]
    width_min = s.min_width_ms * 1e-3 * fs_hz
    ups, peaks, arts, reasons = [], [], [], []
    # (arm, cross, in_core): a candidate belongs to the chunk whose core holds its first crossing.
    queue = [(int(nz[j - 1]), int(nz[j]), core[0] <= int(nz[j]) + offset < core[1], False) for j in rises]
    qi = 0
    while qi < len(queue):
        arm, cross, in_core, after_spike = queue[qi]
        qi += 1
        if not in_core:
            continue
        k = np.searchsorted(falls_all, cross)
        end = int(falls_all[k]) if k < falls_all.size else vs.size
        ip = cross + int(np.argmax(vs[cross:end]))
        base = float(np.min(vs[arm:cross + 1]))
        amp = float(vs[ip]) - base
        iu = arm + int(np.argmax(dvs[arm:ip + 1]))
        half = base + 0.5 * amp
        left = np.flatnonzero(vs[arm:ip + 1] < half)
        t_left = arm + int(left[-1]) if left.size else arm
        right = np.flatnonzero(vs[ip:end] < half)
        t_right = ip + int(right[0]) if right.size else end
        # Still above half amplitude where the sweep ends: an upstroke the sweep cuts off, whose
        # width cannot be judged (a beat; the measurement flags it truncated).
        cut_by_end = not right.size and offset + end >= n_total
        # The rise counts from the preceding minimum (the diastole since the previous fall below
        # the low level), not from the low level's crossing: a slow diastolic depolarisation
        # from a low MDP is a beat even when the adaptive levels sit high (common practice: a
        # beat's amplitude is peak minus the MDP before it).
        # A second look after a narrow artefact starts where the artefact ended.
        since = arm if after_spike else (int(falls_all[k - 1]) if k > 0 else 0)
        rise = float(vs[ip]) - float(np.min(vs[since:cross + 1]))
        if max(amp, rise) < s.min_amplitude_mV:
            continue  # a sub-threshold depolarisation (or noise), not a beat and not an artefact
        if t_right - t_left < width_min and not cut_by_end:
            arts.append(iu + offset)
            reasons.append("narrow")
            # A spike may hide a real upstroke later in the same event: look again after it.
            above = np.flatnonzero(vs[t_right:end] > hi_lvl[t_right:end])
            if above.size:
                queue.append((t_right, t_right + int(above[0]), True, True))
            continue
        if dvs[iu] < threshold:
            arts.append(iu + offset)
            reasons.append("slow")
            continue
        ups.append(iu + offset)
        peaks.append(ip + offset)
    return (np.asarray(ups, np.int64), np.asarray(peaks, np.int64), np.asarray(arts, np.int64), reasons)
