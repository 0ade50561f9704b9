"""Mains hum (50/60 Hz and harmonics) estimated as a slowly varying sinusoid and subtracted.

A notch filter removes everything near 50 Hz, including the part of a sharp upstroke's own
spectrum that lies there: on an action potential it lowers the peak and the take-off by about a
millivolt. Hum, unlike the cell, is a steady sinusoid, so Upstroke estimates it instead
(common practice in the form of "sinusoid fitting" line-noise removal, no single source):

1. the residual ``r = V - mean of V over 100 ms`` keeps the hum (a 100 ms mean holds exactly 5
   periods of 50 Hz and 6 of 60 Hz, so it removes the hum entirely from the mean) and loses the
   slow parts of the action potential;
2. samples where the residual is large (upstrokes, peaks: anything beyond 4 robust SDs), and
   all samples within one averaging window of them, are left out;
3. in blocks of ``hum_block_s`` aligned to the start of the sweep, the cosine and sine amplitudes
   at each mains frequency and harmonic are fitted by least squares to the remaining residual;
   components below ``hum_min_mV`` or within 3 standard errors of zero are taken as absent;
4. the amplitudes are interpolated between block centres (no steps), and the hum is subtracted.

Because each block's fit uses only that block's samples and the phase is taken from the time
since the start of the sweep, a chunk with one block of context on each side gives the same
samples as the whole sweep.
"""

from __future__ import annotations

import math

import numpy as np
from scipy.ndimage import maximum_filter1d

__all__ = ["remove_hum", "hum_pad_samples"]

_MEAN_S = 0.1


def hum_pad_samples(fs_hz: float, block_s: float) -> int:
    """Context needed on each side of a chunk for :func:`remove_hum` to be chunk-independent."""
    return int(math.ceil((2 * block_s + _MEAN_S) * fs_hz)) + 2


def _moving_mean(x: np.ndarray, m: int) -> np.ndarray:
    c = np.empty(x.size + 1)
    c[0] = 0.0
    np.cumsum(x - x[0], out=c[1:])
    h = m // 2
    i = np.arange(x.size)
    a = np.clip(i - h, 0, x.size)
    b = np.clip(i + h + 1, 0, x.size)
    return (c[b] - c[a]) / (b - a) + x[0]


def remove_hum(
    v_mV: np.ndarray, fs_hz: float, *, mains_hz: tuple[float, ...] = (50.0, 60.0), harmonics: int = 3,
    block_s: float = 1.0, min_mV: float = 0.03, offset: int = 0,
) -> tuple[np.ndarray, float]:
    """``v_mV`` with its mains hum subtracted, and the largest hum amplitude found (mV).

    Parameters
    ----------
    v_mV : ndarray
        Samples of one sweep (or a chunk of it), in mV.
    fs_hz : float
    mains_hz : tuple of float
        Fundamentals to look for (both 50 and 60 Hz by default: only what is there is removed).
    harmonics : int
        Harmonics of each fundamental fitted (1: the fundamental only); those at or above a
        quarter of the sampling rate are skipped.
    block_s : float
        Length of the blocks in which the hum is fitted (it may drift in amplitude and phase).
    min_mV : float
        Components smaller than this are left alone.
    offset : int
        Index of ``v_mV[0]`` in its sweep (the hum's phase is measured from the sweep's start).

    Examples
    --------
    >>> import numpy as np
    >>> fs = 10_000.0
    >>> t = np.arange(int(5 * fs)) / fs
    >>> clean = -60 + 5 * np.sin(2 * np.pi * 1.3 * t)
    >>> out, amp = remove_hum(clean + 0.3 * np.sin(2 * np.pi * 50 * t + 1.0), fs)
    >>> round(amp, 2), bool(np.max(np.abs(out - clean)) < 0.01)
    (0.3, True)
    """
    x = np.asarray(v_mV, dtype=np.float64)
    n = x.size
    freqs = [f * k for f in mains_hz for k in range(1, harmonics + 1) if f * k < fs_hz / 4]
    m = int(round(_MEAN_S * fs_hz)) | 1
    if not freqs or n < 2 * m:
        return x.copy(), 0.0
    r = x - _moving_mean(x, m)
    med = np.median(r[:: max(1, n // 200_000)])
    mad = np.median(np.abs(r[:: max(1, n // 200_000)] - med)) / 0.6745
    # Leave out the action potentials' fast phases and everything within one mean-window of them
    # (there the residual holds the cell's own curvature, not hum).
    bad = np.abs(r - med) > 4.0 * max(mad, 1e-6)
    keep = ~maximum_filter1d(bad, size=m + 1, mode="nearest")
    block = max(int(round(block_s * fs_hz)), m)
    first = (offset // block) * block
    edges = list(range(first, offset + n, block)) + [offset + n]
    edges[0] = offset
    t = (np.arange(n, dtype=np.float64) + offset) / fs_hz
    centres, coefs = [], []
    for a, b in zip(edges[:-1], edges[1:]):
        sl = slice(a - offset, b - offset)
        mask = keep[sl]
        tt = t[sl][mask]
        y = r[sl][mask] - np.mean(r[sl][mask]) if mask.any() else np.empty(0)
        row = np.zeros(2 * len(freqs))
        if tt.size > 4 * len(freqs) + 10:
            basis = np.empty((tt.size, 2 * len(freqs)))
            for k, f in enumerate(freqs):
                w = 2 * np.pi * f * tt
                basis[:, 2 * k] = np.cos(w)
                basis[:, 2 * k + 1] = np.sin(w)
            sol, *_ = np.linalg.lstsq(basis, y, rcond=None)
            resid = y - basis @ sol
            se = math.sqrt(float(np.dot(resid, resid)) / max(tt.size - sol.size, 1) * 2.0 / tt.size)
            for k in range(len(freqs)):
                amp = math.hypot(sol[2 * k], sol[2 * k + 1])
                if amp >= min_mV and amp >= 3.0 * se:
                    row[2 * k:2 * k + 2] = sol[2 * k:2 * k + 2]
        centres.append(0.5 * (a + b))
        coefs.append(row)
    coefs_arr = np.asarray(coefs)
    if not coefs_arr.any():
        return x.copy(), 0.0
    pos = np.arange(n, dtype=np.float64) + offset
    hum = np.zeros(n)
    biggest = 0.0
    for k, f in enumerate(freqs):
        ca, cb = coefs_arr[:, 2 * k], coefs_arr[:, 2 * k + 1]
        if not (ca.any() or cb.any()):
            continue
        biggest = max(biggest, float(np.max(np.hypot(ca, cb))))
        w = 2 * np.pi * f * t
        hum += np.interp(pos, centres, ca) * np.cos(w) + np.interp(pos, centres, cb) * np.sin(w)
    return x - hum, biggest
