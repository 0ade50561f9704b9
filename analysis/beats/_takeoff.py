"""The take-off and phase 4 of each beat: the take-off dV/dt, the foot, TOP and the DDR fits.

Steps of the measurement context (:class:`analysis.beats._markers._Context` inherits them), on the
samples of one stretch:

* the take-off dV/dt is the least-squares slope over ``top_derivative_window_ms`` (widened on a
  noisy trace until its noise is ``top_noise_fraction`` of the criterion), from running sums;
* the foot of the upstroke is where it last rises through 10 % of its value at the upstroke, and
  the take-off (``dvdt_criterion``) where it last rises through the criterion: for every beat at
  once on the block before its upstroke (:meth:`TakeoffSteps.find_feet`), beat by beat further
  back (:meth:`TakeoffSteps.last_below`);
* the alternatives of MEASUREMENTS.md: a fraction of dV/dt max, the maximum of d2V/dt2, the
  intersection of linear fits to late diastole and the upstroke (from memory: older
  microelectrode work);
* DDR: least squares on the unsmoothed samples (the fit itself averages the noise) over
  [MDP, TOP], DDR100 over the first 100 ms, early and late DDR split at the inflection, or an
  exponential fit ``V = Vinf - A exp(-t/tau)``.
"""

from __future__ import annotations

import functools
import math

import numpy as np

from analysis.signal import (
    least_squares_slope,
    parabolic_peak,
    poly_lsq,
    savgol_coeffs,
    savgol_derivative,
    window_samples,
)

__all__ = ["TakeoffSteps"]


_RAMP = np.arange(0.0)


def _ramp(m: int) -> np.ndarray:
    """0, 1, ..., m - 1 as floats (a view of one array kept for all fits)."""
    global _RAMP
    r = _RAMP
    if r.size < m:
        r = np.arange(float(max(m, 2 * r.size)))
        _RAMP = r
    return r[:m]


@functools.lru_cache(maxsize=64)
def _savgol_smoothing(w: int) -> np.ndarray:
    return savgol_coeffs(w, 3)


def _slope_rows(x: np.ndarray, window: int, fs_hz: float) -> np.ndarray:
    """:func:`analysis.signal.least_squares_slope` along each row (V/s for mV)."""
    h = window // 2
    m = x.shape[1] - 2 * h
    y = x - x[:, :1]
    j = np.arange(x.shape[1], dtype=np.float64)
    p0 = np.zeros((x.shape[0], x.shape[1] + 1))
    np.cumsum(y, axis=1, out=p0[:, 1:])
    p1 = np.zeros_like(p0)
    np.cumsum(j * y, axis=1, out=p1[:, 1:])
    s0 = p0[:, window:] - p0[:, :m]
    s1 = p1[:, window:] - p1[:, :m]
    return (s1 - j[h:h + m] * s0) * (3.0 * fs_hz / (h * (h + 1) * (2 * h + 1))) / 1000.0


def _last_below_rows(d: np.ndarray, start: np.ndarray, lo: np.ndarray, level: np.ndarray):
    """Per row of take-off dV/dt ``d`` (column c is sample ``start + c``, the last column the
    sample after the upstroke): where it last rises through ``level`` at or after ``lo``.

    Returns ``(x, found)``; as :meth:`_Context.last_below` does on one block.
    """
    r, width = d.shape
    c = np.arange(width - 1)
    below = (d[:, :-1] < level[:, None]) & (c[None, :] >= (np.maximum(lo, start) - start)[:, None])
    found = below.any(axis=1)
    j = width - 2 - np.argmax(below[:, ::-1], axis=1)
    at = np.arange(r)
    d0, d1 = d[at, j], d[at, np.minimum(j + 1, width - 1)]
    with np.errstate(divide="ignore", invalid="ignore"):
        frac = np.where(d1 != d0, (level - d0) / (d1 - d0), 0.0)
    return start + j + np.clip(frac, 0.0, 1.0), found


#: A take-off less than ``no_phase4_min_mV`` above the MDP (or this many noise rms, when larger)
#: is no phase-4 depolarisation (flag ``no_phase4``).
NO_PHASE4_NOISE = 4.0
#: The columns a beat without phase 4 leaves undefined.
PHASE4_COLUMNS = ("top_mV", "t_top_s", "ddr_mV_per_s", "ddr100_mV_per_s", "ddr_early_mV_per_s", "ddr_late_mV_per_s",
                  "ddr_tau_ms", "ddr_vinf_mV")


