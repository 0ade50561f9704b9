"""Short electrical spikes in a trace: where they are, and the trace with them bridged.

Detection (:mod:`analysis.beats._detect`) finds and bridges them before anything else, and the
measurement bridges the same spans before it looks for any extreme or crossing.
"""

from __future__ import annotations

import numpy as np

from analysis.settings import DetectionSettings

__all__ = ["find_spikes", "bridge_spans", "spike_free"]


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


def spike_free(load, fs_hz: float, noise_mV: float, s: DetectionSettings, spans: list):
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
