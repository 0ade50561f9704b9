"""Beat detection in one sweep: where the action potentials' upstrokes are.

The method (common practice, no source) is a hysteresis (Schmitt-trigger) detector on a lightly
smoothed membrane potential with adaptive levels, followed by checks of each candidate:

1. ``vs`` = V smoothed by a moving average of ``smoothing_ms`` (electrical spikes a few samples
   long shrink by the ratio of their width to the window), and ``dvs`` = the difference of two
   adjacent moving averages of ``derivative_window_ms / 2`` each (a smoothed dV/dt whose noise is
   low enough to see a 2 V/s nodal upstroke under 1 mV rms of noise).
2. The diastolic level (1st percentile of ``vs``) and the peak level (99th percentile) are
   estimated in blocks of ``level_window_s`` aligned to the sweep's start, and interpolated
   between block centres, so the levels follow slow drift. A block without beats has a span below
   ``min_amplitude_mV``; its levels are then set as if the span were ``min_amplitude_mV``, so noise
   and sub-threshold depolarisations (DADs) cannot reach them.
3. An upstroke candidate is a rise of ``vs`` from below ``diastole + low_fraction x span`` to
   above ``diastole + high_fraction x span`` (vectorised: the state of every sample is
   forward-filled and rising transitions are read off).
4. Each candidate (a loop over beats, never over samples) must rise at least
   ``min_amplitude_mV``, have a smoothed dV/dt above ``max(min_dvdt_V_per_s, noise_factor x the
   derivative's noise)``, and be at least ``min_width_ms`` wide at half its amplitude; narrower
   events are electrical artefacts. Upstrokes closer than ``min_interval_ms`` to the previous
   accepted one are artefacts too.

Electrical spikes a few samples long (at most ``spike_max_ms``) are found by :func:`find_spikes`
on the full-rate samples and bridged (:func:`bridge_spans`) before anything else is done, and
each is reported as an artefact (reason ``spike``): on a beat's repolarisation a spike would
otherwise be the event's highest point and make the beat look narrow, and in diastole it would
be a candidate of its own. The measurement bridges the same spans before it looks for any
extreme or crossing.

An event still above its half amplitude where the sweep ends is an upstroke the sweep cuts off:
its width cannot be judged, so it is a beat (the measurement flags it ``truncated``), never a
``narrow`` artefact that would leave the beat before it without a next beat.

Long sweeps are worked in chunks of ``chunk_s`` with ``chunk_overlap_s`` of context on each side;
chunk and block boundaries are aligned so that every sample sees the same levels whatever the
chunk size, and a candidate belongs to the chunk in whose core its rising crossing lies, so a beat
on a chunk edge is counted once.
"""

from __future__ import annotations

import dataclasses
import math
from dataclasses import dataclass, field
from typing import Callable

import numpy as np

from analysis.chunkpool import run_ordered
from analysis.settings import DetectionSettings
from analysis.signal import noise_rms_mV

__all__ = [
    "Detection", "detect_beats", "detect_sweep", "estimate_noise_mV", "find_spikes", "bridge_spans",
    "ARTEFACT_REASONS",
]

#: Why a candidate was not taken as a beat.
ARTEFACT_REASONS = {
    "narrow": "narrower than min_width_ms at half amplitude (an electrical spike)",
    "slow": "smoothed dV/dt below the detection threshold",
    "too_close": "closer than min_interval_ms to the previous upstroke",
    "spike": "a short electrical spike (at most spike_max_ms), bridged before detection",
}


