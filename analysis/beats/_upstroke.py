"""dV/dt max of an upstroke, with a derivative window sized to the upstroke's own rise.

The upstroke-velocity derivative is a Savitzky-Golay derivative of polynomial order 3 whose
window is a fraction of the upstroke's own 10-90 % rise time (:func:`rise_time_10_90`), so that
a 2-10 V/s nodal upstroke (rise ~10-30 ms) is measured over several ms and a 300-500 V/s upstroke
(rise ~0.3 ms) over 5 samples; the peak of the sampled derivative is refined by a least-squares
cubic through its top (:func:`analysis.signal.top_fit_peak`). See :mod:`analysis.signal._filters` for the
other derivatives and Savitzky & Golay 1964, Anal Chem 36:1627.
"""

from __future__ import annotations

import functools
import math
from dataclasses import dataclass

import numpy as np

from analysis.signal import (
    cached_savgol_coeffs,
    central_difference,
    parabolic_peak,
    savgol_derivative,
    top_fit_peak,
    window_samples,
)

__all__ = ["PEAK_WIDTH_FRACTION", "TOP_FIT_NOISE", "UpstrokeVelocity", "derivative_trace", "half_height_width", "rise_time_10_90", "upstroke_velocity"]


def _quick_noise_mV(v_mV: np.ndarray) -> float:
    """White-noise rms from the mean absolute second difference (a phase-4 stretch, spikes
    bridged: no outliers for a median to ignore): ``E|d2| = sqrt(6) s sqrt(2 / pi)``."""
    x = np.asarray(v_mV, dtype=np.float64)
    if x.size < 3:
        return 0.0
    d2 = x[2:] - 2.0 * x[1:-1] + x[:-2]
    return float(np.abs(d2).mean() * math.sqrt(math.pi / 2.0) / math.sqrt(6.0))


def _crossing_up(v: np.ndarray, level: float, start: int) -> float:
    """Fractional index of the first upward crossing of ``level`` at or after ``start`` (NaN)."""
    above = np.flatnonzero(v[start:] >= level)
    if above.size == 0:
        return math.nan
    j = start + int(above[0])
    if j == 0 or v[j - 1] >= level:
        return float(j)
    return j - 1 + (level - v[j - 1]) / (v[j] - v[j - 1])


def rise_time_10_90(v_mV: np.ndarray, fs_hz: float, *, i_foot: int, i_peak: int) -> tuple[float, float, float]:
    """10-90 % rise of an upstroke from its foot to its peak.

    Parameters
    ----------
    v_mV : ndarray
        The (lightly smoothed) membrane potential.
    i_foot, i_peak : int
        Where the upstroke starts (its take-off) and its peak.

    Returns
    -------
    (rise_ms, i10, i90)
        The rise time and the fractional indices of the 10 % and 90 % crossings (NaN when the
        upstroke is not resolved).
    """
    if i_peak <= i_foot:
        return math.nan, math.nan, math.nan
    seg = v_mV[i_foot:i_peak + 1]
    base, top = float(seg[0]), float(seg[-1])
    amp = top - base
    if amp <= 0:
        return math.nan, math.nan, math.nan
    i10 = _crossing_up(seg, base + 0.1 * amp, 0)
    i90 = _crossing_up(seg, base + 0.9 * amp, 0 if math.isnan(i10) else int(i10))
    if math.isnan(i10) or math.isnan(i90):
        return math.nan, math.nan, math.nan
    return (i90 - i10) / fs_hz * 1e3, i_foot + i10, i_foot + i90


@dataclass(frozen=True)
class UpstrokeVelocity:
    """dV/dt max of one upstroke and how it was obtained.

    Attributes
    ----------
    dvdt_max_V_per_s : float
    index : float
        Fractional sample index of dV/dt max (in the array given).
    window_ms : float
        The derivative's window (0 for a central difference).
    rise_ms : float
        The upstroke's 10-90 % rise time that sized the window.
    rise_samples : float
        The same in samples (for the sampling-rate warning).
    sd_V_per_s : float
        The estimate's standard uncertainty from the trace's white noise (the derivative's noise
        at one sample: the noise rms times the norm of the filter's coefficients); 0 on a clean
        trace.
    peak_width_ms : float
        Full width of the dV/dt peak at half its height, as measured (NaN when not resolved).
    """

    dvdt_max_V_per_s: float
    index: float
    window_ms: float
    rise_ms: float
    rise_samples: float
    sd_V_per_s: float = 0.0
    peak_width_ms: float = math.nan


