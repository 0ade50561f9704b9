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

from .signal import moving_mean as _moving_mean

__all__ = ["remove_hum", "hum_present", "hum_pad_samples"]

_MEAN_S = 0.1


def hum_pad_samples(fs_hz: float, block_s: float) -> int:
    """Context needed on each side of a chunk for :func:`remove_hum` to be chunk-independent."""
    return int(math.ceil((2 * block_s + _MEAN_S) * fs_hz)) + 2


def _freqs(fs_hz: float, mains_hz, harmonics: int) -> list[tuple[float, int]]:
    """(fundamental, harmonic) pairs below a quarter of the sampling rate."""
    return [(f, k) for f in mains_hz for k in range(1, harmonics + 1) if f * k < fs_hz / 4]


def _basis(t_s: np.ndarray, pairs) -> np.ndarray:
    """Columns cos, sin of every (fundamental, harmonic), from one complex exponential each."""
    out = np.empty((t_s.size, 2 * len(pairs)))
    col = 0
    cache: dict[float, np.ndarray] = {}
    for f, k in pairs:
        if f not in cache:
            cache[f] = np.exp(2j * np.pi * f * t_s)
        z = cache[f]
        for _ in range(k - 1):
            z = z * cache[f]
        out[:, col] = z.real
        out[:, col + 1] = z.imag
        col += 2
    return out


def _fit(x: np.ndarray, fs_hz: float, offset: int, pairs, block: int, m: int, min_mV: float):
    """Block centres (global sample positions) and the hum coefficients fitted in each block."""
    n = x.size
    r = x - _moving_mean(x, m)
    first = (offset // block) * block
    edges = list(range(first, offset + n, block)) + [offset + n]
    edges[0] = offset
    bad = np.zeros(n, bool)
    for a, b in zip(edges[:-1], edges[1:]):
        seg = r[a - offset:b - offset]
        sub = seg[:: max(1, seg.size // 4000)]
        med = np.median(sub)
        mad = np.median(np.abs(sub - med)) / 0.6745
        bad[a - offset:b - offset] = np.abs(seg - med) > 4.0 * max(mad, 1e-6)
    # Leave out the action potentials' fast phases and everything within one mean-window of them
    # (there the residual holds the cell's own curvature, not hum).
    keep = ~maximum_filter1d(bad, size=m + 1, mode="nearest")
    centres, coefs = [], []
    for a, b in zip(edges[:-1], edges[1:]):
        sl = slice(a - offset, b - offset)
        mask = keep[sl]
        row = np.zeros(2 * len(pairs))
        if np.count_nonzero(mask) > 4 * len(pairs) + 10:
            y = r[sl][mask]
            y = y - y.mean()
            basis = _basis((np.flatnonzero(mask) + a) / fs_hz, pairs)
            gram = basis.T @ basis
            try:
                sol = np.linalg.solve(gram, np.einsum("ij,i->j", basis, y))
            except np.linalg.LinAlgError:
                sol = np.zeros(2 * len(pairs))
            resid = y - basis @ sol
            se = math.sqrt(float(np.sum(resid * resid)) / max(y.size - sol.size, 1) * 2.0 / y.size)
            for k in range(len(pairs)):
                amp = math.hypot(sol[2 * k], sol[2 * k + 1])
                if amp >= min_mV and amp >= 3.0 * se:
                    row[2 * k:2 * k + 2] = sol[2 * k:2 * k + 2]
        centres.append(0.5 * (a + b))
        coefs.append(row)
    return np.asarray(centres), np.asarray(coefs)


def hum_present(
    v_mV: np.ndarray | None, fs_hz: float, *, n: int | None = None, load=None,
    mains_hz: tuple[float, ...] = (50.0, 60.0), harmonics: int = 3, block_s: float = 1.0,
    min_mV: float = 0.05, pieces: int = 8,
) -> bool:
    """Whether a sweep carries hum above ``min_mV``, judged on evenly spaced pieces of it.

    Give the sweep's samples, or its length ``n`` and ``load(start, stop)``. The pieces depend
    only on the sweep's length, so the answer is the same however the sweep is later chunked.
    """
    if load is None:
        x_all = np.asarray(v_mV, dtype=np.float64)
        n = x_all.size
        load = lambda a, b: x_all[a:b]  # noqa: E731
    pairs = _freqs(fs_hz, mains_hz, harmonics)
    m = int(round(_MEAN_S * fs_hz)) | 1
    block = max(int(round(block_s * fs_hz)), m)
    if not pairs or n < 2 * m:
        return False
    width = 3 * block
    starts = [0] if n <= width else np.linspace(0, n - width, min(pieces, max(1, n // width))).astype(int)
    # Mains hum is there all the time: it must show in at least half the pieces (a single piece
    # can show a chance "component" where the cell's own waveform leaks into the fit).
    hits = 0
    for a in starts:
        b = min(n, int(a) + width)
        _, coefs = _fit(np.asarray(load(int(a), b), dtype=np.float64), fs_hz, int(a), pairs, block, m, min_mV)
        hits += bool(coefs.any())
    return hits >= max(1, (len(starts) + 1) // 2)


def remove_hum(
    v_mV: np.ndarray, fs_hz: float, *, mains_hz: tuple[float, ...] = (50.0, 60.0), harmonics: int = 3,
    block_s: float = 1.0, min_mV: float = 0.05, offset: int = 0, present: bool | None = None,
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
    present : bool or None
        Whether the sweep carries hum (from :func:`hum_present` on the whole sweep); None judges
        it on ``v_mV`` itself. False returns the samples unchanged at once.

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
    pairs = _freqs(fs_hz, mains_hz, harmonics)
    m = int(round(_MEAN_S * fs_hz)) | 1
    if present is None:
        present = hum_present(x, fs_hz, mains_hz=mains_hz, harmonics=harmonics, block_s=block_s, min_mV=min_mV)
    if not present or not pairs or n < 2 * m:
        return x.copy(), 0.0
    block = max(int(round(block_s * fs_hz)), m)
    centres, coefs = _fit(x, fs_hz, offset, pairs, block, m, min_mV)
    if not coefs.any():
        return x.copy(), 0.0
    live = [k for k in range(len(pairs)) if coefs[:, 2 * k:2 * k + 2].any()]
    biggest = max(float(np.max(np.hypot(coefs[:, 2 * k], coefs[:, 2 * k + 1]))) for k in live)
    out = x.copy()
    step = 1 << 16
    for a in range(0, n, step):
        b = min(n, a + step)
        pos = np.arange(a, b, dtype=np.float64) + offset
        basis = _basis(pos / fs_hz, [pairs[k] for k in live])
        weights = np.column_stack([np.interp(pos, centres, coefs[:, 2 * k + j]) for k in live for j in (0, 1)])
        out[a:b] -= np.einsum("ij,ij->i", basis, weights)
    return out, biggest
