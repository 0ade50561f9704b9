"""A hand-built trace and beat table with marker times known by construction (widget tests)."""

from __future__ import annotations

import numpy as np

from analysis.recording import Recording
from analysis.table import BeatTable

FS_HZ = 5000.0
CL_S = 0.8


def handmade(n_sweeps: int = 2, seconds: float = 8.0, seed: int = 1) -> tuple[Recording, BeatTable]:
    """Sawtooth-like beats every 0.8 s: a linear phase 4 from -60 mV, a step to +15 mV and an
    exponential repolarisation; the table's markers are where the shape puts them."""
    rng = np.random.default_rng(seed)
    t = np.arange(int(seconds * FS_HZ)) / FS_HZ
    ups = np.arange(0.5, seconds - 0.3, CL_S)
    phase = (t[:, None] - ups[None, :])
    v = np.full(t.size, -60.0)
    dia = (phase > -0.5) & (phase < 0)
    v += np.where(dia, 12.0 * (phase + 0.5) / 0.5, 0.0).sum(axis=1)
    rep = (phase >= 0) & (phase < 0.3)
    v += np.where(rep, 75.0 * np.exp(-np.clip(phase, 0, None) / 0.06), 0.0).sum(axis=1)
    data = np.stack([v + rng.normal(0, 0.2, v.size) for _ in range(n_sweeps)])
    rec = Recording.from_array(data, FS_HZ)
    cols: dict[str, list] = {k: [] for k in (
        "file", "sweep", "beat", "t_upstroke_s", "accepted", "flags", "condition", "cl_ms", "rate_bpm",
        "mdp_mV", "top_mV", "ddr_mV_per_s", "ddr100_mV_per_s", "dvdt_max_V_per_s", "peak_mV", "apa_mV",
        "apd20_ms", "apd50_ms", "apd90_ms", "t_mdp_s", "t_top_s", "t_peak_s", "t_apd20_s", "t_apd50_s",
        "t_apd90_s", "i_upstroke", "reject_reason")}
    for s in range(n_sweeps):
        for k, u in enumerate(ups):
            first = k == 0
            nan = float("nan")
            row = {
                "file": "handmade", "sweep": s, "beat": k, "t_upstroke_s": u, "accepted": 1,
                "flags": "no_diastole" if first else "", "condition": "",
                "cl_ms": nan if first else CL_S * 1e3, "rate_bpm": nan if first else 75.0,
                "mdp_mV": nan if first else -60.0, "top_mV": nan if first else -48.5,
                "ddr_mV_per_s": nan if first else 24.0, "ddr100_mV_per_s": nan,
                "dvdt_max_V_per_s": 300.0, "peak_mV": 15.0, "apa_mV": nan if first else 75.0,
                "apd20_ms": 13.4, "apd50_ms": 41.6, "apd90_ms": 138.0,
                "t_mdp_s": nan if first else u - 0.5, "t_top_s": nan if first else u - 0.025,
                "t_peak_s": u, "t_apd20_s": u + 0.0134, "t_apd50_s": u + 0.0416, "t_apd90_s": u + 0.138,
                "i_upstroke": int(round(u * FS_HZ)), "reject_reason": "",
            }
            for name, value in row.items():
                cols[name].append(value)
    return rec, BeatTable(cols)
