"""Signal conditioning: derivatives, smoothing, filters and the liquid-junction correction.

Derivatives are the delicate part of a pacemaker analysis. On a noisy trace a per-sample central
difference is useless for the take-off criterion (at 10 kHz, 0.2 mV rms of white noise gives about
1.4 V/s rms of dV/dt noise, above a 0.5 V/s criterion), while a heavily smoothed derivative clips a
fast upstroke. So Upstroke uses three derivatives, each sized for its job:

* the take-off derivative (:func:`savgol_derivative`, polynomial order 2, i.e. the local
  least-squares slope) over about 1 ms, widened on noisy traces until its noise is a small
  fraction of the criterion (:func:`noise_matched_window_ms`);
* the upstroke-velocity derivative (:func:`upstroke_velocity`): a Savitzky-Golay derivative of
  polynomial order 3 whose window is a fraction of the upstroke's own 10-90 % rise time, so that a
  2-10 V/s nodal upstroke (rise ~10-30 ms) is measured over several ms and a 300-500 V/s upstroke
  (rise ~0.3 ms) over 5 samples (the classic 5-point stencil, exact for polynomials up to degree
  4), the peak of the sampled derivative refined by a parabola through its three highest samples;
* a plain central difference (:func:`central_difference`) as the textbook alternative.

Savitzky & Golay 1964, Anal Chem 36:1627 for the filters; the LJP correction follows Barry & Lynch
1991 (J Membr Biol 121:101) and Neher 1992 (Methods Enzymol 207:123): V_true = V_measured - LJP.
"""

from __future__ import annotations

import functools
import math

import numpy as np

from analysis.errors import SettingsError

__all__ = ["window_samples", "savgol_coeffs", "cached_savgol_coeffs", "savgol_smooth", "savgol_smooth_interior", "least_squares_slope", "moving_mean", "savgol_derivative", "central_difference", "lowpass", "notch", "correct_ljp", "noise_rms_mV", "slope_noise_V_per_s", "noise_matched_window_ms"]


def window_samples(window_ms: float, fs_hz: float, *, polyorder: int = 2, minimum: int = 3) -> int:
    """An odd number of samples close to ``window_ms``, at least ``max(minimum, polyorder + 2)``."""
    n = int(round(window_ms * 1e-3 * fs_hz))
    n = max(n, minimum, polyorder + 2)
    return n if n % 2 else n + 1


def _savgol(v: np.ndarray, n: int, polyorder: int, deriv: int, delta: float, edges: bool = True) -> np.ndarray:
    """Savitzky-Golay filter with polynomial fits at the edges (scipy's ``mode="interp"``)."""
    x = np.asarray(v, dtype=np.float64)
    if x.size < n:
        n = x.size if x.size % 2 else x.size - 1
        if n <= polyorder:
            # Too short for the fit: fall back on a plain gradient (or nothing to smooth).
            return np.gradient(x, delta) if deriv == 1 and x.size > 1 else (x.copy() if deriv == 0 else np.zeros_like(x))
    coeffs = cached_savgol_coeffs(n, polyorder, deriv, delta)
    # Direct convolution unless the work is large enough for FFT overlap-add to pay off.
    out = np.convolve(x, coeffs, mode="same") if n <= 64 or x.size * n < 4_000_000 else _fft_convolve(x, coeffs)
    h = n // 2
    if edges and h and x.size >= n:
        # The first and last h outputs come from the polynomial fitted to the first and last
        # full window, as scipy's interp mode does (coefficients cached per window).
        head, tail = _edge_coeffs(n, polyorder, deriv)
        scale = 1.0 / delta**deriv
        out[:h] = np.einsum("ij,j->i", head, x[:n]) * scale
        out[x.size - h:] = np.einsum("ij,j->i", tail, x[-n:]) * scale
    return out


@functools.lru_cache(maxsize=256)
def cached_savgol_coeffs(n: int, polyorder: int, deriv: int, delta: float) -> np.ndarray:
    """:func:`savgol_coeffs`, remembered for the last 256 windows (the same few recur per sweep)."""
    return savgol_coeffs(n, polyorder, deriv=deriv, delta=delta)


