"""Hand-built membrane-potential traces whose parameters follow from their formulas.

A Gaussian beat ``V = base + A exp(-((t - c) / w)^2)`` has, exactly: peak ``base + A`` at ``c``;
dV/dt max ``A sqrt(2/e) / w`` at ``c - w / sqrt(2)``; V falls to ``peak - x/100 A`` at
``c + w sqrt(-ln(1 - x/100))``. A logistic upstroke ``base + A / (1 + exp(-(t - c) / tau))`` has
dV/dt max ``A / (4 tau)`` at ``c``. These are the checks' truths (by construction, from the
formulas; no other source).
"""

from __future__ import annotations

import math

import numpy as np
from scipy.special import expit


def gaussian_train(
    fs_hz: float, duration_s: float, *, cl_s: float = 0.5, first_s: float = 0.15, base_mV: float = -60.0,
    amp_mV: float = 80.0, width_s: float = 0.025,
) -> tuple[np.ndarray, np.ndarray]:
    """Samples and beat centres of a train of Gaussian beats (each beat's tail is negligible)."""
    t = np.arange(int(round(duration_s * fs_hz))) / fs_hz
    centres = np.arange(first_s, duration_s, cl_s)
    v = np.full(t.size, base_mV)
    for c in centres:
        sel = np.abs(t - c) < 8 * width_s
        v[sel] += amp_mV * np.exp(-(((t[sel] - c) / width_s) ** 2))
    return v, centres


def gaussian_truth(centre_s: float, *, amp_mV: float = 80.0, width_s: float = 0.025, base_mV: float = -60.0) -> dict:
    """Exact parameters of one Gaussian beat (APDs from the time of dV/dt max)."""
    t_up = centre_s - width_s / math.sqrt(2.0)
    out = {
        "t_upstroke_s": t_up,
        "dvdt_max_V_per_s": amp_mV * math.sqrt(2.0 / math.e) / width_s / 1000.0,
        "peak_mV": base_mV + amp_mV,
        "t_peak_s": centre_s,
    }
    for x in (20, 50, 90):
        out[f"apd{x}_ms"] = (centre_s + width_s * math.sqrt(-math.log(1 - x / 100.0)) - t_up) * 1e3
    return out


def gaussian_dvdt_V_per_s(t_s: np.ndarray, centre_s: float, *, amp_mV: float = 80.0, width_s: float = 0.025) -> np.ndarray:
    u = (t_s - centre_s) / width_s
    return amp_mV * (-2.0 * u / width_s) * np.exp(-u * u) / 1000.0


def pacemaker_train(
    fs_hz: float, duration_s: float, *, cl_s: float = 0.4, mdp_mV: float = -62.0, ddr_mV_per_s: float = 60.0,
    amp_mV: float = 50.0, dvdt_max_V_per_s: float = 2.0, repol_ms: float = 120.0, first_s: float = 0.3,
    phase4_tau_ms: float | None = None,
) -> tuple[np.ndarray, np.ndarray]:
    """A nodal-like train: linear phase 4, logistic upstroke, smooth repolarisation to the MDP.

    Each cycle: from the MDP V rises linearly at ``ddr_mV_per_s``; the upstroke (logistic,
    amplitude ``amp_mV`` above the take-off, dV/dt max as given) is centred on each beat time;
    repolarisation back to the MDP is a raised cosine of ``repol_ms``. With ``phase4_tau_ms`` the
    phase 4 is ``MDP + DDR tau (1 - exp(-t / tau))`` instead (initial slope DDR). Returns samples
    and beat times (upstroke centres).
    """
    t = np.arange(int(round(duration_s * fs_hz))) / fs_hz
    beats = np.arange(first_s, duration_s, cl_s)
    tau = amp_mV / (4.0 * dvdt_max_V_per_s * 1000.0)
    repol = repol_ms * 1e-3
    v = np.full(t.size, mdp_mV, dtype=np.float64)
    for c in beats:
        start = c - cl_s + repol + 10 * tau  # end of the previous repolarisation
        seg = (t >= start) & (t < c + 10 * tau)
        up = amp_mV * expit((t[seg] - c) / tau)
        v[seg] = _phase4(t[seg] - start, mdp_mV, ddr_mV_per_s, phase4_tau_ms) + up
        peak = float(_phase4(np.array([c + 10 * tau - start]), mdp_mV, ddr_mV_per_s, phase4_tau_ms)[0]) + amp_mV
        rs = (t >= c + 10 * tau) & (t < c + 10 * tau + repol)
        ph = (t[rs] - (c + 10 * tau)) / repol
        v[rs] = mdp_mV + (peak - mdp_mV) * 0.5 * (1 + np.cos(np.pi * ph))
    return v, beats


def _phase4(dt_s: np.ndarray, mdp_mV: float, ddr: float, tau_ms: float | None) -> np.ndarray:
    dt = np.clip(dt_s, 0, None)
    if tau_ms is None:
        return mdp_mV + ddr * dt
    tau = tau_ms * 1e-3
    return mdp_mV + ddr * tau * (1.0 - np.exp(-dt / tau))