@dataclass(frozen=True)
class Detection:
    """Beats found in one sweep.

    Attributes
    ----------
    i_upstroke : ndarray of int64
        Sample index of each beat's steepest smoothed rise (refined later by the measurement).
    i_peak : ndarray of int64
        Sample index of the highest smoothed V of each beat's upstroke event.
    i_artefact : ndarray of int64
        Sample index of each rejected candidate.
    artefact_reason : ndarray of str
        The reason (a key of :data:`ARTEFACT_REASONS`) for each rejected candidate.
    threshold_V_per_s : float
        The smoothed-dV/dt threshold used.
    noise_mV : float
        The white-noise rms the threshold was scaled to.
    spike_spans : ndarray of int64, shape (k, 2)
        The ``(start, stop)`` spans of the short electrical spikes bridged before detection
        (guards included, overlaps merged), for the measurement and the events to bridge too.
    """

    i_upstroke: np.ndarray
    i_peak: np.ndarray
    i_artefact: np.ndarray = field(default_factory=lambda: np.empty(0, np.int64))
    artefact_reason: np.ndarray = field(default_factory=lambda: np.empty(0, object))
    threshold_V_per_s: float = math.nan
    noise_mV: float = math.nan
    spike_spans: np.ndarray = field(default_factory=lambda: np.empty((0, 2), np.int64))

    def __len__(self) -> int:
        return len(self.i_upstroke)


def estimate_noise_mV(load: Callable[[int, int], np.ndarray], n: int, *, pieces: int = 16, piece: int = 4096) -> float:
    """White-noise rms of a sweep from evenly spaced pieces (independent of any chunking)."""
    if n <= pieces * piece:
        return noise_rms_mV(load(0, n))
    starts = np.linspace(0, n - piece, pieces).astype(np.int64)
    return float(np.median([noise_rms_mV(load(int(a), int(a) + piece)) for a in starts]))


def find_spikes(
    v_mV: np.ndarray, fs_hz: float, *, noise_mV: float, settings: DetectionSettings | None = None,
) -> np.ndarray:
    """Spans of short electrical spikes, guard samples included, as ``(start, stop)`` rows.

    A spike is a run of at most ``spike_max_ms`` of samples that the trace enters by a step of at
    least half the spike threshold in one sample, and leaves to come back within half the
    threshold of where it was, having stood out by at least the threshold (``spike_min_mV`` or 10
    x the noise, whichever is larger) from both sides; upward and downward alike. No action
    potential does that: its upstroke does not come back within a millisecond, and its peak,
    however sharp at a low sampling rate, is not followed by a return to the diastolic level.
    Each span is widened by ``spike_guard_ms`` (at least one sample) on each side and overlapping
    spans are merged. Vectorised over the candidate steps (a few per fast upstroke, none in a
    slow or clean trace).

    Parameters
    ----------
    v_mV : ndarray
        Full-rate samples (mV).
    fs_hz : float
    noise_mV : float
        White-noise rms of the trace.
    settings : DetectionSettings or None

    Returns
    -------
    ndarray of int64, shape (k, 2)
        Half-open spans ``[start, stop)`` of indices into ``v_mV``, sorted, not overlapping.

    Examples
    --------
    >>> import numpy as np
    >>> v = np.full(1000, -60.0)
    >>> v[500:503] += 40.0
    >>> find_spikes(v, 10_000.0, noise_mV=0.0).tolist()
    [[498, 505]]
    """
    s = settings or DetectionSettings()
    v = np.asarray(v_mV, dtype=np.float64)
    w = int(round(s.spike_max_ms * 1e-3 * fs_hz))
    empty = np.empty((0, 2), np.int64)
    if w < 1 or v.size < 3:
        return empty
    thr = max(s.spike_min_mV, 10.0 * float(noise_mV))
    d = np.diff(v)
    steps = _big_steps(d, 0.5 * thr)  # v[e] is the level before, v[e + 1] the first spike sample
    spans = []
    for sign in (1.0, -1.0):
        e = steps[sign * d[steps] > 0]
        if e.size == 0:
            continue
        offs = np.arange(1, w + 2)
        idx = np.minimum(e[:, None] + offs, v.size - 1)
        rel = sign * (v[idx] - v[e][:, None])
        back = np.abs(rel) < 0.5 * thr
        back[:, 0] = False
        back &= (e[:, None] + offs) < v.size  # a return must lie in the trace
        ok = back.any(axis=1)
        r = np.argmax(back, axis=1)  # first sample back: the spike is rel[:, :r]
        inside = offs[None, :] - 1 < r[:, None]
        top = np.where(inside, rel, -np.inf).max(axis=1)
        after = rel[np.arange(e.size), r]
        ok &= top - np.maximum(after, 0.0) >= thr
        ok &= top >= thr
        if ok.any():
            spans.append(np.column_stack((e[ok] + 1, e[ok] + 1 + r[ok])))
    if not spans:
        return empty
    g = max(1, int(round(s.spike_guard_ms * 1e-3 * fs_hz)))
    sp = np.concatenate(spans)
    sp = sp[np.argsort(sp[:, 0], kind="stable")]
    sp[:, 0] = np.maximum(sp[:, 0] - g, 1)
    sp[:, 1] = np.minimum(sp[:, 1] + g, v.size - 1)
    # Merge overlapping spans.
    starts, stops = [int(sp[0, 0])], [int(sp[0, 1])]
    for a, b in sp[1:]:
        if a <= stops[-1]:
            stops[-1] = max(stops[-1], int(b))
        else:
            starts.append(int(a))
            stops.append(int(b))
    out = np.column_stack((starts, stops)).astype(np.int64)
    return out[out[:, 1] > out[:, 0]]