def savgol_coeffs(n: int, polyorder: int, *, deriv: int = 0, delta: float = 1.0) -> np.ndarray:
    """Savitzky-Golay convolution coefficients for the centre of a window of ``n`` samples (odd).

    The least-squares polynomial of degree ``polyorder`` through the window, its ``deriv``-th
    derivative at the centre, as weights of the samples, reversed for :func:`numpy.convolve`
    (Savitzky & Golay 1964, Anal Chem 36:1627; the same numbers as scipy.signal.savgol_coeffs
    with ``use="conv"``, computed here so that opening the core does not import scipy.signal).
    """
    h = n // 2
    u = (np.arange(n, dtype=np.float64) - h) / max(h, 1)  # positions scaled to [-1, 1]
    fit = np.linalg.pinv(np.vander(u, polyorder + 1, increasing=True))
    c = fit[deriv] * math.factorial(deriv) / (max(h, 1) * delta) ** deriv
    return c[::-1].copy()


@functools.lru_cache(maxsize=256)
def _edge_coeffs(n: int, polyorder: int, deriv: int) -> tuple[np.ndarray, np.ndarray]:
    """Rows evaluating (the ``deriv``-th derivative of) the polynomial fitted to a full window
    at each of its first and last ``n // 2`` positions (per sample^deriv)."""
    h = n // 2
    u = (np.arange(n, dtype=np.float64) - h) / h  # positions scaled to [-1, 1]
    fit = np.linalg.pinv(np.vander(u, polyorder + 1, increasing=True))  # coefficients from samples
    powers = np.arange(polyorder + 1)

    def rows(pos: np.ndarray) -> np.ndarray:
        x = (pos - h) / h
        ev = np.zeros((pos.size, polyorder + 1))
        for k in powers[deriv:]:
            fac = math.perm(int(k), deriv)
            ev[:, k] = fac * x ** (k - deriv)
        return ev @ fit / float(h) ** deriv

    return rows(np.arange(h, dtype=np.float64)), rows(np.arange(n - h, n, dtype=np.float64))


def _fft_convolve(x: np.ndarray, coeffs: np.ndarray) -> np.ndarray:
    from scipy.signal import oaconvolve  # scipy.signal is slow to import; only long windows need it

    return oaconvolve(x, coeffs, mode="same")


def moving_mean(x: np.ndarray, m: int) -> np.ndarray:
    """Centred moving mean over m samples (odd), shorter windows at the edges (no wrap)."""
    if m <= 1 or x.size == 0:
        return x
    n = x.size
    h = m // 2
    c = np.empty(x.size + 1)
    c[0] = 0.0
    np.cumsum(x - x[0], out=c[1:])
    out = np.empty(n)
    if n > 2 * h:
        out[h:n - h] = (c[m:] - c[:n + 1 - m]) / m
    edge = np.r_[0:min(h, n), max(h, n - h):n]
    a = np.clip(edge - h, 0, n)
    b = np.clip(edge + h + 1, 0, n)
    out[edge] = (c[b] - c[a]) / (b - a)
    return out + x[0]


def savgol_smooth(v: np.ndarray, fs_hz: float, *, window_ms: float, polyorder: int = 3, edges: bool = True) -> np.ndarray:
    """Savitzky-Golay smoothing over ``window_ms`` (a copy of ``v`` when the window is 0).

    Parameters
    ----------
    v : ndarray
        Samples, any units.
    fs_hz : float
        Sampling rate.
    window_ms : float
        Window length; rounded to an odd number of samples (at least ``polyorder + 2``).
    polyorder : int
        Polynomial order; 3 keeps peaks and corners better than a moving average.

    Examples
    --------
    >>> import numpy as np
    >>> t = np.arange(1000) / 10_000.0
    >>> bool(np.allclose(savgol_smooth(t**2, 10_000.0, window_ms=2.0), t**2))
    True
    """
    if window_ms <= 0:
        return np.array(v, dtype=np.float64, copy=True)
    n = window_samples(window_ms, fs_hz, polyorder=polyorder)
    return _savgol(v, n, polyorder, 0, 1.0 / fs_hz, edges)


