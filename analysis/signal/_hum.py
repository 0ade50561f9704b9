"""Mains hum (50/60 Hz and harmonics) estimated as a slowly varying sinusoid and subtracted.

A notch filter removes everything near 50 Hz, including the part of a sharp upstroke's own
spectrum that lies there: on an action potential it lowers the peak and the take-off by about a
millivolt. Hum, unlike the cell, is a steady sinusoid, so Upstroke estimates it instead
(common practice in the form of "sinusoid fitting" line-noise removal, no single source):

1. the residual ``r = V - mean of V over 100 ms`` keeps the hum (a 100 ms mean holds exactly 5
   periods of 50 Hz and 6 of 60 Hz, so it removes the hum entirely from the mean) and loses the
   slow parts of the action potential;
2. each sample is weighted by how quiet the residual is within 50 ms of it: 1 where its largest
   excursion stays below 4 robust SDs of the sweep's residual, falling to 0 at 8 (upstrokes and
   peaks, and the samples near them where the residual holds the cell's own curvature);
3. each component's complex amplitude is the weighted mean of ``r exp(-i 2 pi f t)`` over a
   sliding window of ``hum_block_s`` (complex demodulation: over a whole number of periods of
   every component, the other components and the cross terms average out), divided by the
   window's mean weight; where the window holds almost no quiet samples (under 5 % of its
   weight), the nearest estimate up to two windows away is carried in, and beyond that no hum
   is removed;
4. ``sum of Re(A_k(t) exp(i 2 pi f_k t))`` is subtracted.

Which components are there and the residual's SD are judged once per sweep (:func:`hum_survey`,
on evenly spaced pieces). Every later step slides along the samples: nothing is aligned to the
start of the sweep, so recording from earlier changes the estimate only within half a window of
the first sample (two and a half in a stretch without quiet samples), and a chunk with :func:`hum_pad_samples` of context on each side gives the
same samples as the whole sweep.
"""

from __future__ import annotations

import math
from dataclasses import dataclass

import numpy as np

from analysis.signal._filters import moving_mean as _moving_mean

__all__ = ["HumSurvey", "hum_survey", "remove_hum", "hum_present", "hum_pad_samples"]

_MEAN_S = 0.1
#: Weights: 1 below this many robust SDs of the residual, 0 at twice as many.
_QUIET_SD = 4.0


def hum_pad_samples(fs_hz: float, block_s: float) -> int:
    """Context needed on each side of a chunk for :func:`remove_hum` to be chunk-independent.

    Half a window for the sliding estimate, two windows more for the estimate carried into a
    stretch without quiet samples (the window is ``block_s`` rounded to a whole 100 ms: at most
    50 ms longer), and 100 ms for the residual's mean and the quiet test.
    """
    return int(math.ceil((2.5 * block_s + 3 * _MEAN_S) * fs_hz)) + 4


