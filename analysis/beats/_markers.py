"""Markers of each beat on the trace: upstroke, peak, MDP, take-off, phase-4 fits, APD crossings.

All level crossings are interpolated linearly between samples; all times are seconds from the
start of the sweep. Which smoothing each marker uses, and why:

* dV/dt max and the peak: a Savitzky-Golay fit (order 3) over a window sized to the upstroke's
  10-90 % rise (:func:`analysis.beats.upstroke_velocity`), widened on a noisy trace, and never
  wider than 0.9 x the dV/dt peak's own half-height width: fast upstrokes and narrow dV/dt
  peaks (1-3 ms) are not clipped, slow ones are not drowned in noise. Each beat also reports the
  estimate's standard uncertainty from the noise (``dvdt_max_sd_V_per_s``) and the peak's width
  (``dvdt_peak_width_ms``). Checked against the exact dV/dt of synthetic cells and of the
  DiFrancesco-Noble 1985 model (myokit); Savitzky & Golay 1964, Anal Chem 36:1627.
* MDP: the minimum of V smoothed over ``mdp_smoothing_ms`` (order 3): the raw minimum of a noisy
  trace lies about 2-3 noise rms below the true one. Its time (where DDR and DDR100 start) is
  the vertex of a parabola with its own curvature on each side, fitted to the trough within
  ``mdp_fit_band_mV`` of the MDP and kept where the noise leaves the minimum undecided
  (``mdp_time_method``; common practice, no source): on a flat trough the smoothed minimum's
  time wanders with the noise toward the flat, diastolic side, and the early DDR with it.
* No phase 4: a take-off less than ``no_phase4_min_mV`` (or 4 noise rms) above the MDP, or a
  straight line from MDP to TOP rising less than that, is no diastolic depolarisation (flag
  ``no_phase4``); TOP, DDR and DDR100 are left empty (common practice, no source).
* Take-off: a least-squares-slope dV/dt over ``top_derivative_window_ms``, widened on a noisy
  trace until its noise is ``top_noise_fraction`` of the criterion
  (:func:`analysis.signal.noise_matched_window_ms`).
* DDR: least squares on the unsmoothed samples (the fit itself averages the noise).
* APD crossings: V smoothed over ``repolarisation_smoothing_ms`` (order 3).
"""

from __future__ import annotations

import math
from dataclasses import dataclass
from typing import Sequence

import numpy as np

from analysis.beats._extrema import mdp_batch, peak_batch
from analysis.beats._marker_math import quartic_max as _quartic_max
from analysis.beats._marker_math import strided_mean as _strided_mean
from analysis.beats._mdp_time import mdp_band_mV, mdp_vertex_times, recorded_diastole
from analysis.columns import apd_name
from analysis.beats._repolarisation import first_crossings, refine_crossings
from analysis.beats._takeoff import PHASE4_COLUMNS, TakeoffSteps
from analysis.beats._upstroke import upstroke_velocity
from analysis.settings import MeasurementSettings
from analysis.signal import (
    moving_mean,
    noise_matched_window_ms,
    noise_rms_mV,
    parabolic_peak,
    poly_lsq,
    savgol_smooth,
    savgol_smooth_interior,
    window_samples,
)

__all__ = ["BeatMarkers", "measure_beats", "MARKER_FIELDS"]

#: Float marker arrays (one value per beat) that :func:`measure_beats` fills.
MARKER_FIELDS = (
    "t_upstroke_s", "t_dvdt_max_s", "dvdt_max_V_per_s", "peak_mV", "t_peak_s", "mdp_mV", "t_mdp_s",
    "top_mV", "t_top_s", "ddr_mV_per_s", "ddr100_mV_per_s", "ddr_early_mV_per_s", "ddr_late_mV_per_s",
    "ddr_tau_ms", "ddr_vinf_mV", "rise_ms", "rise_samples", "dvdt_window_ms",
    "dvdt_max_sd_V_per_s", "dvdt_peak_width_ms",
)


#: The top of a beat, for the peak's fit, lies within this many noise rms (and at least 0.5 mV)
#: of its smoothed maximum: wide enough to average the noise, narrow enough that a quartic still
#: follows a sharp top (4 gave the smallest bias over the synthetic presets with 0.3-1 mV of noise).
_TOP_BAND_NOISE = 4.0


