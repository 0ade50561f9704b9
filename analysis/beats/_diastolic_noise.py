"""The rms noise of each diastole: what a zero-phase low-pass at the noise corner leaves out.

The low-pass is the gain of a second-order Butterworth filter run forward and backward,
``1 / (1 + (f/fc)^4)`` (scipy.signal.sosfiltfilt's), with the diastole's ends extended by odd
reflection over three corner periods, as that filter extends them. Its output is slow, so it is
computed on the diastole averaged down to 50 samples per corner period and taken back to every
sample by linear interpolation: within 0.1 % of the filter run at the full rate, without a
recursive filter per beat. :func:`residual_rms_many` does every diastole of a stretch at once,
the residual's sum of squares in closed form from sums over the intervals between the averages'
centres; :func:`lowpass_residual_rms` is one diastole, sample by sample.
"""

from __future__ import annotations

import functools
import math

import numpy as np

__all__ = ["lowpass_residual_rms", "residual_rms_many"]


@functools.lru_cache(maxsize=32)
def _lowpass_kernel(rate_hz: float, corner_hz: float) -> np.ndarray:
    """Samples (at ``rate_hz``) of the impulse response whose spectrum is ``1 / (1 + (f/fc)^4)``.

    That is the gain of a second-order Butterworth low-pass run forward and backward (the square
    of its magnitude, no phase): ``h(t) = (wc / 2 sqrt 2) exp(-a |t|) (cos a t + sin a |t|)``,
    ``a = wc / sqrt 2``, taken to 10 time constants and scaled to unit sum.
    """
    a = 2.0 * math.pi * corner_hz / math.sqrt(2.0)
    k = int(math.ceil(10.0 / a * rate_hz))
    t = np.arange(-k, k + 1) / rate_hz
    h = np.exp(-a * np.abs(t)) * (np.cos(a * t) + np.sin(a * np.abs(t)))
    return h / h.sum()