def _running_max(x: np.ndarray, size: int) -> np.ndarray:
    """Maximum of ``x`` over a centred window of ``size`` samples (clipped at the ends).

    The van Herk / Gil-Werman scheme: running maxima within blocks of ``size`` from the left
    and from the right, one pass each, so the cost does not grow with the window.
    """
    x = np.asarray(x)
    n = x.size
    if size <= 1 or n == 0:
        return x.copy()
    h = size // 2
    low = np.min(x) if x.dtype != bool else False
    nb = -(-(n + size) // size)
    pad = np.full(nb * size, low, dtype=x.dtype)
    pad[h:h + n] = x
    blocks = pad.reshape(nb, size)
    left = np.maximum.accumulate(blocks, axis=1).ravel()
    right = np.maximum.accumulate(blocks[:, ::-1], axis=1)[:, ::-1].ravel()
    # window [i, i + size) of the padded array = samples [i - h, i - h + size) of x
    i = np.arange(n)
    return np.maximum(right[i], left[np.minimum(i + size - 1, left.size - 1)])


def _carried(ok: np.ndarray, reach: int) -> tuple[np.ndarray, np.ndarray, np.ndarray]:
    """Where the hum estimate is carried from, for the samples without one of their own.

    Returns (samples within ``reach`` of an estimated one, the nearest estimated sample of each,
    samples farther than ``reach`` from any). :func:`remove_hum` carries an estimate two windows
    into a stretch without quiet samples (a leaky seal's noise, a burst of fast beats) and removes
    no hum beyond: mains hum keeps its phase for seconds, but not for ever (a mains frequency off
    by 0.02 Hz turns it by 0.25 rad in 2 s), and a bounded reach keeps the answer independent of
    samples farther off (a chunk with :func:`hum_pad_samples` of context gives the same samples
    as the whole sweep).
    """
    idx = np.flatnonzero(ok)
    lost = np.flatnonzero(~ok)
    if idx.size == 0:
        return np.empty(0, np.int64), np.empty(0, np.int64), lost
    pos = np.searchsorted(idx, lost)
    right = idx[np.minimum(pos, idx.size - 1)]
    left = idx[np.maximum(pos - 1, 0)]
    # Ties go to the earlier estimate.
    near = np.where(np.abs(lost - left) <= np.abs(right - lost), left, right)
    within = np.abs(near - lost) <= reach
    return lost[within], near[within], lost[~within]


def _phasor(f_hz: float, n: int, offset: int, fs_hz: float, block: int = 4096) -> np.ndarray:
    """``exp(-i 2 pi f (offset + j) / fs)`` for ``j < n``: one block of exponentials turned by
    one exponential per block (a product per sample instead of an exponential)."""
    step = -2.0 * np.pi * f_hz / fs_hz
    head = np.exp(1j * step * np.arange(min(block, max(n, 1)), dtype=np.float64))
    starts = offset + head.size * np.arange(-(-n // head.size), dtype=np.float64)
    return (np.exp(1j * step * starts)[:, None] * head[None, :]).ravel()[:n]


def _freqs(fs_hz: float, mains_hz, harmonics: int) -> list[tuple[float, int]]:
    """(fundamental, harmonic) pairs below a quarter of the sampling rate."""
    return [(f, k) for f in mains_hz for k in range(1, harmonics + 1) if f * k < fs_hz / 4]


@dataclass(frozen=True)
class HumSurvey:
    """What one sweep's hum is: its components and the residual's robust SD.

    Attributes
    ----------
    components : tuple of (float, int)
        The (fundamental Hz, harmonic) pairs found; empty when the sweep carries no hum.
    residual_sd_mV : float
        Robust SD of the 100 ms residual where the cell is quiet (sets the weights).
    """

    components: tuple[tuple[float, int], ...] = ()
    residual_sd_mV: float = 0.0

    def __bool__(self) -> bool:
        return bool(self.components)


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


def _piece_fit(x: np.ndarray, fs_hz: float, offset: int, pairs, m: int, min_mV: float):
    """Least-squares amplitude of each component on one piece, with the loud samples left out.

    Returns the amplitudes (0 where a component is below ``min_mV`` or within 3 standard errors
    of zero) and the robust SD of the piece's residual.
    """
    r = x - _moving_mean(x, m)
    sub = r[:: max(1, r.size // 8000)]
    med = float(np.median(sub))
    sd = float(np.median(np.abs(sub - med))) / 0.6745
    bad = np.abs(r - med) > 4.0 * max(sd, 1e-6)
    keep = ~_running_max(bad, m + 1)
    amps = np.zeros(len(pairs))
    if np.count_nonzero(keep) > 4 * len(pairs) + 10:
        y = r[keep]
        y = y - y.mean()
        basis = _basis((np.flatnonzero(keep) + offset) / fs_hz, pairs)
        try:
            sol = np.linalg.solve(np.einsum("ij,ik->jk", basis, basis), np.einsum("ij,i->j", basis, y))
        except np.linalg.LinAlgError:
            return amps, sd
        resid = y - np.einsum("ij,j->i", basis, sol)
        se = math.sqrt(float(np.sum(resid * resid)) / max(y.size - sol.size, 1) * 2.0 / y.size)
        for k in range(len(pairs)):
            amp = math.hypot(sol[2 * k], sol[2 * k + 1])
            if amp >= min_mV and amp >= 3.0 * se:
                amps[k] = amp
    # The SD of the quiet residual, hum included: what the weights compare excursions with.
    quiet = r[keep] if np.count_nonzero(keep) > 100 else r
    q = quiet[:: max(1, quiet.size // 8000)]
    sd_quiet = float(np.median(np.abs(q - np.median(q)))) / 0.6745
    return amps, sd_quiet


def hum_survey(
    v_mV: np.ndarray | None, fs_hz: float, *, n: int | None = None, load=None,
    mains_hz: tuple[float, ...] = (50.0, 60.0), harmonics: int = 3, block_s: float = 1.0,
    min_mV: float = 0.05, pieces: int = 8,
) -> HumSurvey:
    """Which hum components a sweep carries above ``min_mV``, judged on evenly spaced pieces.

    Give the sweep's samples, or its length ``n`` and ``load(start, stop)``. The pieces depend
    only on the sweep's length, so the answer is the same however the sweep is later chunked.
    Mains hum is there all the time: a component counts only when at least half the pieces show
    it (a single piece can show a chance "component" where the cell's own waveform leaks into
    the fit).
    """
    if load is None:
        x_all = np.asarray(v_mV, dtype=np.float64)
        n = x_all.size
        load = lambda a, b: x_all[a:b]  # noqa: E731
    pairs = _freqs(fs_hz, mains_hz, harmonics)
    m = int(round(_MEAN_S * fs_hz)) | 1
    block = max(int(round(block_s * fs_hz)), m)
    if not pairs or n < 2 * m:
        return HumSurvey()
    width = 3 * block
    starts = [0] if n <= width else np.linspace(0, n - width, min(pieces, max(1, n // width))).astype(int)
    hits = np.zeros(len(pairs), int)
    sds = []
    need = max(1, (len(starts) + 1) // 2)
    for done, a in enumerate(starts, 1):
        b = min(n, int(a) + width)
        amps, sd = _piece_fit(np.asarray(load(int(a), b), dtype=np.float64), fs_hz, int(a), pairs, m, min_mV)
        hits += amps > 0
        sds.append(sd)
        if (hits + (len(starts) - done)).max() < need:
            break  # no component can reach half the pieces any more
    found = tuple(p for p, h in zip(pairs, hits) if h >= need)
    return HumSurvey(found, float(np.median(sds))) if found else HumSurvey()


def hum_present(v_mV: np.ndarray | None, fs_hz: float, **kwargs) -> bool:
    """Whether a sweep carries hum above ``min_mV`` (see :func:`hum_survey` for the arguments)."""
    return bool(hum_survey(v_mV, fs_hz, **kwargs))


def remove_hum(
    v_mV: np.ndarray, fs_hz: float, *, mains_hz: tuple[float, ...] = (50.0, 60.0), harmonics: int = 3,
    block_s: float = 1.0, min_mV: float = 0.05, offset: int = 0, present: bool | HumSurvey | None = None,
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
        Length of the sliding window over which the hum's amplitude and phase are estimated
        (it may drift slowly); rounded to whole periods of 10 Hz.
    min_mV : float
        Components smaller than this are left alone.
    offset : int
        Index of ``v_mV[0]`` in its sweep (the hum's phase is measured from the sweep's start).
    present : HumSurvey, bool or None
        The sweep's :func:`hum_survey` (what a chunk must be given to match the whole sweep);
        None surveys ``v_mV`` itself; False returns the samples unchanged at once; True surveys
        ``v_mV`` and removes what it finds.

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
    m = int(round(_MEAN_S * fs_hz)) | 1
    if present is False or n < 2 * m:
        return x.copy(), 0.0
    survey = present if isinstance(present, HumSurvey) else hum_survey(
        x, fs_hz, mains_hz=mains_hz, harmonics=harmonics, block_s=block_s, min_mV=min_mV,
    )
    if not survey:
        return x.copy(), 0.0
    # The window: a whole number of 100 ms (5 periods of 50 Hz, 6 of 60 Hz), odd in samples.
    window = max(int(round(round(block_s / _MEAN_S) * _MEAN_S * fs_hz)), m) | 1
    r = x - _moving_mean(x, m)
    loud = _running_max(np.abs(r), m + 1)
    c = _QUIET_SD * max(survey.residual_sd_mV, 1e-6)
    w = np.clip(2.0 - loud / c, 0.0, 1.0)
    # Within half a mean window of either end the residual's mean is one-sided: no weight there.
    w[: m // 2] = 0.0
    w[n - m // 2:] = 0.0
    weight = _moving_mean(w, window)
    ok = weight > 0.05
    if not ok.any():
        return x.copy(), 0.0
    fill = None if ok.all() else _carried(ok, 2 * window)
    wr = w * r
    out = x.copy()
    biggest = 0.0
    for f, k in survey.components:
        z = _phasor(f * k, n, offset, fs_hz)
        zr, zi = z.real, z.imag
        # The complex amplitude A = ar + i ai, half of it (hum = 2 Re(A exp(+i w t)), z = exp(-i w t)).
        ar, ai = _moving_mean(wr * zr, window), _moving_mean(wr * zi, window)
        if fill is None:
            ar /= weight
            ai /= weight
        else:
            np.divide(ar, weight, out=ar, where=ok)
            np.divide(ai, weight, out=ai, where=ok)
            for part in (ar, ai):
                part[fill[0]] = part[fill[1]]
                part[fill[2]] = 0.0
        out -= 2.0 * (ar * zr + ai * zi)
        # Its size over the stretch (the amplitude varies slowly: every 16th sample is enough).
        biggest = max(biggest, 2.0 * float(np.median(np.hypot(ar[::16], ai[::16]))))
    return out, biggest