@dataclass
class BeatMarkers:
    """Marker arrays of the beats measured by one call of :func:`measure_beats`."""

    values: dict[str, np.ndarray]
    i_upstroke: np.ndarray
    has_previous: np.ndarray
    flags: list[list[str]]

    def columns(self) -> dict[str, np.ndarray]:
        out = dict(self.values)
        out["i_upstroke"] = self.i_upstroke
        out["has_previous"] = self.has_previous
        return out

    def __len__(self) -> int:
        return len(self.i_upstroke)


def measure_beats(
    v_mV: np.ndarray,
    fs_hz: float,
    i_upstroke: Sequence[int],
    *,
    i_previous: Sequence[int] | None = None,
    i_next: Sequence[int] | None = None,
    settings: MeasurementSettings | None = None,
    noise_mV: float | None = None,
    sweep_end: bool = True,
    offset: int = 0,
) -> BeatMarkers:
    """Markers of beats in a stretch of one sweep.

    Parameters
    ----------
    v_mV : ndarray
        Membrane potential after LJP correction and any filtering, in mV.
    fs_hz : float
    i_upstroke : sequence of int
        Each beat's detected upstroke (indices into ``v_mV``), in time order.
    i_previous : sequence of int, optional
        The previous beat's upstroke for each beat, -1 when the beat is the first of its sweep;
        default: the previous entry of ``i_upstroke`` (-1 for the first).
    i_next : sequence of int, optional
        The next beat's upstroke, ``len(v_mV)`` when there is none; default: the next entry.
    settings : MeasurementSettings or None
    noise_mV : float or None
        White-noise rms of the sweep (None: estimated from ``v_mV``).
    sweep_end : bool
        Whether ``v_mV`` ends where the sweep ends (so an unfinished repolarisation is
        ``truncated``).
    offset : int
        Index of ``v_mV[0]`` in its sweep (for the times returned).

    Returns
    -------
    BeatMarkers
    """
    s = settings or MeasurementSettings()
    v = np.asarray(v_mV, dtype=np.float64)
    ups = np.asarray(i_upstroke, dtype=np.int64)
    k = ups.size
    prev = np.concatenate(([-1], ups[:-1])) if i_previous is None else np.array(i_previous, np.int64)
    nxt = np.concatenate((ups[1:], [v.size])) if i_next is None else np.asarray(i_next, np.int64)
    if noise_mV is None:
        noise_mV = noise_rms_mV(v)
    percents = sorted(set(s.apd_percent) | {20.0, 50.0, 90.0})
    vals = {name: np.full(k, np.nan) for name in MARKER_FIELDS}
    for p in percents:
        vals[f"t_{apd_name(p)}_s"] = np.full(k, np.nan)
    out_up = np.full(k, -1, dtype=np.int64)
    flags: list[list[str]] = [[] for _ in range(k)]
    ctx = _Context(v, fs_hz, s, noise_mV, offset)
    if offset == 0:
        # A sweep's first beat is measured from the diastole recorded before it, when whole.
        for b in np.flatnonzero(prev < 0):
            g0 = min(max(int(ups[b]), 0), v.size - 1)
            if recorded_diastole(v, g0, ctx.w_mdp, ctx.box_argmin(0, g0 + 1), noise_mV):
                prev[b] = 0
    # Each step that works on fixed windows around every beat takes all the beats at once
    # (analysis.beats._extrema, analysis.beats._repolarisation); the steps between go beat by beat.
    where = [ctx.locate(int(ups[b]), int(prev[b]), int(nxt[b]), sweep_end) for b in range(k)]
    g = np.array([w[0] for w in where], np.int64).reshape(k)
    nx = np.array([w[1] for w in where], np.int64).reshape(k)
    end = np.array([w[2] for w in where], np.int64).reshape(k)
    ip0 = np.array([w[3] for w in where], np.int64).reshape(k)
    i_mdp, mdp = ctx.mdps(prev, g)
    if s.mdp_time_method == "two_sided_fit":
        noise_band = mdp_band_mV(noise_mV, ctx.w_mdp)
        i_mdp = mdp_vertex_times(v, fs_hz, ctx.w_mdp, max(s.mdp_fit_band_mV, noise_band), i_mdp, mdp, prev, g + 1,
                                 noise_band_mV=noise_band)
    ctx.find_feet(g, prev, i_mdp)
    repol = []
    w_pk = np.ones(k, np.int64)
    for b in range(k):
        ctx.beat_index = b
        r, w_pk[b] = ctx.upstroke_and_takeoff(int(g[b]), int(prev[b]), int(ip0[b]), i_mdp[b], mdp[b])
        if r.pop("no_phase4", False):
            flags[b].append("no_phase4")
        for name, value in r.items():
            if name == "i_upstroke":
                out_up[b] = value + offset
            else:
                vals[name][b] = value
    i_peak, pv = ctx.peaks(g, end, ip0, w_pk)
    vals["peak_mV"], vals["t_peak_s"] = pv, i_peak / fs_hz
    for b in range(k):
        # Repolarisation: the levels' crossings are found for all beats together below.
        base = mdp[b] if prev[b] >= 0 else float(v[ctx.i_foot[b]])
        amp = pv[b] - base
        repol.append((int(ip0[b]), int(nx[b]) if nx[b] < v.size else v.size,
                      [pv[b] - p / 100.0 * amp for p in percents], amp, where[b][4]))
    if k:
        ip = np.array([x[0] for x in repol], np.int64)
        limit = np.array([x[1] for x in repol], np.int64)
        levels = np.array([x[2] for x in repol], np.float64).reshape(k, len(percents))
        amp = np.array([x[3] for x in repol], np.float64)
        crossings = first_crossings(v, fs_hz, ctx.w_rep, ip, limit, levels)
        if s.apd_crossing_method == "local_fit":
            m = len(percents)
            crossings = refine_crossings(
                v, fs_hz, crossings.ravel(), levels.ravel(), np.repeat(amp, m), np.repeat(ip, m), np.repeat(limit, m),
            ).reshape(k, m)
        deepest = percents.index(max(percents))
        for b in range(k):
            for p, x in zip(percents, crossings[b]):
                if prev[b] >= 0 and not math.isnan(x):
                    vals[f"t_{apd_name(p)}_s"][b] = x / fs_hz
            if repol[b][4] or (sweep_end and nxt[b] >= v.size and math.isnan(crossings[b, deepest])):
                flags[b].append("truncated")
            if prev[b] < 0:
                flags[b].insert(0, "no_diastole")
    t0 = offset / fs_hz
    for name in vals:
        if name.startswith("t_"):
            vals[name] = vals[name] + t0
    return BeatMarkers(vals, out_up, prev >= 0, flags)