def upstroke_velocity(
    v_mV: np.ndarray, fs_hz: float, *, i_foot: int, i_peak: int, method: str = "adaptive_savgol",
    window_fraction: float = 0.2, min_window_ms: float = 0.0, max_window_ms: float = 10.0,
    noise_mV: float = 0.0, noise_fraction: float = 0.02, v_light_mV: np.ndarray | None = None,
) -> UpstrokeVelocity:
    """Maximum upstroke velocity with a derivative window sized to the upstroke's own rise.

    Parameters
    ----------
    v_mV : ndarray
        Membrane potential (mV); the upstroke lies between ``i_foot`` and ``i_peak``.
    fs_hz : float
    i_foot, i_peak : int
        The upstroke's take-off and peak (sample indices in ``v_mV``).
    method : {"adaptive_savgol", "central_difference"}
    window_fraction : float
        Window = this fraction of the 10-90 % rise time, bounded by ``min_window_ms`` and
        ``max_window_ms`` and never fewer than 5 samples.
    noise_mV : float
        White-noise rms of the trace; the window is widened (up to ``max_window_ms`` and to half
        the rise time) until the derivative's noise is at most ``noise_fraction`` of dV/dt max.
    noise_fraction : float
    v_light_mV : ndarray, optional
        A lightly smoothed copy of ``v_mV`` for the rise-time crossings (default: ``v_mV``).

    Returns
    -------
    UpstrokeVelocity

    Notes
    -----
    A Savitzky-Golay derivative of polynomial order 3 is exact for polynomials up to degree 4,
    so its clipping of a smooth dV/dt peak grows only with a high power of the window: a window
    of 0.2 x the 10-90 % rise clips well under 1 % (checked against exact derivatives of
    analytic upstrokes in the tests), while a 20 ms nodal upstroke at 10 kHz is averaged over
    about 40 samples instead of 3. On noisy traces the window grows until the noise of the
    derivative (white-noise rms times the norm of the filter's coefficients) is a small fraction
    of the upstroke's own velocity, but never beyond half the rise. The maximum of the sampled
    derivative is refined by a least-squares cubic through its top (:func:`top_fit_peak`), which
    also keeps the largest-of-noisy-samples bias out: the top 10 % on a clean trace, widened to
    :data:`TOP_FIT_NOISE` times the derivative's noise (at most the top half; the white noise of
    the 50 ms before the foot) on a noisy one,
    where the top 10 % of a slow upstroke's dV/dt is flat within the noise and its maximum would
    jitter by half a millisecond (so cycle lengths would jitter by more).
    """
    light = v_mV if v_light_mV is None else v_light_mV
    rise_ms, i10, i90 = rise_time_10_90(light, fs_hz, i_foot=i_foot, i_peak=i_peak)
    if math.isnan(rise_ms):
        i10, i90 = float(i_foot), float(i_peak)
        rise_ms = (i_peak - i_foot) / fs_hz * 1e3
    rise_samples = rise_ms * 1e-3 * fs_hz
    lo, hi = int(math.floor(i10)), int(math.ceil(i90))
    if method == "central_difference":
        d, a = _window_derivative(v_mV, fs_hz, lo, hi, 3, central=True)
        j0, j1 = _search(lo, hi, a, d)
        j = j0 + int(np.argmax(d[j0:j1]))
        off, value = parabolic_peak(d, j)
        # A central difference's noise: the rms of two samples' difference over two intervals.
        sd = noise_mV * fs_hz / math.sqrt(2.0) / 1000.0
        return UpstrokeVelocity(float(value), a + j + off, 0.0, float(rise_ms), float(rise_samples), sd,
                                half_height_width(d, j) / fs_hz * 1e3)
    window_ms = min(max(window_fraction * rise_ms, min_window_ms), max_window_ms)
    n = window_samples(window_ms, fs_hz, polyorder=3, minimum=5)
    # The noise just before the foot sizes the top fit: local, so that it does not depend on
    # how much else the sweep holds.
    m = max(64, int(0.05 * fs_hz))
    local_noise = _quick_noise_mV(v_mV[max(0, i_foot - m):i_foot + 1]) if i_foot >= 32 else noise_mV
    n_max = min(window_samples(max_window_ms, fs_hz, polyorder=3, minimum=5),
                window_samples(0.5 * rise_ms, fs_hz, polyorder=3, minimum=5))
    width = math.nan
    for attempt in range(4):
        d, a = _window_derivative(v_mV, fs_hz, lo, hi, n)
        # dV/dt max of phase 0: the largest derivative between the 10 % and 90 % crossings.
        j0, j1 = _search(lo, hi, a, d)
        j = j0 + int(np.argmax(d[j0:j1]))
        # The window never spans more than PEAK_WIDTH_FRACTION of the dV/dt peak's own
        # half-height width: a narrow peak (1-3 ms) is otherwise clipped by a window sized to a
        # rise that a slow approach to the peak lengthens, or widened against the noise.
        width = half_height_width(d, j)
        n_cap = _odd_at_most(PEAK_WIDTH_FRACTION * width, 5) if math.isfinite(width) else n_max
        # ... but never below the window at which the peak stands PEAK_SNR noise SDs clear of the
        # noise: on a noisy stretch (seal trouble) a noise spike's width is no upstroke's width.
        n_floor = 5
        if local_noise > 0 and d[j] > 0:
            n_floor = _quiet_window(5, n_max, fs_hz, d[j] / (PEAK_SNR * local_noise))
        cap = min(n_max, max(n_cap, n_floor))
        if n > cap and attempt < 3:
            n = cap
            continue
        # A peak the width caps is narrow: its fit keeps to the top quarter; a broad one may use
        # the top half, where the noise needs it, so that its time does not jitter.
        narrow = n_cap < n_max
        off, value = top_fit_peak(d, j, fraction=_top_fraction(d[j], _sg_noise(n, fs_hz) * local_noise, narrow))
        if noise_mV <= 0 or value <= 0:
            break
        n_new = _quiet_window(n, cap, fs_hz, noise_fraction * value / noise_mV)
        if n_new == n:
            break
        n = n_new
    sd = _sg_noise(n, fs_hz) * local_noise
    return UpstrokeVelocity(float(value), a + j + off, n / fs_hz * 1e3, float(rise_ms), float(rise_samples),
                            float(sd), width / fs_hz * 1e3)