def savgol_smooth_interior(v: np.ndarray, window: int) -> np.ndarray:
    """Savitzky-Golay smoothing (polynomial order 2 or 3) at the interior samples, from running sums.

    Returns ``len(v) - window + 1`` values, for the samples ``window // 2`` to
    ``len(v) - window // 2 - 1``: the same numbers as :func:`savgol_smooth` there (a cubic's
    value at the centre of a symmetric window is the quadratic's), as
    ``(S4 sum(y) - S2 sum(k^2 y)) / (N S4 - S2^2)`` over ``k = -h..h`` from three running sums,
    so a long window costs no more than a short one.
    """
    x = np.asarray(v, dtype=np.float64)
    n = int(window)
    h = n // 2
    m = x.size - 2 * h
    if m <= 0:
        return np.empty(0)
    ref = float(x[h]) if x.size > h else 0.0
    y = x - ref
    j = np.arange(x.size, dtype=np.float64)
    p = np.zeros((3, x.size + 1))
    np.cumsum(y, out=p[0, 1:])
    jy = j * y
    np.cumsum(jy, out=p[1, 1:])
    np.cumsum(j * jy, out=p[2, 1:])
    s0 = p[0, n:] - p[0, :m]
    s1 = p[1, n:] - p[1, :m]
    s2 = p[2, n:] - p[2, :m]
    i = j[h:h + m]
    k2y = s2 - 2.0 * i * s1 + i * i * s0  # sum over the window of (j - i)^2 y_j
    s2k = h * (h + 1) * (2 * h + 1) / 3.0
    s4k = s2k * (3 * h * h + 3 * h - 1) / 5.0
    return (s4k * s0 - s2k * k2y) / (n * s4k - s2k * s2k) + ref


def savgol_derivative(
    v: np.ndarray, fs_hz: float, *, window_ms: float | None = None, window: int | None = None,
    polyorder: int = 2, deriv: int = 1, edges: bool = True,
) -> np.ndarray:
    """Savitzky-Golay derivative, in units of ``v`` per second (per s² for ``deriv=2``).

    Parameters
    ----------
    v : ndarray
    fs_hz : float
    window_ms : float, optional
        Window length in ms (rounded to an odd number of samples).
    window : int, optional
        Window length in samples instead (odd); one of the two must be given.
    polyorder : int
        2 gives the local least-squares slope (smallest noise); 3 follows a sharp peak of dV/dt
        more closely (exact for polynomials of degree 4).
    deriv : int
        1 or 2.
    edges : bool
        Fit polynomials at the ends (scipy's ``mode="interp"``); False leaves the first and last
        ``window // 2`` values as the zero-padded convolution gives them, for callers that
        passed enough context to discard them.

    Examples
    --------
    >>> import numpy as np
    >>> t = np.arange(2000) / 20_000.0
    >>> d = savgol_derivative(np.sin(2 * np.pi * 5 * t), 20_000.0, window_ms=1.0)
    >>> bool(np.allclose(d, 2 * np.pi * 5 * np.cos(2 * np.pi * 5 * t), rtol=0, atol=0.01))
    True
    """
    if window is None:
        if window_ms is None:
            raise TypeError("give window_ms or window")
        window = window_samples(window_ms, fs_hz, polyorder=polyorder)
    return _savgol(v, int(window), polyorder, deriv, 1.0 / fs_hz, edges)


def least_squares_slope(v: np.ndarray, fs_hz: float, *, window: int) -> np.ndarray:
    """The least-squares slope of ``v`` over ``window`` samples (odd) centred on each interior sample.

    Returns ``len(v) - window + 1`` values, for the samples ``window // 2`` to
    ``len(v) - window // 2 - 1``, in units of ``v`` per second. The same numbers as
    :func:`savgol_derivative` with ``polyorder=2`` there (a quadratic's slope at the centre of a
    symmetric window is the straight line's), from two running sums instead of a convolution,
    so the cost does not grow with the window: ``sum(k v[i + k]) / sum(k^2)``, ``k = -h..h``.
    """
    x = np.asarray(v, dtype=np.float64)
    n = int(window)
    h = n // 2
    m = x.size - 2 * h
    if m <= 0:
        return np.empty(0)
    y = x - x[0]  # keeps the running sums small
    j = np.arange(x.size, dtype=np.float64)
    p0 = np.empty(x.size + 1)
    p0[0] = 0.0
    np.cumsum(y, out=p0[1:])
    p1 = np.empty(x.size + 1)
    p1[0] = 0.0
    np.cumsum(j * y, out=p1[1:])
    s0 = p0[n:] - p0[:m]
    s1 = p1[n:] - p1[:m]
    centre = j[h:h + m]
    return (s1 - centre * s0) * (3.0 * fs_hz / (h * (h + 1) * (2 * h + 1)))


def central_difference(v: np.ndarray, fs_hz: float) -> np.ndarray:
    """dV/dt by second-order central differences (one-sided at the ends), per second."""
    x = np.asarray(v, dtype=np.float64)
    return np.gradient(x, 1.0 / fs_hz) if x.size > 1 else np.zeros_like(x)