class _Context(TakeoffSteps):
    """Per-call constants (windows in samples) and the per-beat marker steps."""

    def __init__(self, v: np.ndarray, fs: float, s: MeasurementSettings, noise_mV: float, offset: int = 0) -> None:
        self.v, self.fs, self.s, self.noise = v, fs, s, noise_mV
        self.n = v.size
        self.w_mdp = window_samples(s.mdp_smoothing_ms, fs, polyorder=3) if s.mdp_smoothing_ms > 0 else 1
        # V averaged over the MDP window, once for the whole stretch and at every q-th sample
        # (an eighth of the window: it moves little in between): where each diastole's minimum
        # lies, for the MDP and for the end of the peak's search. The samples averaged are those at
        # multiples of q in the sweep (``offset`` is ``v[0]``'s index there), so that a stretch
        # read from anywhere in the sweep sees the same averages.
        self.q_box = max(1, self.w_mdp // 8)
        self.q0 = -offset % self.q_box
        self.box_q = _strided_mean(v[self.q0:], self.w_mdp, self.q_box)
        top_ms = noise_matched_window_ms(
            noise_mV, fs, criterion_V_per_s=s.top_dvdt_V_per_s, fraction=s.top_noise_fraction,
            min_ms=s.top_derivative_window_ms, max_ms=max(s.top_derivative_max_window_ms, s.top_derivative_window_ms),
        )
        self.w_top = window_samples(top_ms, fs, polyorder=2)
        self.w_rep = window_samples(s.repolarisation_smoothing_ms, fs, polyorder=3) if s.repolarisation_smoothing_ms > 0 else 1
        self.w_d2 = window_samples(s.top_d2v_window_ms, fs, polyorder=3, minimum=5)
        self.search = int(round(0.2 * fs))  # how far back an upstroke's foot is looked for
        self._slopes: tuple | None = None
        self.i_foot: list[int] = []  # each beat's foot, in the order measured
        self.beat_index = 0
        self.solved = self.solved_top = np.zeros(0, bool)

    # -- helpers -----------------------------------------------------------------------------
    def t(self, i: float) -> float:
        return i / self.fs

    def box_argmin(self, a: int, b: int) -> int:
        """Index of the lowest MDP-window average of V in [a, b), to an eighth of the window."""
        q, q0 = self.q_box, self.q0
        ia, ib = -(-(a - q0) // q), -(-(b - q0) // q)
        if ib <= ia:
            return a
        return min(max(q0 + (ia + int(np.argmin(self.box_q[ia:ib]))) * q, a), b - 1)

    def smooth(self, a: int, b: int, w: int) -> tuple[np.ndarray, int]:
        """V smoothed over w samples on [a, b) (with context), and the index of its first sample."""
        h = w // 2
        lo, hi = max(0, a - 2 * h), min(self.n, b + 2 * h)
        seg = self.v[lo:hi]
        if w <= 1:
            return seg, lo
        edges = lo == 0 or hi == self.n  # elsewhere the context covers the filter's edges
        if w >= 31 and not edges:
            # A long window from running sums (the same numbers, a cost independent of it).
            return savgol_smooth_interior(seg, w), lo + h
        return savgol_smooth(seg, self.fs, window_ms=w / self.fs * 1e3, polyorder=3, edges=edges), lo

    def locate(self, g: int, prev: int, nxt: int, sweep_end: bool) -> tuple[int, int, int, int, bool]:
        """The upstroke, the next one, the end of the peak's search and the raw maximum of a beat.

        The peak window runs from the upstroke to the next diastole's minimum (or the data's
        end); the last flag says whether the sweep ends during the upstroke.
        """
        g = min(max(g, 0), self.n - 1)
        nxt = min(nxt, self.n)
        end = self.box_argmin(g, nxt) + 1 if nxt < self.n else self.n
        ip0 = g + int(np.argmax(self.v[g:end]))
        return g, nxt, end, ip0, sweep_end and nxt >= self.n and ip0 >= self.n - 2

    def mdps(self, prev: np.ndarray, g: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
        """(fractional index, value) of each beat's MDP between the previous upstroke and its own."""
        k = g.size
        i_mdp, mdp = np.full(k, np.nan), np.full(k, np.nan)
        has = np.flatnonzero(prev >= 0)
        if has.size == 0:
            return i_mdp, mdp
        if self.w_mdp > 1 and self.s.mdp_method == "smoothed_min":
            m0 = np.array([self.box_argmin(int(prev[b]), int(g[b]) + 1) for b in has], np.int64)
            idx, val, done = mdp_batch(self.v, self.w_mdp, m0, prev[has], g[has] + 1)
            i_mdp[has[done]], mdp[has[done]] = idx[done], val[done]
            has = has[~done]
        for b in has:
            i_mdp[b], mdp[b] = self.mdp(int(prev[b]), int(g[b]))
        return i_mdp, mdp

    def peaks(self, g: np.ndarray, end: np.ndarray, ip0: np.ndarray, w: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
        """(fractional index, value) of each beat's peak (:func:`analysis.beats.peak_batch`)."""
        delta = min(max(0.5, _TOP_BAND_NOISE * self.noise), 5.0)
        idx, val, done = peak_batch(self.v, self.fs, g, end, ip0, w, delta)
        for b in np.flatnonzero(~done):
            idx[b], val[b] = self.peak(int(g[b]), int(end[b]), int(ip0[b]), int(w[b]))
        return idx, val

    def upstroke_and_takeoff(self, g: int, prev: int, ip0: int, i_mdp: float, mdp: float) -> tuple[dict, int]:
        """The markers of one beat from its MDP to its upstroke, and the peak's smoothing window.

        The foot, dV/dt max and its time, the upstroke time, the take-off and the phase-4 fits.
        """
        v, s, fs = self.v, self.s, self.fs
        r: dict = {}
        if prev >= 0:
            r["mdp_mV"], r["t_mdp_s"] = mdp, self.t(i_mdp)
        else:
            i_mdp = math.nan
        # Foot of the upstroke: where the take-off dV/dt last rises through 10 % of its value here.
        lo = int(i_mdp) if not math.isnan(i_mdp) else max(0, g - self.search, prev + 1 if prev >= 0 else 0)
        self._slopes = None  # the take-off dV/dt before this upstroke, shared by foot and take-off
        b = self.beat_index
        if self.solved[b]:
            foot = float(self.feet[b])
        else:
            d_g, off = self.slope(g, g + 1)
            d_here = float(d_g[g - off])
            foot = self.last_below(0.1 * d_here, lo, g) if d_here > 0 else math.nan
        i_foot = int(foot) if not math.isnan(foot) else lo
        self.i_foot.append(i_foot)
        up = upstroke_velocity(
            v, fs, i_foot=i_foot, i_peak=ip0, method=s.dvdt_max_method, window_fraction=s.dvdt_max_window_fraction,
            min_window_ms=s.dvdt_max_min_window_ms, max_window_ms=s.dvdt_max_max_window_ms,
            noise_mV=self.noise, noise_fraction=s.dvdt_max_noise_fraction,
        )
        r["dvdt_max_V_per_s"] = up.dvdt_max_V_per_s
        r["t_dvdt_max_s"] = self.t(up.index)
        r["rise_ms"], r["rise_samples"], r["dvdt_window_ms"] = up.rise_ms, up.rise_samples, up.window_ms
        r["dvdt_max_sd_V_per_s"], r["dvdt_peak_width_ms"] = up.sd_V_per_s, up.peak_width_ms
        r["i_upstroke"] = int(round(up.index))
        # Upstroke time.
        if s.upstroke_time_method == "dvdt_max":
            r["t_upstroke_s"] = self.t(up.index)
        else:
            r["t_upstroke_s"] = self.t(self.level_crossing(s.upstroke_level_mV, i_foot, int(ip0)))
        # Take-off and phase 4.
        if prev >= 0:
            i_top = self.top(i_mdp, g, up)
            if not math.isnan(i_top):
                r["t_top_s"] = self.t(i_top)
                r["top_mV"] = self._top_value
                self.phase4(r, i_mdp, i_top)
                if self.lacks_phase4(i_mdp, mdp, i_top, self._top_value):
                    for name in PHASE4_COLUMNS:
                        r.pop(name, None)
                    r["no_phase4"] = True
        # The peak is smoothed as dV/dt max was (a quartic is then fitted near its top).
        w_pk = window_samples(up.window_ms, fs, polyorder=3, minimum=5) if up.window_ms > 0 else 1
        return r, w_pk

    def peak(self, g: int, end: int, ip0: int, w: int) -> tuple[float, float]:
        """(fractional index, value) of the maximum of V in [g, end) near ``ip0``.

        The top is where the smoothed V lies within ``max(0.5 mV, 4 x noise)`` of its maximum
        (looked for up to 20 ms from the raw maximum, which noise may have put anywhere on a flat
        top); a quartic is fitted there to the raw samples, so noise is averaged instead of its
        largest excursion being taken, and a sharp or asymmetric top is still followed.
        """
        delta = min(max(0.5, _TOP_BAND_NOISE * self.noise), 5.0)
        reach = max(3 * w, int(round(0.02 * self.fs)))
        a_full, b_full = max(g, ip0 - reach), min(end, ip0 + reach + 1)
        # Most tops are found within 10 ms: smooth that first, and the whole reach only when the
        # top runs to its edge or V outside it comes near the top.
        near = max(3 * w, int(round(0.01 * self.fs)))
        a, b = max(g, ip0 - near), min(end, ip0 + near + 1)
        for attempt in (0, 1):
            if attempt:
                a, b = a_full, b_full
            sm, off = self.smooth(a, b, w)
            seg = sm[a - off:b - off]
            j = int(np.argmax(seg))
            top = seg >= seg[j] - delta
            lo = j - (int(np.argmin(top[:j + 1][::-1])) if not top[:j + 1].all() else j)
            hi = j + (int(np.argmin(top[j:])) if not top[j:].all() else top.size - j)
            if (a, b) == (a_full, b_full):
                break
            outside = max(float(np.max(self.v[a_full:a])) if a > a_full else -np.inf,
                          float(np.max(self.v[b:b_full])) if b_full > b else -np.inf)
            if (lo > 0 or a == a_full) and (hi < seg.size or b == b_full) and outside < seg[j] - delta - 1.0:
                break
        po, pv = parabolic_peak(seg, j)
        if hi - lo >= 7:
            x = np.arange(lo, hi, dtype=np.float64) - j
            y = self.v[a + lo:a + hi]
            scale = max(hi - lo, 1)
            u = x / scale
            coef = poly_lsq(u, y, 4)
            top_at = _quartic_max(coef, x[0] / scale, x[-1] / scale, hi - lo)
            if top_at is not None:
                return a + j + top_at[0] * scale, top_at[1]
        return a + j + po, pv

    def mdp(self, prev: int, g: int) -> tuple[float, float]:
        """(fractional index, value) of the minimum of V between ``prev`` and ``g``."""
        v = self.v
        seg = v[prev:g + 1]
        if self.w_mdp <= 1:
            j = int(np.argmin(seg))
            return float(prev + j), float(seg[j])
        m0 = self.box_argmin(prev, g + 1)
        j0 = m0 - prev
        if self.s.mdp_method == "local_fit":
            h = self.w_mdp // 2
            a = max(0, prev - h)
            box = moving_mean(v[a:min(self.n, g + 1 + h)], self.w_mdp)[prev - a:prev - a + g + 1 - prev]
            j0 = int(np.argmin(box))
            fit = self.mdp_fit(box, prev, j0)
            if fit is not None:
                return fit
            m0 = prev + j0
        a, b = max(prev, m0 - 2 * self.w_mdp), min(g + 1, m0 + 2 * self.w_mdp + 1)
        sm, off = self.smooth(a, b, self.w_mdp)
        part = sm[a - off:b - off]
        j = int(np.argmin(part))
        po, val = parabolic_peak(-part, j)
        return a + j + po, -val

    def mdp_fit(self, box: np.ndarray, prev: int, j0: int) -> tuple[float, float] | None:
        """The minimum of a quartic fitted to the raw samples within ``mdp_fit_band_mV`` of it.

        The band holds many periods of mains hum and many noise samples wherever the diastolic
        minimum is broad, so both average out; where it is a sharp corner the band is short and
        the quartic follows it.
        """
        band = box <= box[j0] + self.s.mdp_fit_band_mV
        cap = int(round(0.2 * self.fs))
        lo = j0 - int(np.argmin(band[max(0, j0 - cap):j0 + 1][::-1])) if not band[max(0, j0 - cap):j0 + 1].all() else max(0, j0 - cap)
        right = band[j0:j0 + cap + 1]
        hi = j0 + (int(np.argmin(right)) if not right.all() else right.size)
        if hi - lo < 15:
            return None
        y = self.v[prev + lo:prev + hi]
        u = (np.arange(lo, hi, dtype=np.float64) - j0) / max(hi - lo, 1)
        coef = poly_lsq(u, y, 4)
        grid = np.linspace(u[0], u[-1], 8 * (hi - lo) + 1)
        val = np.polynomial.polynomial.polyval(grid, coef)
        k = int(np.argmin(val))
        return prev + j0 + float(grid[k]) * max(hi - lo, 1), float(val[k])

    def level_crossing(self, level: float, a: int, b: int) -> float:
        seg = self.v[a:b + 1]
        above = np.flatnonzero(seg >= level)
        if above.size == 0:
            return math.nan
        j = int(above[0])
        if j == 0:
            return float(a)
        y0, y1 = seg[j - 1], seg[j]
        return a + j - 1 + (level - y0) / (y1 - y0)
