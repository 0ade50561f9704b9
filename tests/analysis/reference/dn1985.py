"""The DiFrancesco & Noble 1985 Purkinje-fibre model as an exact reference for the measurements.

DiFrancesco D, Noble D (1985) A model of cardiac electrical activity incorporating ionic pumps and
concentration changes. Phil Trans R Soc Lond B 307:353-398. The model ships with myokit as
``myokit/tests/data/dn-1985-normalised.mmt`` (time in ms); it beats spontaneously. myokit's
Simulation (CVODES) integrates it; the model's own ``dot(membrane.V)`` is the exact dV/dt.

The truth here is a deliberately plain, loop-per-beat implementation of MEASUREMENTS.md's
definitions on the dense solution, written apart from the analysis core and from
``analysis.synthetic._truth`` so that neither checks itself.
"""

from __future__ import annotations

import hashlib
from pathlib import Path

import numpy as np

#: What is simulated: pre-run to a steady rhythm, then logged at 100 kHz.
PRERUN_MS = 100_000.0
LOG_MS = 24_000.0
LOG_INTERVAL_MS = 0.01
TOLERANCE = (1e-9, 1e-9)  # CVODES absolute and relative tolerance
MODEL_FILE = "dn-1985-normalised.mmt"
TOP_CRITERION_V_PER_S = 0.5


def cache_key(model_path: Path) -> str:
    """A name for the cached solution that changes when the model, myokit or the run changes."""
    import myokit

    h = hashlib.sha256(model_path.read_bytes())
    h.update(f"{myokit.__version__}|{PRERUN_MS}|{LOG_MS}|{LOG_INTERVAL_MS}|{TOLERANCE}".encode())
    return h.hexdigest()[:16]


def simulate(model_path: Path) -> dict[str, np.ndarray]:
    """The model's steady spontaneous rhythm: time (s), V (mV) and its own dV/dt (V/s).

    dot(membrane.V) is in mV/ms, which is V/s.
    """
    import myokit

    model, _protocol, _script = myokit.load(str(model_path))
    sim = myokit.Simulation(model)  # no protocol: no stimulus, the model beats by itself
    sim.set_tolerance(*TOLERANCE)
    sim.pre(PRERUN_MS)
    log = sim.run(
        LOG_MS, log=["engine.time", "membrane.V", "dot(membrane.V)"], log_interval=LOG_INTERVAL_MS,
    )
    t_ms = np.asarray(log["engine.time"], dtype=float)
    return {
        "t_s": (t_ms - t_ms[0]) / 1000.0,
        "v_mV": np.asarray(log["membrane.V"], dtype=float),
        "dvdt_V_per_s": np.asarray(log["dot(membrane.V)"], dtype=float),
    }


def load_or_simulate(model_path: Path, cache_dir: Path | None) -> dict[str, np.ndarray]:
    """The simulated rhythm, from an .npz cache when one for this exact run exists."""
    if cache_dir is not None:
        cached = cache_dir / f"dn1985-{cache_key(model_path)}.npz"
        if cached.is_file():
            with np.load(cached, allow_pickle=False) as z:
                return {k: z[k] for k in z.files}
    solution = simulate(model_path)
    if cache_dir is not None:
        cache_dir.mkdir(parents=True, exist_ok=True)
        tmp = cached.with_suffix(".tmp.npz")
        np.savez(tmp, **solution)
        tmp.replace(cached)
    return solution


def _vertex(x: np.ndarray, y: np.ndarray, i: int) -> tuple[float, float]:
    """Position and value of the parabola through three samples around index i."""
    if i <= 0 or i >= len(y) - 1:
        return float(x[i]), float(y[i])
    y0, y1, y2 = y[i - 1], y[i], y[i + 1]
    denom = y0 - 2 * y1 + y2
    if denom == 0:
        return float(x[i]), float(y1)
    p = 0.5 * (y0 - y2) / denom
    h = x[i + 1] - x[i]
    return float(x[i] + p * h), float(y1 - 0.25 * (y0 - y2) * p)


def _crossing(x: np.ndarray, y: np.ndarray, i: int, level: float) -> float:
    """Linear interpolation of where y passes level between samples i and i + 1."""
    return float(x[i] + (level - y[i]) / (y[i + 1] - y[i]) * (x[i + 1] - x[i]))


def _slope(t: np.ndarray, v: np.ndarray) -> float:
    tm, vm = t.mean(), v.mean()
    return float(np.sum((t - tm) * (v - vm)) / np.sum((t - tm) ** 2))


def window_in_diastole(sol: dict[str, np.ndarray], n_beats: int) -> tuple[float, float]:
    """A stretch that starts and ends in mid-diastole and holds ``n_beats`` upstrokes."""
    t, v, dv = sol["t_s"], sol["v_mV"], sol["dvdt_V_per_s"]
    ups = upstroke_indices(dv)
    mids = []
    for a, b in zip(ups[:-1], ups[1:]):
        i_min = a + int(np.argmin(v[a:b]))
        mids.append(0.5 * (t[i_min] + t[b]))
    if len(mids) < n_beats + 1:
        raise ValueError("the simulation holds too few beats")
    return mids[0], mids[n_beats]