class TakeoffSteps:
    """Take-off and phase-4 steps; the host provides ``v``, ``n``, ``fs``, ``s``, ``w_top``,
    ``w_d2``, ``search``, ``beat_index`` and ``smooth``."""

    def slope(self, a: int, b: int) -> tuple[np.ndarray, int]:
        """Least-squares-slope dV/dt (V/s) over the take-off window, on [a, b) with context."""
        h = self.w_top // 2
        if a - h >= 0 and b + h <= self.n:
            return least_squares_slope(self.v[a - h:b + h], self.fs, window=self.w_top) / 1000.0, a
        lo, hi = max(0, a - 2 * h), min(self.n, b + 2 * h)
        edges = lo == 0 or hi == self.n
        return savgol_derivative(self.v[lo:hi], self.fs, window=self.w_top, polyorder=2, edges=edges) / 1000.0, lo

    def last_below(self, level: float, lo: int, g: int) -> float:
        """Fractional index where the take-off dV/dt last rises through ``level`` in [lo, g]."""
        block = max(2048, 8 * self.w_top)
        b = g + 1
        while b > lo:
            a = max(lo, b - block)
            cached = self._slopes
            if cached is not None and cached[0] <= a and cached[1] == b:
                seg = cached[2][a - cached[0]:]  # the take-off dV/dt of this beat, computed once
            else:
                d, off = self.slope(a, b + 1)
                seg = d[a - off:b + 1 - off]
                if b == g + 1:
                    self._slopes = (a, b, seg)
            below = np.flatnonzero(seg[:-1] < level) if seg.size > 1 else np.empty(0, int)
            if below.size:
                j = int(below[-1])
                d0, d1 = seg[j], seg[j + 1]
                frac = (level - d0) / (d1 - d0) if d1 != d0 else 0.0
                return a + j + min(max(frac, 0.0), 1.0)
            b = a
        return math.nan

    def value_at(self, x: float, w: int) -> float:
        """V (smoothed over w samples) at a fractional index, linearly interpolated."""
        i = int(math.floor(x))
        h = w // 2
        if w > 1 and i - h >= 0 and i + h + 2 <= self.n:
            # Two Savitzky-Golay values straight from their coefficients.
            pair = np.convolve(self.v[i - h:i + h + 2], _savgol_smoothing(w), mode="valid")
            f = x - i
            return float(pair[0] * (1 - f) + pair[1] * f)
        sm, off = self.smooth(i, i + 2, w)
        j = i - off
        if j + 1 >= sm.size:
            return float(sm[-1])
        f = x - i
        return float(sm[j] * (1 - f) + sm[j + 1] * f)

    def ls_slope(self, x0: float, x1: float) -> float:
        """Least-squares slope (mV/s) of the raw samples whose times lie in [x0, x1]."""
        a, b = int(math.ceil(x0)), int(math.floor(x1)) + 1
        m = b - a
        if m < 3:
            return math.nan
        y = self.v[a:b] - self.v[a]
        # sum((k - mean k) y) / sum((k - mean k)^2), k = 0..m-1, with the sums in closed form
        k = _ramp(m)
        num = float((k * y).sum()) - 0.5 * (m - 1) * float(y.sum())
        return num / (m * (m * m - 1) / 12.0) * self.fs

    # -- one beat ----------------------------------------------------------------------------

    def find_feet(self, g: np.ndarray, prev: np.ndarray, i_mdp: np.ndarray) -> None:
        """Each beat's foot (and, for a fixed criterion, its take-off), all beats at once.

        Both are where the take-off dV/dt last rises through a level before the upstroke (10 %
        of its value at the upstroke, or the criterion), searched on the block of
        :meth:`last_below` before each upstroke; beats whose crossing lies further back, or whose
        block reaches an end of the samples, are left to :meth:`last_below` itself (NaN here).
        """
        k = g.size
        self.feet = np.full(k, np.nan)
        self.takeoffs = np.full(k, np.nan)
        self.d_here = np.full(k, np.nan)
        self.solved = np.zeros(k, bool)  # feet found here
        self.solved_top = np.zeros(k, bool)
        has_prev = (prev >= 0) & np.isfinite(i_mdp)
        self.lo_foot = np.where(has_prev, np.floor(np.where(has_prev, i_mdp, 0.0)).astype(np.int64),
                                np.maximum(np.maximum(0, g - self.search), np.where(prev >= 0, prev + 1, 0)))
        block = max(2048, 8 * self.w_top)
        h = self.w_top // 2
        start = g + 1 - block
        rows = np.flatnonzero((start - h >= 0) & (g + 2 + h <= self.n))
        if rows.size == 0:
            return
        cols = np.arange(-h, block + 1 + h)
        d = _slope_rows(self.v[start[rows, None] + cols[None, :]], self.w_top, self.fs)  # columns: start .. g + 1
        self.d_here[rows] = d[:, block - 1]
        level = 0.1 * self.d_here[rows]
        x, found = _last_below_rows(d, start[rows], self.lo_foot[rows], level)
        rising = self.d_here[rows] > 0
        ok = rising & (found | (self.lo_foot[rows] >= start[rows]))  # found, or none down to the MDP
        self.feet[rows[ok & found]] = x[ok & found]
        self.solved[rows[ok]] = True
        s = self.s
        if s.top_method in ("dvdt_criterion", "linear_fits"):
            top_lo = np.ceil(np.where(has_prev, i_mdp, 0.0)).astype(np.int64)[rows]
            x, found = _last_below_rows(d, start[rows], top_lo, np.full(rows.size, s.top_dvdt_V_per_s))
            ok = has_prev[rows] & (found | (top_lo >= start[rows]))
            self.takeoffs[rows[ok & found]] = x[ok & found]
            self.solved_top[rows[ok]] = True

    def top(self, i_mdp: float, g: int, up) -> float:
        """Fractional index of the take-off; sets ``self._top_value``."""
        s = self.s
        lo = int(math.ceil(i_mdp))
        self._top_value = math.nan
        if s.top_method in ("dvdt_criterion", "dvdt_fraction", "linear_fits"):
            level = s.top_dvdt_V_per_s if s.top_method != "dvdt_fraction" else s.top_fraction * up.dvdt_max_V_per_s
            b = self.beat_index
            if s.top_method != "dvdt_fraction" and self.solved_top[b]:
                x = float(self.takeoffs[b])  # found with every beat's foot (find_feet)
            else:
                x = self.last_below(level, lo, g)
            if math.isnan(x):
                return x
            if s.top_method != "linear_fits":
                self._top_value = self.value_at(x, self.w_top)
                return x
            return self.linear_fits(lo, x, up)
        # Maximum of d2V/dt2 between the MDP and the upstroke, near the upstroke.
        reach = max(int(5 * up.rise_samples), 10 * self.w_d2, int(0.05 * self.fs))
        a = max(lo, g - reach)
        h = self.w_d2 // 2
        ca, cb = max(0, a - 2 * h), min(self.n, g + 2 * h + 1)
        d2 = savgol_derivative(self.v[ca:cb], self.fs, window=self.w_d2, polyorder=3, deriv=2)
        part = d2[a - ca:g + 1 - ca]
        if part.size == 0:
            return math.nan
        j = int(np.argmax(part))
        po, _ = parabolic_peak(part, j)
        x = a + j + po
        self._top_value = self.value_at(x, self.w_d2)
        return x

    def linear_fits(self, lo: int, x_c: float, up) -> float:
        """Intersection of a line fitted to late diastole with the tangent at dV/dt max."""
        n_fit = int(round(self.s.top_fit_diastole_ms * 1e-3 * self.fs))
        a = max(lo, int(x_c) - n_fit)
        b = int(x_c) + 1
        if b - a < 3:
            return math.nan
        y = self.v[a:b]
        x = np.arange(a, b, dtype=np.float64)
        half = 0.5 * (b - a)
        c0, c1 = poly_lsq((x - a - half) / half, y, 1)
        b1 = c1 / half
        a1 = c0 - b1 * (a + half)
        xu = up.index
        vu = self.value_at(xu, window_samples(up.window_ms, self.fs, polyorder=3, minimum=5))
        b2 = up.dvdt_max_V_per_s * 1000.0 / self.fs  # mV per sample
        if b2 <= b1:
            return math.nan
        xi = (a1 - (vu - b2 * xu)) / (b2 - b1)
        self._top_value = float(a1 + b1 * xi)
        return float(xi)

    def lacks_phase4(self, i_mdp: float, mdp: float, i_top: float, top: float) -> bool:
        """Whether a beat takes off without a diastolic depolarisation above the noise.

        A paced or evoked action potential, a quiescent cell driven by a stimulus or a
        neuron-like spike leaves the membrane at rest until the upstroke: its take-off lies within
        ``max(no_phase4_min_mV, NO_PHASE4_NOISE x noise rms)`` of the MDP, where a spontaneous
        cell's lies 5-20 mV above it (MEASUREMENTS.md, reference values; common practice, no
        source, for the threshold); or the straight line fitted from MDP to TOP rises less than
        that over the diastole (a fast upstroke can carry the take-off derivative's crossing a few
        mV up its foot while the rest before it stays flat). Its DDR and TOP mean nothing and are
        left undefined.
        """
        if math.isnan(mdp) or math.isnan(top) or math.isnan(i_mdp) or self.s.no_phase4_min_mV <= 0:
            return False
        limit = max(self.s.no_phase4_min_mV, NO_PHASE4_NOISE * self.noise)
        fitted_rise = self.ls_slope(i_mdp, i_top) * (i_top - i_mdp) / self.fs
        return top - mdp < limit or not fitted_rise >= limit

    def phase4(self, r: dict, i_mdp: float, i_top: float) -> None:
        s = self.s
        n100 = s.ddr100_window_ms * 1e-3 * self.fs
        r["ddr100_mV_per_s"] = self.ls_slope(i_mdp, i_mdp + n100) if i_top - i_mdp >= n100 else math.nan
        linear = self.ls_slope(i_mdp, i_top)
        if s.ddr_method == "linear":
            r["ddr_mV_per_s"] = linear
        elif s.ddr_method == "early_late":
            x_inf = self.inflection(i_mdp, i_top)
            if math.isnan(x_inf):
                r["ddr_late_mV_per_s"] = linear
            else:
                r["ddr_early_mV_per_s"] = self.ls_slope(i_mdp, x_inf)
                r["ddr_late_mV_per_s"] = self.ls_slope(x_inf, i_top)
            r["ddr_mV_per_s"] = r["ddr_late_mV_per_s"]
        else:
            fit = self.exponential(i_mdp, i_top)
            if fit is not None:
                r["ddr_mV_per_s"], r["ddr_tau_ms"], r["ddr_vinf_mV"] = fit

    def inflection(self, i_mdp: float, i_top: float) -> float:
        """Where phase 4 turns from decelerating to accelerating: the minimum of its slope."""
        a, b = int(math.ceil(i_mdp)), int(math.floor(i_top)) + 1
        if b - a < 20:
            return math.nan
        w = max(5, ((b - a) // 5) | 1)
        d = savgol_derivative(self.v[a:b], self.fs, window=w, polyorder=2)
        inner = slice(max(1, (b - a) // 10), (b - a) - max(1, (b - a) // 10))
        part = d[inner]
        if part.size < 3:
            return math.nan
        j = int(np.argmin(part))
        if j == 0 or j == part.size - 1:
            return math.nan  # monotonic acceleration: no inflection inside phase 4
        return float(a + inner.start + j)

    def exponential(self, i_mdp: float, i_top: float):
        """Fit V = Vinf - A exp(-t/tau) over [MDP, TOP]: (mean slope mV/s, tau ms, Vinf mV)."""
        from scipy.optimize import curve_fit  # scipy.optimize is slow to import; only the exponential DDR fit needs it

        a, b = int(math.ceil(i_mdp)), int(math.floor(i_top)) + 1
        if b - a < 10:
            return None
        t = np.arange(b - a, dtype=np.float64) / self.fs
        y = self.v[a:b]
        dur = t[-1]

        def model(tt, vinf, amp, tau):
            return vinf - amp * np.exp(-tt / tau)

        p0 = (2 * float(y[-1]) - float(y[0]), 2 * (float(y[-1]) - float(y[0])), dur)
        try:
            with np.errstate(all="ignore"):
                (vinf, amp, tau), _ = curve_fit(model, t, y, p0=p0, maxfev=2000)
        except (RuntimeError, ValueError, TypeError):
            return None
        if not (math.isfinite(tau) and tau != 0):
            return None
        slope = (model(dur, vinf, amp, tau) - model(0.0, vinf, amp, tau)) / dur
        return float(slope), float(tau * 1e3), float(vinf)
