"""The parametric beat model behind :mod:`analysis.synthetic._cells`: a smooth waveform with exact dV/dt.

One beat is three pieces joined with continuous V and dV/dt (and, except at the MDP, continuous
d2V/dt2), so every marker the analysis looks for exists exactly:

* **phase 4 + foot**, from the MDP to the time of dV/dt max: a ramp whose slope rises from zero at
  the MDP, ``A (1 - exp(-s / tau1))`` (tau1 chosen so that d2V/dt2 is continuous there), plus a logistic foot ``H sigmoid((t - t_up) / w)``. The
  foot's exponential acceleration is what a take-off criterion (0.5 V/s) catches; ``w`` is solved
  so that the criterion is met exactly at the requested TOP.
* **late upstroke**, from dV/dt max to the peak: ``dV/dt = G (1 - u^2)^2`` on ``u = (t - t_up) / L``,
  which starts at the set dV/dt max ``G`` with zero curvature and reaches the peak with zero slope.
* **repolarisation**, from the peak to the next MDP: ``V = peak - (peak - MDP_next) F(theta)``,
  where ``F`` is a weighted sum of smooth steps (:class:`Bump`) over ``theta = tau / D`` in [0, 1].
  The bumps give a phase-1 notch, a phase-2 plateau and phase 3; their shape fixes APD50/APD20 once
  APD90 is set, and ``D`` is solved so that APD90 is met exactly.

Sub-threshold depolarisations (DADs) and early afterdepolarisations (EADs) are pairs of smooth
steps added on top (a rise, then a fall of the same size). A seal-trouble shunt pulls V toward
0 mV by a smooth fraction; drift adds a linear slope. All of it has closed-form values and
derivatives, evaluated with numpy over whole arrays of times.
"""

from __future__ import annotations

from dataclasses import dataclass
from typing import Sequence

import numpy as np
from scipy.special import expit

__all__ = [
    "Bump",
    "RepolarisationShape",
    "BeatTrain",
    "TOP_CRITERION_MV_PER_S",
    "smooth_window",
]

#: The take-off criterion the foot is solved for (MEASUREMENTS.md default: 0.5 V/s).
TOP_CRITERION_MV_PER_S = 500.0

_TWO_PI = 2.0 * np.pi


@dataclass(frozen=True)
class Bump:
    """One smooth step of the repolarisation, as a share of the fall from peak to the next MDP.

    Attributes
    ----------
    weight : float
        Share of the fall (the weights of a shape are normalised to sum to 1). Negative values
        make a re-rise, as in the dome after a phase-1 notch.
    start, stop : float
        Where the step runs, as fractions of the repolarisation time ``D`` (0 is the peak,
        1 the next MDP).
    end : str
        ``"cosine"``: dV/dt is a raised cosine (zero slope and curvature at both ends).
        ``"tail"``: dV/dt is ``12 u^2 (1 - u)``, which ends with finite curvature so that the
        MDP is a clear minimum rather than a flat stretch.
    """

    weight: float
    start: float
    stop: float
    end: str = "cosine"

    def __post_init__(self) -> None:
        if not (0.0 <= self.start < self.stop <= 1.0):
            raise ValueError(f"a bump must satisfy 0 <= start < stop <= 1, not {self.start}, {self.stop}")
        if self.end not in ("cosine", "tail"):
            raise ValueError(f"bump end must be 'cosine' or 'tail', not {self.end!r}")


def _step(u: np.ndarray, end: str, derivative: bool = True) -> tuple[np.ndarray, np.ndarray | None]:
    """A smooth step from 0 to 1 on u in [0, 1] and its derivative in u (clipped outside)."""
    u = np.clip(u, 0.0, 1.0)
    if end == "cosine":
        s = u - np.sin(_TWO_PI * u) / _TWO_PI
        return s, (1.0 - np.cos(_TWO_PI * u)) if derivative else None
    u2 = u * u
    return u2 * u * (4.0 - 3.0 * u), (12.0 * u2 * (1.0 - u)) if derivative else None