def upstroke_indices(dvdt_V_per_s: np.ndarray, threshold_V_per_s: float = 10.0) -> list[int]:
    """Index of the largest dV/dt in each run above the threshold (one per action potential)."""
    above = (dvdt_V_per_s > threshold_V_per_s).astype(np.int8)
    step = np.diff(np.r_[0, above, 0])
    starts, ends = np.flatnonzero(step == 1), np.flatnonzero(step == -1)
    return [int(s + np.argmax(dvdt_V_per_s[s:e])) for s, e in zip(starts, ends)]


def truth(sol: dict[str, np.ndarray], start_s: float, stop_s: float) -> list[dict[str, float]]:
    """Every beat's parameters by MEASUREMENTS.md's definitions, on the dense solution.

    Times are from ``start_s``. The first beat has no preceding diastole in the window, so its
    MDP, TOP, DDR, DDR100, APA, APDs and CL are NaN, as the definitions say.
    """
    keep = (sol["t_s"] >= start_s) & (sol["t_s"] < stop_s)
    t = sol["t_s"][keep] - start_s
    v = sol["v_mV"][keep]
    dv = sol["dvdt_V_per_s"][keep]
    ups = upstroke_indices(dv)
    nan = float("nan")
    beats: list[dict[str, float]] = []
    for n, iu in enumerate(ups):
        beat: dict[str, float] = {}
        # t_upstroke and dV/dt max: the maximum of dV/dt in phase 0
        beat["t_upstroke_s"], beat["dvdt_max_V_per_s"] = _vertex(t, dv, iu)
        # peak: maximum V after the upstroke, before the next beat's diastole
        i_next = ups[n + 1] if n + 1 < len(ups) else len(v) - 1
        ip = iu + int(np.argmax(v[iu:i_next]))
        beat["t_peak_s"], beat["peak_mV"] = _vertex(t, v, ip)
        for key in ("mdp_mV", "t_mdp_s", "top_mV", "t_top_s", "ddr_mV_per_s", "ddr100_mV_per_s",
                    "apa_mV", "apd20_ms", "apd50_ms", "apd90_ms", "cl_ms"):
            beat[key] = nan
        if n > 0:
            # MDP: minimum V between the previous beat's peak and this upstroke
            i_prev_peak = ups[n - 1] + int(np.argmax(v[ups[n - 1]:iu]))
            im = i_prev_peak + int(np.argmin(v[i_prev_peak:iu]))
            beat["t_mdp_s"], beat["mdp_mV"] = _vertex(t, v, im)
            # TOP: V at the last upward crossing of dV/dt through 0.5 V/s before the upstroke
            i = iu
            while i > im and dv[i - 1] >= TOP_CRITERION_V_PER_S:
                i -= 1
            t_top = _crossing(t, dv, i - 1, TOP_CRITERION_V_PER_S)
            beat["t_top_s"] = t_top
            beat["top_mV"] = float(np.interp(t_top, t[i - 1:i + 1], v[i - 1:i + 1]))
            # DDR: least-squares slope of V over [t_MDP, t_TOP]; DDR100: first 100 ms
            span = (t >= beat["t_mdp_s"]) & (t <= t_top)
            beat["ddr_mV_per_s"] = _slope(t[span], v[span])
            if t_top >= beat["t_mdp_s"] + 0.1:
                first = (t >= beat["t_mdp_s"]) & (t <= beat["t_mdp_s"] + 0.1)
                beat["ddr100_mV_per_s"] = _slope(t[first], v[first])
            beat["apa_mV"] = beat["peak_mV"] - beat["mdp_mV"]
            # APDx: upstroke to the first time after the peak at which V <= peak - x/100 APA
            for x in (20, 50, 90):
                level = beat["peak_mV"] - x / 100.0 * beat["apa_mV"]
                j = ip
                while j < len(v) - 1 and v[j + 1] > level:
                    j += 1
                if j < len(v) - 1:
                    beat[f"apd{x}_ms"] = (_crossing(t, v, j, level) - beat["t_upstroke_s"]) * 1000.0
            # CL: this upstroke minus the previous one
            beat["cl_ms"] = (beat["t_upstroke_s"] - beats[-1]["t_upstroke_s"]) * 1000.0
        beats.append(beat)
    return beats


def sample(sol: dict[str, np.ndarray], start_s: float, stop_s: float, fs_hz: float) -> np.ndarray:
    """The solution as an amplifier's digitiser would see it: values at ``start_s + i / fs``.

    Between logged points the solution is interpolated with cubic Hermite polynomials that use
    the model's exact dV/dt (scipy), accurate far below a microvolt at 100 kHz logging.
    """
    from scipy.interpolate import CubicHermiteSpline

    spline = CubicHermiteSpline(sol["t_s"], sol["v_mV"], sol["dvdt_V_per_s"] * 1000.0)
    n = int(np.floor((stop_s - start_s) * fs_hz))
    return spline(start_s + np.arange(n) / fs_hz)
