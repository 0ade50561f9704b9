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

from analysis.beats._region import box_slope_noise, detect_region
from analysis.beats._spikes import spike_free
from analysis.chunkpool import run_ordered
from analysis.settings import DetectionSettings
from analysis.signal import noise_rms_mV

__all__ = ["Detection", "detect_beats", "detect_sweep", "estimate_noise_mV", "ARTEFACT_REASONS"]

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
            spike_free(load, fs_hz, noise_mV, s, spans), n, fs_hz,
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
    threshold = max(s.min_dvdt_V_per_s, s.noise_factor * box_slope_noise(noise_mV, fs_hz, h_der))
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
        found = detect_region(v, ra, fs_hz, s, threshold, levels_from=(lo, hi), block=block, n_total=n,
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