def _big_steps(d: np.ndarray, limit: float, block: int = 1024) -> np.ndarray:
    """Indices where ``|d| >= limit``, looked for only in the blocks whose largest step reaches it
    (most blocks of a trace hold none: two passes instead of four)."""
    nb = d.size // block
    parts = []
    if nb:
        rows = d[:nb * block].reshape(nb, block)
        hot = np.flatnonzero((rows.max(axis=1) >= limit) | (rows.min(axis=1) <= -limit))
        parts = [np.flatnonzero(np.abs(rows[r]) >= limit) + r * block for r in hot]
    tail = d[nb * block:]
    if tail.size:
        parts.append(np.flatnonzero(np.abs(tail) >= limit) + nb * block)
    return np.concatenate(parts) if parts else np.empty(0, np.int64)


def bridge_spans(v_mV: np.ndarray, spans: np.ndarray) -> np.ndarray:
    """A copy of ``v_mV`` with each span replaced by the straight line between its neighbours.

    ``spans`` are ``[start, stop)`` rows with ``start >= 1`` and ``stop <= len - 1`` (as
    :func:`find_spikes` gives them): the line runs from ``v[start - 1]`` to ``v[stop]``. Bridging
    keeps every later step honest: no maximum, minimum, derivative or level crossing can land
    on a spike, and no smoothing window spreads it into its neighbours.
    """
    x = np.array(v_mV, dtype=np.float64, copy=True)
    for a, b in np.asarray(spans, dtype=np.int64).reshape(-1, 2):
        a, b = int(a), int(b)
        if b <= a:
            continue
        frac = np.arange(1, b - a + 1, dtype=np.float64) / (b - a + 1)
        x[a:b] = x[a - 1] + (x[b] - x[a - 1]) * frac
    return x


def detect_beats(
    v_mV: np.ndarray, fs_hz: float, *, settings: DetectionSettings | None = None, noise_mV: float | None = None,
) -> Detection:
    """Beats in one sweep of membrane potential held in memory.

    Parameters
    ----------
    v_mV : ndarray
        The sweep (after any LJP correction and filtering), in mV.
    fs_hz : float
        Sampling rate.
    settings : DetectionSettings or None
        None for the defaults.
    noise_mV : float or None
        White-noise rms of the sweep; None estimates it.

    Returns
    -------
    Detection

    Examples
    --------
    >>> import numpy as np
    >>> fs = 10_000.0
    >>> t = np.arange(int(3 * fs)) / fs
    >>> phase = (t % 0.5) / 0.5
    >>> v = -60 + 80 * np.exp(-((phase - 0.3) / 0.05) ** 2)
    >>> detect_beats(v, fs).i_upstroke.size
    6
    """
    v = np.asarray(v_mV, dtype=np.float64)
    return detect_sweep(lambda a, b: v[a:b], v.size, fs_hz, settings=settings, noise_mV=noise_mV)