def derivative_trace(v_mV: np.ndarray, fs_hz: float, window_ms: float) -> np.ndarray:
    """dV/dt (V/s) of a whole trace by the estimator dV/dt max used, over the same window.

    Parameters
    ----------
    v_mV : ndarray
        Membrane potential (mV); NaN samples (a window past a sweep's end) stay NaN and do not
        spread into the finite stretch.
    fs_hz : float
    window_ms : float
        The window :func:`upstroke_velocity` reported (``UpstrokeVelocity.window_ms``, the beat
        table's ``dvdt_window_ms``): an order-3 Savitzky-Golay derivative over that many ms
        (Savitzky & Golay 1964, Anal Chem 36:1627); 0 or NaN gives the central difference of
        the ``central_difference`` method.

    Returns
    -------
    ndarray
        The derivative, sample by sample (mV per ms equals V per s).
    """
    v = np.asarray(v_mV, dtype=np.float64)
    out = np.full(v.size, np.nan)
    finite = np.flatnonzero(np.isfinite(v))
    if finite.size < 3:
        return out
    a, b = int(finite[0]), int(finite[-1]) + 1
    seg = v[a:b]
    n = window_samples(window_ms, fs_hz, polyorder=3, minimum=5) if window_ms and math.isfinite(window_ms) else 0
    if n < 5 or n > seg.size:
        out[a:b] = central_difference(seg, fs_hz) / 1000.0
    else:
        out[a:b] = savgol_derivative(seg, fs_hz, window=n, polyorder=3) / 1000.0
    return out


#: The width cap never shrinks the window to where the derivative's noise exceeds 1/PEAK_SNR of
#: the peak (common practice, no source: ten noise SDs to call a peak a peak).
PEAK_SNR = 10.0

#: The dV/dt max window spans at most this fraction of the dV/dt peak's half-height width. An
#: order-3 Savitzky-Golay derivative clips a peak by about 2 % x (window / width)^4 on the
#: DiFrancesco-Noble 1985 upstroke (sharper than a smooth bump), so 0.9 clips about 1.3 % there
#: and much less on rounder peaks, while its noise stays near the peak's own 1-2 % at 10 kHz with
#: 0.3 mV rms (measured on that model, myokit; common practice, no source, for the choice).
PEAK_WIDTH_FRACTION = 0.9