class RepolarisationShape:
    """The normalised fall ``F(theta)`` of one repolarisation, and where it crosses each level.

    Parameters
    ----------
    bumps : sequence of Bump
        The components; the last one to finish must finish at 1 with a positive weight so that
        V approaches the MDP from above.
    """

    _GRID = 20001

    def __init__(self, bumps: Sequence[Bump]) -> None:
        total = sum(b.weight for b in bumps)
        if not bumps or total <= 0:
            raise ValueError("a repolarisation needs bumps whose weights sum to a positive number")
        self.bumps = tuple(Bump(b.weight / total, b.start, b.stop, b.end) for b in bumps)
        theta = np.linspace(0.0, 1.0, self._GRID)
        fall, slope = self.fall(theta)
        remaining = 1.0 - fall
        if remaining.max() > 1.0 + 1e-12 or remaining.min() < -1e-12:
            raise ValueError("the repolarisation shape rises above the peak or falls below the MDP")
        if not (slope[-200:-1] > 0).all():
            raise ValueError("the repolarisation shape must still be falling as it reaches the MDP")
        self._theta = theta
        # The first time each level is reached is where the running minimum reaches it.
        self._running_min = np.minimum.accumulate(remaining)

    def end_curvature(self) -> float:
        """``-d2F/dtheta2`` at theta = 1: how sharply the fall arrives at the MDP."""
        return float(sum(12.0 * b.weight / (b.stop - b.start) ** 2 for b in self.bumps
                         if b.end == "tail" and b.stop == 1.0))

    def fall(self, theta: np.ndarray, derivative: bool = True) -> tuple[np.ndarray, np.ndarray | None]:
        """``F(theta)`` and ``dF/dtheta``: share of the fall done by ``theta``."""
        theta = np.asarray(theta, dtype=float)
        f = np.zeros_like(theta)
        df = np.zeros_like(theta) if derivative else None
        for b in self.bumps:
            span = b.stop - b.start
            u = (theta - b.start) / span
            done = u >= 1.0
            f[done] += b.weight
            part = np.flatnonzero((u > 0.0) & ~done)
            s, ds = _step(u[part], b.end, derivative)
            f[part] += b.weight * s
            if derivative:
                df[part] += (b.weight / span) * ds
        return f, df

    def first_reach(self, remaining: np.ndarray) -> np.ndarray:
        """The first ``theta`` at which ``1 - F`` has fallen to each level in ``remaining``."""
        rm = self._running_min
        idx = np.searchsorted(-rm, -np.asarray(remaining, dtype=float), side="left")
        idx = np.clip(idx, 1, len(rm) - 1)
        lo, hi = rm[idx - 1], rm[idx]
        frac = np.where(hi < lo, (lo - np.asarray(remaining)) / np.where(hi < lo, lo - hi, 1.0), 0.0)
        return self._theta[idx - 1] + np.clip(frac, 0.0, 1.0) * (self._theta[idx] - self._theta[idx - 1])


def smooth_window(t_s: np.ndarray, start_s: float, stop_s: float, ramp_s: float) -> tuple[np.ndarray, np.ndarray]:
    """A 0-to-1 window with raised-cosine edges, and its time derivative (1/s)."""
    t = np.asarray(t_s, dtype=float)
    ramp = max(ramp_s, 1e-9)
    up_s, up_d = _step((t - start_s) / ramp, "cosine")
    down_s, down_d = _step((t - stop_s) / ramp, "cosine")
    return up_s - down_s, (up_d - down_d) / ramp


@dataclass
class _Events:
    """Pairs of smooth steps (rise then fall, same size) laid on the cell's own voltage."""

    start_s: np.ndarray
    split_s: np.ndarray
    stop_s: np.ndarray
    amplitude_mV: np.ndarray