def _block(fs_hz: float, corner_hz: float) -> int:
    return max(1, int(fs_hz // (50.0 * corner_hz)))


def lowpass_residual_rms(seg: np.ndarray, fs_hz: float, corner_hz: float) -> float:
    """rms of ``seg`` minus its zero-phase low-pass at ``corner_hz`` (one diastole)."""
    x = np.asarray(seg, dtype=np.float64)
    n = x.size
    padlen = min(n - 1, 3 * int(round(fs_hz / corner_hz)))
    ext = np.concatenate((2.0 * x[0] - x[padlen:0:-1], x, 2.0 * x[-1] - x[-2:-padlen - 2:-1]))
    d = _block(fs_hz, corner_hz)
    m = (ext.size // d) * d
    coarse = np.einsum("ij->i", ext[:m].reshape(-1, d)) * (1.0 / d)  # block means, one pass
    kernel = _lowpass_kernel(fs_hz / d, corner_hz)
    # "full" then the centre: "same" would return the kernel's length for a shorter stretch
    low = np.convolve(coarse, kernel, mode="full")[kernel.size // 2:kernel.size // 2 + coarse.size]
    centres = (np.arange(coarse.size) + 0.5) * d - 0.5
    r = x - np.interp(np.arange(padlen, padlen + n, dtype=np.float64), centres, low)
    return float(math.sqrt((r * r).sum() / n))


def residual_rms_many(v: np.ndarray, starts: np.ndarray, stops: np.ndarray, fs_hz: float, corner_hz: float) -> np.ndarray:
    """:func:`lowpass_residual_rms` of every diastole ``v[starts[i]:stops[i]]`` at once.

    The averages are taken from the start of each diastole and its ends reflected on them; the
    low-pass of all diastoles is one FFT convolution along rows; the residual's sum of squares
    is ``sum(y^2) - 2 sum(y L) + sum(L^2)`` with ``L`` linear between the averages' centres, so
    only sums over the intervals between centres are needed, not the residual itself. Diastoles
    of fewer than three averages are worked one by one.
    """
    starts = np.asarray(starts, np.int64)
    stops = np.asarray(stops, np.int64)
    k_rows = starts.size
    out = np.full(k_rows, np.nan)
    if k_rows == 0:
        return out
    d = _block(fs_hz, corner_hz)
    n = stops - starts
    k = n // d  # averages per diastole
    small = k < 3
    for r in np.flatnonzero(small):
        out[r] = lowpass_residual_rms(v[starts[r]:stops[r]], fs_hz, corner_hz)
    rows = np.flatnonzero(~small)
    if rows.size == 0:
        return out
    n, k, s = n[rows], k[rows], starts[rows]
    big_n = int(n.max())
    # The diastoles as rows, relative to their first sample (zeros past their ends).
    cols = np.arange(big_n)
    # Rows copied from a strided view (no index array), zeroed past each diastole's end.
    src = v if v.size >= int(s.max()) + big_n else np.concatenate((v, np.zeros(int(s.max()) + big_n - v.size)))
    y = np.lib.stride_tricks.sliding_window_view(src, big_n)[s] - v[s][:, None]
    y *= cols[None, :] < n[:, None]
    big_k = int(k.max())
    blocks = y[:, :big_k * d].reshape(rows.size, big_k, d)
    m = np.einsum("rkd->rk", blocks) * (1.0 / d)  # averages past k are partial or zero: unused
    padlen = np.minimum(n - 1, 3 * int(round(fs_hz / corner_hz)))
    p = np.minimum(-(-padlen // d), k)  # reflected averages on each side
    big_p = int(p.max())
    width = big_p + big_k + big_p
    coarse = np.zeros((rows.size, width))
    kk = np.arange(big_k)
    ok = kk[None, :] < k[:, None]
    at = np.broadcast_to(np.arange(rows.size)[:, None], ok.shape)
    coarse[at[ok], (big_p + kk[None, :] + 0 * k[:, None])[ok]] = m[ok]
    y_last = y[np.arange(rows.size), n - 1]
    jj = np.arange(big_p)
    left = jj[None, :] < p[:, None]  # j-th reflected average: 2 y0 - m[j] at column big_p - 1 - j
    coarse[at[:, :big_p][left], (big_p - 1 - jj[None, :] + 0 * p[:, None])[left]] = -m[:, :big_p][left]
    mirror = np.minimum(k[:, None] - 1 - jj[None, :], big_k - 1)  # right: 2 y_last - m[k - 1 - j]
    right_vals = 2.0 * y_last[:, None] - m[np.arange(rows.size)[:, None], np.maximum(mirror, 0)]
    coarse[at[:, :big_p][left], (big_p + k[:, None] + jj[None, :])[left]] = right_vals[left]
    kernel = _lowpass_kernel(fs_hz / d, corner_hz)
    half = kernel.size // 2
    nfft = 1 << int(math.ceil(math.log2(width + kernel.size)))
    full = np.fft.irfft(np.fft.rfft(coarse, nfft, axis=1) * np.fft.rfft(kernel, nfft)[None, :], nfft, axis=1)
    low = full[:, big_p + half:big_p + half + big_k]  # at the averages' centres
    # Intervals between consecutive centres: d samples each, from the first sample past the
    # first centre.
    s0 = -(-(d - 1) // 2)
    tau = np.arange(d) + (s0 - (d - 1) / 2.0)
    yi = y[:, s0:s0 + (big_k - 1) * d].reshape(rows.size, big_k - 1, d) if big_k > 1 else y[:, :0].reshape(rows.size, 0, d)
    s0_sum = np.einsum("rkd->rk", yi)
    s1_sum = np.einsum("rkd,d->rk", yi, tau)
    live = kk[None, :-1] < (k - 1)[:, None]
    lk = np.where(live, low[:, :-1], 0.0)
    slope = np.where(live, (low[:, 1:] - low[:, :-1]) / d, 0.0)
    st, st2 = float(tau.sum()), float((tau * tau).sum())
    cross = (lk * s0_sum + slope * s1_sum).sum(axis=1)
    sq = (d * lk * lk + 2.0 * lk * slope * st + slope * slope * st2).sum(axis=1)
    total = np.einsum("rn,rn->r", y, y)
    # Before the first centre and after the last one the low-pass is held at its end values.
    l_first = low[:, 0]
    l_last = low[np.arange(rows.size), k - 1]
    head = y[:, :s0]
    h_sum, h_sq = head.sum(axis=1), (head * head).sum(axis=1)
    t_from = s0 + (k - 1) * d  # the tail: at most 2 d samples per diastole
    t_cols = np.arange(2 * d)
    t_in = t_cols[None, :] < (n - t_from)[:, None]
    tail = np.where(t_in, y[np.arange(rows.size)[:, None], np.minimum(t_from[:, None] + t_cols[None, :], big_n - 1)], 0.0)
    t_sum, t_sq = tail.sum(axis=1), (tail * tail).sum(axis=1)
    n_head, n_tail = float(s0), t_in.sum(axis=1)
    ends = (h_sq - 2.0 * l_first * h_sum + n_head * l_first ** 2) + (t_sq - 2.0 * l_last * t_sum + n_tail * l_last ** 2)
    ss = total - h_sq - t_sq - 2.0 * cross + sq + ends
    out[rows] = np.sqrt(np.maximum(ss, 0.0) / n)
    return out