def half_height_width(d: np.ndarray, j: int) -> float:
    """Full width (samples, interpolated) at half height of the peak of ``d`` at ``j`` (NaN if
    the peak runs into an end of ``d`` or is not positive)."""
    peak = float(d[j])
    if peak <= 0:
        return math.nan
    half = 0.5 * peak
    left = np.flatnonzero(d[:j + 1] < half)
    right = np.flatnonzero(d[j:] < half)
    if left.size == 0 or right.size == 0:
        return math.nan
    i0, i1 = int(left[-1]), j + int(right[0])
    x0 = i0 + (half - d[i0]) / (d[i0 + 1] - d[i0])
    x1 = i1 - 1 + (half - d[i1 - 1]) / (d[i1] - d[i1 - 1])
    return float(x1 - x0)


def _odd_at_most(x: float, minimum: int) -> int:
    n = math.floor(x)
    n = n if n % 2 else n - 1
    return max(n, minimum)


#: The cubic through the top of the dV/dt peak spans this many noise rms of the derivative
#: (at least the top 10 %, at most the top half): on a slow, noisy upstroke the top 10 % holds
#: only noise and its maximum jitters by a fraction of the rise time.
TOP_FIT_NOISE = 20.0

#: ... and never below this fraction of the peak: a cubic through the top half of a narrow dV/dt
#: peak (1-3 ms at half height) cuts its tip, by 2-3 % at 10 kHz on the DiFrancesco-Noble 1985
#: upstroke (myokit); through the top quarter it follows it (common practice, no source).
TOP_FIT_MIN_FRACTION = 0.75

#: ... while on a broad peak (one the window is not capped by: a slow nodal upstroke) the fit may
#: reach down to half the peak, which holds the time of dV/dt max still under noise (common
#: practice, no source).
TOP_FIT_BROAD_MIN_FRACTION = 0.5


def _top_fraction(peak: float, noise: float, narrow: bool = True) -> float:
    if peak <= 0 or noise <= 0:
        return 0.9
    lowest = TOP_FIT_MIN_FRACTION if narrow else TOP_FIT_BROAD_MIN_FRACTION
    return 1.0 - min(max(0.1, TOP_FIT_NOISE * noise / peak), 1.0 - lowest)


def _quiet_window(n: int, n_max: int, fs_hz: float, limit: float) -> int:
    """The shortest odd window from ``n`` to ``n_max`` whose derivative noise per mV of white
    noise is at most ``limit`` (``n`` when it already is; ``n_max`` when none is): the noise
    falls as the window grows, so a bisection over odd lengths finds it."""
    if n >= n_max or _sg_noise(n, fs_hz) <= limit:
        return n
    if _sg_noise(n_max, fs_hz) > limit:
        return n_max
    lo, hi = n, n_max  # noise(lo) > limit >= noise(hi)
    while hi - lo > 2:
        mid = lo + ((hi - lo) // 4) * 2
        if _sg_noise(mid, fs_hz) > limit:
            lo = mid
        else:
            hi = mid
    return hi


def _window_derivative(v: np.ndarray, fs: float, lo: int, hi: int, n: int, central: bool = False):
    h = n // 2
    a = max(0, lo - 2 * h - 2)
    b = min(len(v), hi + 2 * h + 3)
    seg = v[a:b]
    if central:
        return central_difference(seg, fs) / 1000.0, a
    # With 2 h samples of context on each side the edge fits are never looked at.
    edges = a == 0 or b == len(v)
    return savgol_derivative(seg, fs, window=n, polyorder=3, edges=edges) / 1000.0, a


def _search(lo: int, hi: int, a: int, d: np.ndarray) -> tuple[int, int]:
    j0, j1 = max(lo - a, 0), min(hi - a + 1, len(d))
    return (j0, j1) if j1 > j0 else (0, len(d))


@functools.lru_cache(maxsize=512)
def _sg_noise(n: int, fs_hz: float) -> float:
    """V/s of derivative noise per mV of white noise, for the order-3 derivative over n samples."""
    c = cached_savgol_coeffs(n, 3, 1, 1.0 / fs_hz)
    return float(np.sqrt(np.sum(c * c))) / 1000.0
