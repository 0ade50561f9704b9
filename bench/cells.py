"""The long recordings the benchmarks analyse: one per kind of cell, written as ABF 1 files.

* ``nodal``: the invented nodal-like cell of :mod:`analysis.synthetic` (CL 828 ms, dV/dt max
  4.6 V/s, APD90 165 ms), 0.2 mV noise and 0.5 mV/min drift.
* ``purkinje``: the DiFrancesco & Noble 1985 Purkinje-fibre model (Phil Trans R Soc Lond B
  307:353-398; ``dn-1985-normalised.mmt`` shipped with myokit), simulated with myokit to its
  steady spontaneous rhythm and one cycle sampled at the recording's rate. The model beats every
  1.9 s or so; to load the analysis with as many long action potentials as a fast-beating cell
  gives, the cycle's diastole (from the MDP to 10 ms before the next upstroke) is compressed in
  time so that the cycle lasts 564 ms, the action potential itself untouched, and the cycle tiled
  (3,190 beats in 30 min, APD90 near 290 ms), 0.2 mV noise.
* ``ventricular``: the ventricular-like cell of :mod:`analysis.synthetic` (CL 1,200 ms, dV/dt
  max 260 V/s, APD90 245 ms), 0.2 mV noise and 0.5 mV/min drift.

``make(kind, minutes, folder)`` writes (or finds, from an earlier run) ``FOLDER/KIND_20k_Mmin.abf``
and returns its path and the number of beats it holds.
"""

from __future__ import annotations

import os

import numpy as np

FS_HZ = 20_000.0
KINDS = ("nodal", "purkinje", "ventricular")

#: DN1985: pre-run to a steady rhythm (ms), then one cycle or two logged to find a whole one.
_PRERUN_MS = 60_000.0
_LOG_MS = 5_000.0
#: The tiled cycle's length (ms): 3,190 beats in 30 min.
CYCLE_MS = 564.0


def dn1985_cycle(fs_hz: float = FS_HZ) -> np.ndarray:
    """One steady cycle of the DiFrancesco-Noble 1985 model sampled at ``fs_hz``, in mV.

    The cycle runs from 10 ms before one upstroke (dV/dt crossing 10 V/s upwards) to 10 ms
    before the next, so that tiling it gives a seamless rhythm; its diastole (MDP to the end) is
    resampled to make the whole ``CYCLE_MS`` long.
    """
    import myokit  # heavy optional import: only this kind of cell needs it

    path = os.path.join(os.path.dirname(myokit.__file__), "tests", "data", "dn-1985-normalised.mmt")
    model, _protocol, _script = myokit.load(path)
    sim = myokit.Simulation(model)  # no protocol: the model beats by itself
    sim.set_tolerance(1e-8, 1e-8)
    sim.pre(_PRERUN_MS)
    log = sim.run(_LOG_MS, log=["membrane.V"], log_interval=1000.0 / fs_hz)
    v = np.asarray(log["membrane.V"], dtype=float)
    dv = np.diff(v) * fs_hz / 1000.0  # V/s
    ups = np.flatnonzero((dv[:-1] < 10.0) & (dv[1:] >= 10.0))
    if ups.size < 2:
        raise RuntimeError("the DiFrancesco-Noble model did not beat twice in the logged time")
    lead = int(0.010 * fs_hz)
    cycle = v[ups[0] - lead:ups[1] - lead]
    i_mdp = int(np.argmin(cycle))
    n_diastole = int(round(CYCLE_MS / 1000.0 * fs_hz)) - i_mdp
    if n_diastole < 2:
        raise RuntimeError("the model's action potential is longer than the cycle asked for")
    x = np.linspace(0.0, cycle.size - 1 - i_mdp, n_diastole + 1)[:-1]
    diastole = np.interp(x, np.arange(cycle.size - i_mdp), cycle[i_mdp:])
    return np.concatenate((cycle[:i_mdp], diastole))


def _synthetic(name: str, minutes: float, seed: int) -> tuple[np.ndarray, int]:
    from analysis.synthetic import preset, synthesize

    syn = synthesize(preset(name), duration_s=minutes * 60.0, fs_hz=FS_HZ, seed=seed, noise_mV=0.2,
                     drift_mV_per_min=0.5)
    return syn.recording.sweep(0, 0), len(syn.truth.beats)


def trace(kind: str, minutes: float, seed: int = 11) -> tuple[np.ndarray, int]:
    """The samples (mV) of a ``kind`` cell and its number of beats."""
    if kind == "nodal":
        return _synthetic("nodal-like", minutes, seed)
    if kind == "ventricular":
        return _synthetic("ventricular-like", minutes, seed)
    if kind == "purkinje":
        cycle = dn1985_cycle()
        n = int(minutes * 60.0 * FS_HZ)
        reps = -(-n // cycle.size)
        v = np.tile(cycle, reps)[:n] + np.random.default_rng(seed).normal(0.0, 0.2, n)
        # The tiled cycle starts 10 ms before an upstroke: count the upstrokes inside the trace.
        lead = int(0.010 * FS_HZ)
        return v, int(np.count_nonzero(np.arange(lead, n, cycle.size) < n - lead))
    raise ValueError(f"unknown kind of cell {kind!r}; choose from {', '.join(KINDS)}")


def make(kind: str, minutes: float, folder: str) -> tuple[str, int]:
    """An ABF 1 file of a ``kind`` cell in ``folder`` (reused when made earlier) and its beat count."""
    path = os.path.join(folder, f"{kind}_{FS_HZ / 1e3:g}k_{minutes:g}min.abf")
    count_path = path + ".beats"
    if os.path.exists(path) and os.path.exists(count_path):
        with open(count_path) as fh:
            return path, int(fh.read())
    from pyabf.abfWriter import writeABF1

    v, n_beats = trace(kind, minutes)
    writeABF1(v[np.newaxis, :], path, FS_HZ, units="mV")
    with open(count_path, "w") as fh:
        fh.write(str(n_beats))
    return path, n_beats
