"""The numbers behind the app's figures, computed Qt-free so that a notebook gets the same.

Aligned beats and their ensemble average, the phase plane, Poincare pairs of cycle lengths and
the DDR-against-CL relation with its fitted line. The figures only draw what these return.
"""

from __future__ import annotations

import math
from dataclasses import dataclass

import numpy as np

from analysis.beats import derivative_trace
from analysis.recording import Recording
from analysis.signal import noise_matched_window_ms, noise_rms_mV
from analysis.stats import linear_relation, successive_pairs
from analysis.table import BeatTable

__all__ = [
    "AlignedBeats",
    "LineFit",
    "aligned_beats",
    "consecutive_mask",
    "dvdt_window_of",
    "fit_line",
    "phase_plane",
    "poincare_pairs",
    "recording_times_s",
    "take_off_window_ms",
]


@dataclass(frozen=True)
class AlignedBeats:
    """Beats cut out around their upstrokes, on one time base.

    Attributes
    ----------
    t_ms : ndarray, shape (m,)
        Time from the upstroke, in ms.
    traces : ndarray, shape (n, m)
        One row per beat, in the channel's units (NaN where a window leaves its sweep).
    rows : ndarray of int, shape (n,)
        The beats' rows in the table.
    mean : ndarray, shape (m,)
        The ensemble beat: the sample-wise median across beats, ignoring NaN, so that a single
        outlying sample (an electrical spike in one beat) does not show in it (as the summary's
        ensemble beat, :mod:`analysis.stats._ensemble`).
    """

    t_ms: np.ndarray
    traces: np.ndarray
    rows: np.ndarray
    mean: np.ndarray


@dataclass(frozen=True)
class LineFit:
    """A least-squares line ``y = slope * x + intercept`` with Pearson's r over n pairs."""

    slope: float
    intercept: float
    r: float
    n: int

    def at(self, x: np.ndarray) -> np.ndarray:
        return self.slope * np.asarray(x, dtype=np.float64) + self.intercept


def recording_times_s(beats: BeatTable, sweep_starts_s) -> np.ndarray:
    """Each beat's upstroke time from the start of the recording, in seconds."""
    starts = np.asarray(sweep_starts_s, dtype=np.float64)
    return starts[np.asarray(beats["sweep"], dtype=np.int64)] + np.asarray(beats["t_upstroke_s"], dtype=np.float64)


def consecutive_mask(beats: BeatTable, rows: np.ndarray) -> np.ndarray:
    """For rows in time order, whether each next row is the very next beat of the same sweep.

    Returns a boolean array of ``len(rows) - 1``: False across a sweep boundary or where a beat
    between them was left out (so successive differences never span a gap).
    """
    rows = np.asarray(rows, dtype=np.int64)
    if rows.size < 2:
        return np.zeros(0, dtype=bool)
    sweep = np.asarray(beats["sweep"])[rows]
    beat = np.asarray(beats["beat"])[rows]
    return (sweep[1:] == sweep[:-1]) & (beat[1:] == beat[:-1] + 1)


def aligned_beats(
    recording: Recording,
    beats: BeatTable,
    rows: np.ndarray,
    *,
    channel: int | str = 0,
    before_ms: float = 300.0,
    after_ms: float = 600.0,
    offset_mV: float = 0.0,
    max_beats: int = 400,
) -> AlignedBeats:
    """Cut each beat from ``before_ms`` before to ``after_ms`` after its upstroke.

    Parameters
    ----------
    recording : Recording
    beats : BeatTable
        Needs ``sweep`` and ``t_upstroke_s``.
    rows : ndarray of int
        Which beats (for example the accepted ones of a condition).
    channel : int or str
    before_ms, after_ms : float
        The window around the upstroke, in ms.
    offset_mV : float
        Subtracted from the samples (the liquid-junction-potential correction of the analysis).
    max_beats : int
        At most this many beats, evenly spread over ``rows``.

    Returns
    -------
    AlignedBeats
        Aligned to the sample nearest each upstroke.
    """
    rows = np.asarray(rows, dtype=np.int64)
    if rows.size > max_beats:
        rows = rows[np.linspace(0, rows.size - 1, max_beats).round().astype(np.int64)]
    fs = recording.sampling_rate_hz
    pre, post = int(round(before_ms * fs / 1e3)), int(round(after_ms * fs / 1e3))
    t_ms = np.arange(-pre, post + 1) * 1e3 / fs
    traces = np.full((rows.size, t_ms.size), np.nan)
    for k, r in enumerate(rows):
        sweep = int(beats["sweep"][r])
        centre = int(round(float(beats["t_upstroke_s"][r]) * fs))
        lo, hi = centre - pre, centre + post + 1
        seg = recording.sweep(sweep, channel, start=max(0, lo), stop=hi)
        traces[k, max(0, -lo) : max(0, -lo) + seg.size] = seg - offset_mV
    if rows.size == 1:  # the median of one beat is that beat (the beat card's overlay)
        return AlignedBeats(t_ms, traces, rows, traces[0].copy())
    mean = np.full(t_ms.size, np.nan)
    some = np.isfinite(traces).any(axis=0)
    if some.any():
        mean[some] = np.nanmedian(traces[:, some], axis=0)
    return AlignedBeats(t_ms, traces, rows, mean)