class BeatTrain:
    """A solved train of beats: every beat's timing and shape, and the voltage they make.

    Built by :func:`analysis.synthetic.synthesize`; use :meth:`evaluate` for V and dV/dt at any
    times. Per-beat arrays (one entry per beat ``k``) are in seconds and mV; ``mdp_mV`` has one
    entry more (the MDP after the last beat).
    """

    def __init__(
        self,
        *,
        t_first_mdp_s: float,
        cl_s: np.ndarray,
        mdp_mV: np.ndarray,
        top_mV: np.ndarray,
        peak_mV: np.ndarray,
        dvdt_max_mV_per_s: np.ndarray,
        apd90_s: np.ndarray,
        upstroke_fraction: float,
        phase4_onset_s: float | None,
        shape: RepolarisationShape,
        phase4_factor: np.ndarray | float = 1.0,
        foot_s: float = 0.0,
        foot_dvdt_mV_per_s: float = 0.0,
        events: _Events | None = None,
        drift_mV_per_s: float = 0.0,
        shunts: Sequence[tuple[float, float, float, float]] = (),
    ) -> None:
        cl_s = np.asarray(cl_s, float)
        n = len(cl_s)
        self.n = n
        self.shape = shape
        # The slope of phase 4 builds up from zero at the MDP with time constant tau1. None
        # matches the curvature on both sides of the MDP (d2V/dt2 continuous, so the MDP is a
        # smooth, round minimum); it is solved with the foot below.
        self._matched_onset = phase4_onset_s is None
        self.tau1_s = np.full(n, 0.01 if phase4_onset_s is None else float(phase4_onset_s))
        # An optional slow foot: a second, wider logistic centred on the upstroke, so that late
        # diastole accelerates over tens of ms as in nodal cells rather than only in the upstroke.
        self.w2_s = float(foot_s) if foot_s > 0 else 1.0
        self.h2_mV = 4.0 * self.w2_s * float(foot_dvdt_mV_per_s) if foot_s > 0 else 0.0
        if self.h2_mV and foot_dvdt_mV_per_s >= 0.8 * TOP_CRITERION_MV_PER_S:
            raise ValueError("the slow foot must stay below the take-off criterion (0.4 V/s at most)")
        self.mdp_mV = np.asarray(mdp_mV, float)
        self.peak_mV = np.asarray(peak_mV, float)
        self.top_mV = np.asarray(top_mV, float)
        g = np.asarray(dvdt_max_mV_per_s, float)
        self.g_mV_per_s = g
        if (g < 4 * TOP_CRITERION_MV_PER_S).any():
            raise ValueError("dV/dt max must be at least 2 V/s for a take-off at 0.5 V/s")
        if len(self.mdp_mV) != n + 1:
            raise ValueError("mdp_mV needs one entry per beat plus the MDP after the last beat")
        self.v_up_mV = self.top_mV + upstroke_fraction * (self.peak_mV - self.top_mV)
        if not ((self.mdp_mV[:-1] < self.top_mV) & (self.top_mV < self.v_up_mV) & (self.v_up_mV < self.peak_mV)).all():
            raise ValueError("each beat needs MDP < TOP < peak")
        self.l_s = 15.0 * (self.peak_mV - self.v_up_mV) / (8.0 * g)
        # APD90 level as a remaining share of this beat's own fall (peak to the next MDP).
        level = self.peak_mV - 0.9 * (self.peak_mV - self.mdp_mV[:-1])
        remaining = (level - self.mdp_mV[1:]) / (self.peak_mV - self.mdp_mV[1:])
        if (remaining <= 0).any():
            raise ValueError("the next MDP is too far above this one for a 90 % repolarisation")
        kappa = shape.first_reach(remaining)
        self.d_s = (np.asarray(apd90_s, float) - self.l_s) / kappa
        if (self.d_s <= 0).any():
            raise ValueError("APD90 is shorter than the upstroke")
        # Diastole of beat k is what its cycle leaves after beat k-1's action potential; a
        # phase-4 factor above 1 steepens it (shorter diastole), below 1 flattens it.
        prev_ap = np.concatenate([[self.l_s[0] + self.d_s[0]], (self.l_s + self.d_s)[:-1]])
        self.t4_s = (cl_s - prev_ap) / np.broadcast_to(np.asarray(phase4_factor, float), (n,))
        if (self.t4_s <= 0).any() or (self.t4_s < 3 * self.tau1_s).any() and not self._matched_onset:
            raise ValueError(
                "the cycle length leaves too little diastole for the action potential: "
                "lengthen CL or shorten APD90"
            )
        t_mdp = np.empty(n + 1)
        t_mdp[0] = t_first_mdp_s
        t_mdp[1:] = t_first_mdp_s + np.cumsum(self.t4_s + self.l_s + self.d_s)
        self.t_mdp_s = t_mdp
        self.t_up_s = t_mdp[:-1] + self.t4_s
        self.t_peak_s = self.t_up_s + self.l_s
        edges = np.empty(3 * n + 1)
        edges[0:-1:3], edges[1:-1:3], edges[2:-1:3], edges[-1] = t_mdp[:-1], self.t_up_s, self.t_peak_s, t_mdp[-1]
        if not (np.diff(edges) > 0).all():
            raise ValueError("beat phases overlap; check CL, APD90 and dV/dt max")
        self.edges_s = edges
        self._solve_foot()
        self.events = events or _Events(*(np.zeros(0) for _ in range(4)))
        self.drift_mV_per_s = float(drift_mV_per_s)
        self.shunts = tuple(shunts)

    # -- the foot ---------------------------------------------------------------------------------
    @staticmethod
    def _ramp(s: np.ndarray, tau: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
        e = np.exp(-s / tau)
        return s - tau * (1.0 - e), 1.0 - e

    def _mdp_curvature(self) -> np.ndarray:
        """d2V/dt2 (mV/s^2) with which each beat's preceding repolarisation arrives at its MDP."""
        end = self.shape.end_curvature()
        drop = np.concatenate([[self.peak_mV[0] - self.mdp_mV[0]], self.peak_mV[:-1] - self.mdp_mV[1:-1]])
        d = np.concatenate([[self.d_s[0]], self.d_s[:-1]])
        return end * drop / d**2

    def _coefficients(self, w: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
        """Ramp slope A and foot height H that meet V and dV/dt at the time of dV/dt max."""
        r, dr = self._ramp(self.t4_s, self.tau1_s)
        sm = expit(-self.t4_s / w)
        sm2 = expit(-self.t4_s / self.w2_s)
        rise = self.v_up_mV - self.mdp_mV[:-1] - self.h2_mV * (0.5 - sm2)
        g = self.g_mV_per_s - self.h2_mV / (4.0 * self.w2_s)
        det = r / (4.0 * w) - (0.5 - sm) * dr
        a = (rise / (4.0 * w) - (0.5 - sm) * g) / det
        h = (r * g - dr * rise) / det
        return a, h

    def _phase4(self, k: np.ndarray, t: np.ndarray, w=None, a=None, h=None, derivative: bool = True):
        w = self.w_s[k] if w is None else w
        a = self.a_mV_per_s[k] if a is None else a
        h = self.h_mV[k] if h is None else h
        s = t - self.t_mdp_s[k]
        r, dr = self._ramp(s, self.tau1_s[k])
        v = self.mdp_mV[k] + a * r
        dv = a * dr if derivative else None
        for height, width in ((h, w), (self.h2_mV, self.w2_s)):
            if np.ndim(height) == 0 and height == 0:
                continue
            x = (t - self.t_up_s[k]) / width
            # Far from the upstroke a logistic is below 1e-15 of its height: only its constant
            # offset matters there, and skipping the exponential saves most of the work.
            near = np.flatnonzero(x > -36.0)
            sig = np.zeros_like(x)
            sig[near] = expit(x[near])
            v = v + height * (sig - expit(-self.t4_s[k] / width))
            if derivative:
                dv = dv + height * sig * (1.0 - sig) / width
        return v, dv

    def _solve_foot(self) -> None:
        """Width of the foot so that dV/dt crosses the criterion exactly at the requested TOP."""
        c = TOP_CRITERION_MV_PER_S
        g = self.g_mV_per_s
        sig_c = 0.5 * (1.0 - np.sqrt(1.0 - c / g))
        w = (self.v_up_mV - self.top_mV) / (4.0 * g * (0.5 - sig_c))
        k = np.arange(self.n)
        curvature = self._mdp_curvature() if self._matched_onset else None
        for _ in range(10):
            a, h = self._coefficients(w)
            if (a <= 0).any() or (h <= 0).any():
                raise ValueError("TOP is too close to the MDP for this upstroke: lower the MDP or raise TOP")
            if curvature is not None:
                self.tau1_s = a / curvature
                a, h = self._coefficients(w)
            lo, hi = self.t_mdp_s[:-1].copy(), self.t_up_s.copy()
            for _ in range(60):
                mid = 0.5 * (lo + hi)
                above = self._phase4(k, mid, w, a, h)[1] >= c
                hi = np.where(above, mid, hi)
                lo = np.where(above, lo, mid)
            v_top = self._phase4(k, hi, w, a, h)[0]
            w = w * (self.v_up_mV - self.top_mV) / (self.v_up_mV - v_top)
        self.w_s = w
        self.a_mV_per_s, self.h_mV = self._coefficients(w)
        if (self.t4_s / w < 40).any():
            raise ValueError("the diastole is too short for this slow an upstroke")
        if (self.t4_s < 3 * self.tau1_s).any():
            raise ValueError(
                "the cycle length leaves too little diastole for the action potential: "
                "lengthen CL or shorten APD90"
            )

    # -- evaluation -------------------------------------------------------------------------------
    def _piece(self, piece: int, k, tt: np.ndarray, derivative: bool):
        """V and dV/dt of one phase (0 phase 4, 1 late upstroke, 2 repolarisation) of beats k."""
        if piece == 0:
            return self._phase4(k, tt, derivative=derivative)
        if piece == 1:
            lk, gk = self.l_s[k], self.g_mV_per_s[k]
            u = (tt - self.t_up_s[k]) / lk
            u2 = u * u
            vv = self.v_up_mV[k] + gk * lk * u * (1.0 - 2.0 * u2 / 3.0 + u2 * u2 / 5.0)
            return vv, (gk * (1.0 - u2) ** 2 if derivative else None)
        dk = self.d_s[k]
        drop = self.peak_mV[k] - self.mdp_mV[k + 1]
        f, df = self.shape.fall((tt - self.t_peak_s[k]) / dk, derivative)
        return self.peak_mV[k] - drop * f, (-drop * df / dk if derivative else None)

    def cell_voltage(
        self, t_s: np.ndarray, *, derivative: bool = True, assume_sorted: bool = False,
    ) -> tuple[np.ndarray, np.ndarray | None]:
        """The cell's own V (mV) and dV/dt (mV/s) before drift and shunts.

        ``assume_sorted`` promises a 1-D array of increasing times (a sweep's samples): each
        phase is then a contiguous slice worked with its beat's scalars, about twice as fast.
        """
        t = np.asarray(t_s, dtype=float)
        flat = t.reshape(-1)
        v = np.empty_like(flat)
        dv = np.zeros_like(flat) if derivative else None
        last = 3 * self.n
        if assume_sorted:
            bounds = np.searchsorted(flat, self.edges_s, side="left")
            v[:bounds[0]] = self.mdp_mV[0]
            v[bounds[-1]:] = self.mdp_mV[-1]
            for j in np.flatnonzero(bounds[1:] > bounds[:-1]):
                i0, i1 = bounds[j], bounds[j + 1]
                k, piece = divmod(int(j), 3)
                vv, dd = self._piece(piece, k, flat[i0:i1], derivative)
                v[i0:i1] = vv
                if derivative:
                    dv[i0:i1] = dd
        else:
            j = np.searchsorted(self.edges_s, flat, side="right") - 1
            outside = (j < 0) | (j >= last)
            v[j < 0] = self.mdp_mV[0]
            v[j >= last] = self.mdp_mV[-1]
            for piece in (0, 1, 2):
                sel = np.flatnonzero(~outside & (j % 3 == piece))
                if sel.size:
                    vv, dd = self._piece(piece, j[sel] // 3, flat[sel], derivative)
                    v[sel] = vv
                    if derivative:
                        dv[sel] = dd
        self._add_events(flat, v, dv)
        return v.reshape(t.shape), (dv.reshape(t.shape) if derivative else None)

    def _add_events(self, t: np.ndarray, v: np.ndarray, dv: np.ndarray | None) -> None:
        ev = self.events
        if ev.start_s.size == 0:
            return
        j = np.searchsorted(ev.start_s, t, side="right") - 1
        sel = np.flatnonzero((j >= 0) & (t < ev.stop_s[np.maximum(j, 0)]))
        if sel.size == 0:
            return
        j = j[sel]
        tt = t[sel]
        amp = ev.amplitude_mV[j]
        rise = ev.split_s[j] - ev.start_s[j]
        fall = ev.stop_s[j] - ev.split_s[j]
        s1, d1 = _step((tt - ev.start_s[j]) / rise, "cosine", dv is not None)
        s2, d2 = _step((tt - ev.split_s[j]) / fall, "cosine", dv is not None)
        v[sel] += amp * (s1 - s2)
        if dv is not None:
            dv[sel] += amp * (d1 / rise - d2 / fall)

    def evaluate(
        self, t_s: np.ndarray, *, derivative: bool = True, assume_sorted: bool = False,
    ) -> tuple[np.ndarray, np.ndarray | None]:
        """Membrane potential (mV) and its exact derivative (mV/s) at the given times (s).

        Drift and seal-trouble shunts are included; noise, hum and electrical artefacts, which
        belong to the recording rather than the cell, are not. ``assume_sorted``: see
        :meth:`cell_voltage`.
        """
        v, dv = self.cell_voltage(t_s, derivative=derivative, assume_sorted=assume_sorted)
        t = np.asarray(t_s, dtype=float)
        for start, stop, ramp, fraction in self.shunts:
            s, ds = smooth_window(t, start, stop, ramp)
            if derivative:
                dv = dv * (1.0 - fraction * s) - fraction * ds * v
            v = v * (1.0 - fraction * s)
        if self.drift_mV_per_s:
            v = v + self.drift_mV_per_s * t
            if derivative:
                dv = dv + self.drift_mV_per_s
        return v, dv