def lowpass(v: np.ndarray, fs_hz: float, *, cutoff_hz: float, order: int = 4) -> np.ndarray:
    """Zero-phase Butterworth low-pass (run forward and backward: no delay, order doubled).

    Raises
    ------
    SettingsError
        When the corner is not below the Nyquist frequency.
    """
    if not 0 < cutoff_hz < fs_hz / 2:
        raise SettingsError(
            None, f"setting preprocess.lowpass_hz = {cutoff_hz:g} is not below half the sampling rate ({fs_hz / 2:g} Hz)",
            f"choose a corner below {fs_hz / 2:g} Hz or leave it out",
        )
    from scipy.signal import butter, sosfiltfilt  # only when a low-pass is asked for

    sos = butter(order, cutoff_hz, btype="low", fs=fs_hz, output="sos")
    x = np.asarray(v, dtype=np.float64)
    if x.size <= 3 * (2 * len(sos) + 1):
        return x.copy()
    return sosfiltfilt(sos, x)


def notch(v: np.ndarray, fs_hz: float, *, mains_hz: float, q: float = 30.0, harmonics: int = 1) -> np.ndarray:
    """Zero-phase notch at the mains frequency and its first ``harmonics - 1`` harmonics.

    Each notch is a second-order IIR (:func:`scipy.signal.iirnotch`) of quality ``q`` run forward
    and backward; harmonics at or above the Nyquist frequency are skipped.
    """
    from scipy.signal import filtfilt, iirnotch  # only when a notch is asked for

    x = np.asarray(v, dtype=np.float64).copy()
    for k in range(1, harmonics + 1):
        f = mains_hz * k
        if f >= fs_hz / 2:
            break
        b, a = iirnotch(f, q, fs=fs_hz)
        if x.size > 3 * max(len(a), len(b)):
            x = filtfilt(b, a, x)
    return x


def correct_ljp(v_mV: np.ndarray, ljp_mV: float) -> np.ndarray:
    """The membrane potential corrected for the liquid-junction potential.

    ``V_true = V_measured - LJP`` (Barry & Lynch 1991, J Membr Biol 121:101): with a
    K-gluconate pipette the LJP is about +10 to +15 mV, so the true potential is that much more
    negative than the one recorded.
    """
    x = np.asarray(v_mV, dtype=np.float64)
    return x - ljp_mV if ljp_mV else x.copy()


def noise_rms_mV(v_mV: np.ndarray) -> float:
    """Robust rms of the white noise on a trace, from its second differences.

    For white noise of rms s, the second difference has rms ``sqrt(6) s``; its median absolute
    value (divided by 0.6745, the normal distribution's) ignores the few samples where the signal
    itself bends (upstrokes). Slow components (drift, phase 4, hum) hardly reach it.
    """
    x = np.asarray(v_mV, dtype=np.float64)
    if x.size < 3:
        return 0.0
    d2 = x[2:] - 2.0 * x[1:-1] + x[:-2]
    return float(np.median(np.abs(d2)) / 0.6745 / math.sqrt(6.0))


def slope_noise_V_per_s(noise_mV: float, fs_hz: float, window: int) -> float:
    """rms noise of the least-squares slope over ``window`` samples of white noise ``noise_mV``.

    ``s_slope = s / (dt * sqrt(n (n^2 - 1) / 12))``, the standard error of a regression slope.
    """
    n = int(window)
    return noise_mV * fs_hz / math.sqrt(n * (n * n - 1) / 12.0) / 1000.0


def noise_matched_window_ms(
    noise_mV: float, fs_hz: float, *, criterion_V_per_s: float, fraction: float,
    min_ms: float, max_ms: float,
) -> float:
    """The shortest slope window whose noise is at most ``fraction * criterion_V_per_s``.

    Bounded to ``[min_ms, max_ms]``; on a clean trace it is ``min_ms``.
    """
    target = fraction * criterion_V_per_s
    n = window_samples(min_ms, fs_hz)
    n_max = window_samples(max_ms, fs_hz)
    if noise_mV <= 0 or slope_noise_V_per_s(noise_mV, fs_hz, n) <= target:
        return min_ms
    # n (n^2 - 1) / 12 >= (s fs / target)^2  ->  n ~ cbrt(12 (s fs / target)^2)
    need = (12.0 * (noise_mV * fs_hz / 1000.0 / target) ** 2) ** (1.0 / 3.0)
    n = min(max(n, int(math.ceil(need)) | 1), n_max)
    return min(max(n / fs_hz * 1e3, min_ms), max_ms)