def phase_plane(v: np.ndarray, fs_hz: float, *, window_ms: float | None = None) -> tuple[np.ndarray, np.ndarray]:
    """V and dV/dt (V/s) of a trace in mV, by the estimator that measured dV/dt max.

    Parameters
    ----------
    v : ndarray
        The trace, in mV.
    fs_hz : float
    window_ms : float or None
        The dV/dt max window of the beat (the beat table's ``dvdt_window_ms``; for an average
        beat :func:`dvdt_window_of`): the derivative is :func:`analysis.beats.derivative_trace`,
        the order-3 Savitzky-Golay derivative dV/dt max is read from, so the loop's top is the
        beat's dV/dt max and its diastole is as quiet as that estimate. None (or 0): a central
        difference.

    Returns
    -------
    (ndarray, ndarray)
        ``(v_mV, dvdt_V_per_s)``; NaN samples stay NaN (mV per ms equals V per s).
    """
    v = np.asarray(v, dtype=np.float64)
    if v.size < 2:
        return v, np.full(v.size, np.nan)
    return v, derivative_trace(v, fs_hz, 0.0 if window_ms is None else float(window_ms))


def dvdt_window_of(beats: BeatTable, rows: np.ndarray) -> float | None:
    """The dV/dt max window (ms) of these beats: their median ``dvdt_window_ms`` (None when the
    table has none), for drawing their average beat's phase plane as they were measured."""
    if "dvdt_window_ms" not in beats:
        return None
    w = np.asarray(beats["dvdt_window_ms"], dtype=np.float64)[np.asarray(rows, dtype=np.int64)]
    w = w[np.isfinite(w)]
    return float(np.median(w)) if w.size else None


def take_off_window_ms(v: np.ndarray, fs_hz: float, measurement) -> float:
    """The derivative window the take-off definition would use on this trace.

    The measurement settings' shortest window, widened on a noisy trace until the slope's noise
    is below their fraction of the take-off criterion (:func:`analysis.signal.noise_matched_window_ms`).
    """

    finite = np.asarray(v, dtype=np.float64)
    finite = finite[np.isfinite(finite)]
    return noise_matched_window_ms(
        noise_rms_mV(finite), fs_hz, criterion_V_per_s=measurement.top_dvdt_V_per_s,
        fraction=measurement.top_noise_fraction, min_ms=measurement.top_derivative_window_ms,
        max_ms=measurement.top_derivative_max_window_ms,
    )


def poincare_pairs(beats: BeatTable, rows: np.ndarray, column: str = "cl_ms") -> tuple[np.ndarray, np.ndarray]:
    """``(x_n, x_n+1)`` of a column over beats that directly follow each other.

    ``rows`` must be in time order (for example the accepted beats of a condition).
    """
    rows = np.asarray(rows, dtype=np.int64)
    values = np.asarray(beats[column], dtype=np.float64)[rows]
    return successive_pairs(values, consecutive_mask(beats, rows) if rows.size >= 2 else None)


def fit_line(x: np.ndarray, y: np.ndarray) -> LineFit:
    """The least-squares line of ``y`` on ``x`` over finite pairs (slope and r from
    :func:`analysis.stats.linear_relation`; the line passes through the means)."""
    x = np.asarray(x, dtype=np.float64)
    y = np.asarray(y, dtype=np.float64)
    slope, r, n = linear_relation(x, y)
    ok = np.isfinite(x) & np.isfinite(y)
    intercept = float(y[ok].mean() - slope * x[ok].mean()) if n and math.isfinite(slope) else math.nan
    return LineFit(slope, intercept, r, n)