def detect_sweep(
    load: Callable[[int, int], np.ndarray], n: int, fs_hz: float, *,
    settings: DetectionSettings | None = None, noise_mV: float | None = None, pad: int = 0,
    progress: Callable[[int, int], None] | None = None,
) -> Detection:
    """Beats in one sweep read in chunks through ``load(start, stop)``.

    Parameters
    ----------
    load : callable
        ``load(start, stop)`` returns the preprocessed samples ``[start, stop)`` in mV.
    n : int
        Samples in the sweep.
    fs_hz : float
    settings : DetectionSettings or None
    noise_mV : float or None
    pad : int
        Extra samples read on each side of a chunk's context (filter edges, smoothing).
    progress : callable or None
        ``progress(done, total)`` as the chunks are done (in the samples detection works on,
        which may be averaged: only the ratio means anything).
    """
    s = settings or DetectionSettings()
    if noise_mV is None:
        noise_mV = estimate_noise_mV(load, n)
    if s.spike_max_ms > 0:
        spans: list[tuple[int, int]] = []
        det = detect_sweep(
            _spike_free(load, fs_hz, noise_mV, s, spans), n, fs_hz,
            settings=dataclasses.replace(s, spike_max_ms=0.0), noise_mV=noise_mV, pad=pad, progress=progress,
        )
        return _with_spikes(det, spans)
    q = max(1, int(fs_hz // s.working_rate_hz))
    if q > 1:
        return _detect_decimated(load, n, fs_hz, q, s, noise_mV, pad, progress)
    block = max(16, int(round(s.level_window_s * fs_hz)))
    chunk = max(1, int(math.ceil(s.chunk_s * fs_hz / block))) * block
    overlap = max(1, int(math.ceil(s.chunk_overlap_s * fs_hz / block))) * block
    h_der = max(1, int(round(s.derivative_window_ms * 1e-3 * fs_hz / 2)))
    threshold = max(s.min_dvdt_V_per_s, s.noise_factor * _box_slope_noise(noise_mV, fs_hz, h_der))
    pad = pad + 4 * h_der + int(round(s.smoothing_ms * 1e-3 * fs_hz)) + 8

    # What the loader notes on the side (the spikes it bridged) is returned with each chunk's
    # beats, so that chunks worked in other processes (analysis.chunkpool) report it too.
    noted = getattr(load, "spans", None)

    def region(i: int):
        core_a = i * chunk
        core_b = min(n, core_a + chunk)
        lo = max(0, core_a - overlap)
        hi = min(n, core_b + overlap)
        ra, rb = max(0, lo - pad), min(n, hi + pad)
        before = len(noted) if noted is not None else 0
        v = np.asarray(load(ra, rb), dtype=np.float64)
        found = _detect_region(v, ra, fs_hz, s, threshold, levels_from=(lo, hi), block=block, n_total=n,
                               core=(core_a, core_b))
        side = []
        if noted is not None:
            side = noted[before:]
            del noted[before:]
        return found, side

    ups, peaks, arts, reasons = [], [], [], []
    def advanced(i: int, _result) -> None:
        if progress is not None:
            progress(min(n, (i + 1) * chunk), n)

    for (u, p, a, r), side in run_ordered(region, -(-n // chunk), advanced):
        ups.append(u)
        peaks.append(p)
        arts.append(a)
        reasons.extend(r)
        if noted is not None:
            noted.extend(side)
    up = np.concatenate(ups) if ups else np.empty(0, np.int64)
    pk = np.concatenate(peaks) if peaks else np.empty(0, np.int64)
    art = list(np.concatenate(arts)) if arts else []
    order = np.argsort(up, kind="stable")
    up, pk = up[order], pk[order]
    # Minimum interval, in time order over the whole sweep (so chunking cannot change it).
    min_gap = s.min_interval_ms * 1e-3 * fs_hz
    keep = np.ones(up.size, bool)
    last = -np.inf
    for k in range(up.size):
        if up[k] - last < min_gap:
            keep[k] = False
            art.append(int(up[k]))
            reasons.append("too_close")
        else:
            last = up[k]
    art_arr = np.asarray(art, dtype=np.int64)
    why = np.empty(len(reasons), dtype=object)
    why[:] = reasons
    o = np.argsort(art_arr, kind="stable")
    return Detection(up[keep], pk[keep], art_arr[o], why[o], float(threshold), float(noise_mV))


def _spike_free(load, fs_hz: float, noise_mV: float, s: DetectionSettings, spans: list):
    """``load`` with short electrical spikes bridged; the sweep spans bridged go to ``spans``.

    Regions read with context see the same spikes wherever they start (a spike is judged on a
    millisecond around it), so overlapping reads only repeat spans.
    """

    def load_clean(a: int, b: int) -> np.ndarray:
        x = np.asarray(load(a, b), dtype=np.float64)
        sp = find_spikes(x, fs_hz, noise_mV=noise_mV, settings=s)
        if not sp.size:
            return x
        spans.extend((int(p) + a, int(r) + a) for p, r in sp)
        return bridge_spans(x, sp)

    load_clean.spans = spans  # type: ignore[attr-defined]
    return load_clean


def _with_spikes(det: Detection, spans: list) -> Detection:
    """``det`` with each distinct spike span (overlaps merged) as a ``spike`` artefact at its middle."""
    if not spans:
        return det
    merged: list[list[int]] = []
    for a, b in sorted(set(spans)):
        if merged and a <= merged[-1][1]:
            merged[-1][1] = max(merged[-1][1], b)
        else:
            merged.append([a, b])
    at = np.array([(a + b - 1) // 2 for a, b in merged], dtype=np.int64)
    art = np.concatenate((det.i_artefact, at))
    why = np.empty(art.size, dtype=object)
    why[:det.i_artefact.size] = det.artefact_reason
    why[det.i_artefact.size:] = "spike"
    o = np.argsort(art, kind="stable")
    return dataclasses.replace(det, i_artefact=art[o], artefact_reason=why[o],
                               spike_spans=np.asarray(merged, dtype=np.int64).reshape(-1, 2))


def _detect_decimated(load, n: int, fs_hz: float, q: int, s: DetectionSettings, noise_mV: float, pad: int,
                      progress: Callable[[int, int], None] | None = None) -> Detection:
    """Detection on means of ``q`` samples (aligned to the sweep's start), indices mapped back.

    Averaging costs one pass and divides all later work by ``q``; it also shrinks electrical
    spikes a few samples long. The indices returned are the centres of the averaged groups; the
    measurement refines every upstroke on the full-rate samples.
    """

    def load_q(a: int, b: int) -> np.ndarray:
        x = np.asarray(load(a * q, b * q), dtype=np.float64)
        m = x.size // q
        # The sum of q strided slices: far cheaper than a mean over a short inner axis.
        out = x[0:m * q:q].copy()
        for k in range(1, q):
            out += x[k:m * q:q]
        out *= 1.0 / q
        return out

    if hasattr(load, "spans"):
        load_q.spans = load.spans  # type: ignore[attr-defined]

    det = detect_sweep(
        load_q, n // q, fs_hz / q, settings=dataclasses.replace(s, working_rate_hz=fs_hz / q),
        noise_mV=noise_mV / math.sqrt(q), pad=-(-pad // q), progress=progress,
    )
    half = q // 2
    return Detection(
        det.i_upstroke * q + half, det.i_peak * q + half, det.i_artefact * q + half, det.artefact_reason,
        det.threshold_V_per_s, float(noise_mV),
    )


def _box_slope_noise(noise_mV: float, fs_hz: float, h: int) -> float:
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


def _detect_region(v, offset, fs_hz, s, threshold, *, levels_from, block, n_total, core):
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
    queue = [(int(nz[j - 1]), int(nz[j]), core[0] <= int(nz[j]) + offset < core[1]) for j in rises]
    qi = 0
    while qi < len(queue):
        arm, cross, in_core = queue[qi]
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
        if amp < s.min_amplitude_mV:
            continue  # a sub-threshold depolarisation (or noise), not a beat and not an artefact
        if t_right - t_left < width_min and not cut_by_end:
            arts.append(iu + offset)
            reasons.append("narrow")
            # A spike may hide a real upstroke later in the same event: look again after it.
            above = np.flatnonzero(vs[t_right:end] > hi_lvl[t_right:end])
            if above.size:
                queue.append((t_right, t_right + int(above[0]), True))
            continue
        if dvs[iu] < threshold:
            arts.append(iu + offset)
            reasons.append("slow")
            continue
        ups.append(iu + offset)
        peaks.append(ip + offset)
    return (np.asarray(ups, np.int64), np.asarray(peaks, np.int64), np.asarray(arts, np.int64), reasons)
