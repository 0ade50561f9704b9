"""Small beating recordings written to disk for the batch tests and the batch benchmark.

The trace is a smooth, hand-built pacemaker-like waveform (not a model of any particular cell):
each cycle starts at the upstroke from the take-off potential, repolarises to the maximum
diastolic potential and climbs back along a linear phase 4 to the next take-off, so that the
number of beats and their upstroke times are known by construction.
"""

from __future__ import annotations

import os
import struct
from pathlib import Path

import numpy as np

#: Construction values of the waveform (mV, ms).
MDP_MV = -62.0
TOP_MV = -45.0
PEAK_MV = 22.0
APD_MS = 140.0


def _cycles(duration_s: float, cl_ms: float, cl_sd_ms: float, rng) -> tuple[np.ndarray, np.ndarray]:
    n_cycles = int(duration_s * 1000.0 / (cl_ms - 3 * cl_sd_ms)) + 2
    cls = np.clip(rng.normal(cl_ms, cl_sd_ms, n_cycles), cl_ms - 3 * cl_sd_ms, cl_ms + 3 * cl_sd_ms)
    starts_ms = 80.0 + np.concatenate([[0.0], np.cumsum(cls)[:-1]])
    return starts_ms, cls


def _waveform(t_ms: np.ndarray, starts_ms: np.ndarray, cls: np.ndarray) -> np.ndarray:
    k = np.searchsorted(starts_ms, t_ms, side="right") - 1
    before = k < 0
    k = np.clip(k, 0, None)
    tc = t_ms - starts_ms[k]
    cl = cls[k]
    t_mdp = APD_MS + 40.0
    ddr = (TOP_MV - MDP_MV) / (cl - t_mdp)
    up = 0.5 * (1.0 + np.tanh((tc - 2.0) / 0.8))
    down = 1.0 / (1.0 + np.exp((tc - APD_MS) / 12.0))
    ap = up * down
    base = TOP_MV + (MDP_MV - TOP_MV) * (1.0 - down) + ddr * np.maximum(0.0, tc - t_mdp)
    v = (1.0 - ap) * base + ap * PEAK_MV
    # Before the first cycle: the end of a phase 4 that leads into it.
    v[before] = TOP_MV - (starts_ms[0] - t_ms[before]) * (TOP_MV - MDP_MV) / (cls[0] - t_mdp)
    return v


def beating_trace(duration_s: float, fs_hz: float, *, cl_ms: float = 450.0, cl_sd_ms: float = 15.0,
                  noise_mV: float = 0.1, seed: int = 0) -> tuple[np.ndarray, np.ndarray]:
    """A beating trace and the upstroke times (s) it was built with.

    Returns
    -------
    v_mV : ndarray, shape (n,)
    t_up_s : ndarray
        Start of each cycle's upstroke; the upstroke's steepest point is 2 ms later.
    """
    rng = np.random.default_rng(seed)
    n = int(round(duration_s * fs_hz))
    starts_ms, cls = _cycles(duration_s, cl_ms, cl_sd_ms, rng)
    v = _waveform(np.arange(n) * (1000.0 / fs_hz), starts_ms, cls) + rng.normal(0.0, noise_mV, n)
    return v, starts_ms[starts_ms < duration_s * 1000.0] / 1000.0


def write_text(path: str | os.PathLike, v_mV: np.ndarray, fs_hz: float) -> Path:
    """A two-column CSV (time in s, membrane potential in mV)."""
    path = Path(path)
    t = np.arange(len(v_mV)) / fs_hz
    with open(path, "w", newline="\n") as fh:
        fh.write("time_s,Vm_mV\n")
        np.savetxt(fh, np.column_stack([t, v_mV]), delimiter=",", fmt=["%.6f", "%.4f"])
    return path


def write_abf1(path: str | os.PathLike, v_mV: np.ndarray, fs_hz: float) -> Path:
    """A one-sweep ABF1 file written by pyabf's own writer (an outside, general-purpose library)."""
    import pyabf.abfWriter

    path = Path(path)
    pyabf.abfWriter.writeABF1(np.asarray(v_mV, dtype=float)[np.newaxis, :], str(path), fs_hz, units="mV")
    return path


def write_long_abf1(path: str | os.PathLike, duration_s: float, fs_hz: float, *, seed: int = 0,
                    block_s: float = 30.0) -> Path:
    """A long one-sweep ABF1 file, written block by block so that its length costs no memory.

    The header is the one pyabf's writer makes for a short stretch of the same waveform (pyabf
    writes one sample per Python call, far too slowly for an hour at 50 kHz); the sample counts
    are then set to the full length and the int16 samples appended with numpy, scaled as pyabf
    scales them. The waveform runs on without a seam across blocks.
    """
    import pyabf.abfWriter

    path = Path(path)
    n_total = int(round(duration_s * fs_hz))
    head_v, _ = beating_trace(0.6, 2000.0, seed=seed)
    pyabf.abfWriter.writeABF1(head_v[np.newaxis, :], str(path), fs_hz, units="mV")
    with open(path, "rb") as fh:
        header = bytearray(fh.read(2048))
    scale_factor = struct.unpack_from("f", header, 922)[0]
    adc_range = struct.unpack_from("f", header, 244)[0]
    resolution = struct.unpack_from("i", header, 252)[0]
    value_scale = resolution / adc_range * scale_factor
    struct.pack_into("i", header, 10, n_total)  # lActualAcqLength
    struct.pack_into("i", header, 138, n_total)  # lNumSamplesPerEpisode
    rng = np.random.default_rng(seed)
    starts_ms, cls = _cycles(duration_s, 450.0, 15.0, rng)
    block = int(block_s * fs_hz)
    with open(path, "wb") as fh:
        fh.write(header)
        for start in range(0, n_total, block):
            t_ms = np.arange(start, min(start + block, n_total)) * (1000.0 / fs_hz)
            v = _waveform(t_ms, starts_ms, cls) + rng.normal(0.0, 0.1, len(t_ms))
            fh.write(np.trunc(np.clip(v * value_scale, -32768, 32767)).astype("<i2").tobytes())
        fh.write(b"\0" * ((-fh.tell()) % 512))
    return path
