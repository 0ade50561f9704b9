"""The ensemble-averaged beat: accepted beats aligned at their upstroke and averaged.

Each beat contributes one cycle, from its MDP to where its next MDP falls on average: the cycle
starts ``pre`` seconds before the upstroke (the median of upstroke minus MDP time over the beats
averaged) and lasts the median cycle length. The beats are resampled by linear interpolation at
exactly these offsets from their own (sub-sample) upstroke time, so alignment jitter is below one
sample. The average is one cycle of a periodic signal, and so it is measured as one: the cycle is
repeated three times and the middle beat is measured by the same measurement core and settings
as every other beat (:func:`measure_cycle`), so the ensemble beat's parameters follow the same
definitions. Its CL is the median CL by construction, and its samples start and end near the
MDP, where dV/dt is close to zero and the repeat joins smoothly.

The average is robust to a single outlying sample (an electrical spike in one beat's diastole):
it is the sample-wise median of the beats (:class:`RobustAverage`), taken over groups of 64
(:data:`GROUP_BEATS`) to 127 consecutive beats whose medians are then averaged, weighted by
their sizes, so that memory stays bounded by a few hundred cycles however long the recording.
A spike in one beat of a group moves its median by at most the spread of the other beats at
that instant, where it would move a mean by its height over the number of beats. On white noise
the median's noise is about sqrt(pi / 2) = 1.25 times the mean's (common practice, no source).
Beats are not left out for their flags here: the beats averaged are the summary's, which
already leave out those held for review (by default an ``artefact`` flag holds a beat), and the
median guards against a spike in a beat that stays in (one the user accepted, or one missed
by the artefact rule).
"""

from __future__ import annotations

import math
from dataclasses import dataclass, field
from typing import Any, Callable, Mapping

import numpy as np

from analysis.table import CSV_COLUMNS, BeatTable

__all__ = ["Ensemble", "GROUP_BEATS", "ensemble_average", "RobustAverage", "measure_cycle"]

#: Beats per group of the ensemble's sample-wise median (the last group takes up to twice this).
GROUP_BEATS = 64


class RobustAverage:
    """A sample-wise median of equally long beats, fed one at a time in bounded memory.

    ``add(v)`` each beat, then ``result()``: the median of each group of :data:`GROUP_BEATS`
    consecutive beats (the last group holds the rest, up to ``2 * GROUP_BEATS - 1``, so that no
    group is too small for its median to resist a spike), averaged over the groups weighted by
    their sizes. With fewer than ``2 * GROUP_BEATS`` beats it is the plain sample-wise median
    (numpy's ``median`` along the beats).
    """

    def __init__(self, length: int, group: int = GROUP_BEATS) -> None:
        self._group = int(group)
        self._buffer = np.empty((2 * self._group, int(length)))
        self._n = 0
        self._total = np.zeros(int(length))
        self._weight = 0

    def add(self, v: np.ndarray) -> None:
        if self._n == self._buffer.shape[0]:
            self._fold(self._group)
        self._buffer[self._n] = v
        self._n += 1

    def _fold(self, k: int) -> None:
        self._total += k * np.median(self._buffer[:k], axis=0)
        self._weight += k
        self._buffer[: self._n - k] = self._buffer[k:self._n]
        self._n -= k

    def result(self) -> np.ndarray:
        total, weight = self._total.copy(), self._weight
        if self._n:
            total += self._n * np.median(self._buffer[:self._n], axis=0)
            weight += self._n
        return total / weight


@dataclass
class Ensemble:
    """An ensemble-averaged beat.

    Attributes
    ----------
    v_mV : ndarray
        The averaged cycle, mV (after LJP correction).
    fs_hz : float
        Its sampling rate (that of the recording).
    t0_s : float
        Time of its first sample relative to the upstroke (negative), seconds.
    n_beats : int
        Beats averaged.
    parameters : dict of str to float
        The averaged beat's own parameters, by beats-table column name (empty when not measured).
    """

    v_mV: np.ndarray
    fs_hz: float
    t0_s: float
    n_beats: int
    parameters: dict[str, float] = field(default_factory=dict)

    @property
    def t_s(self) -> np.ndarray:
        """Sample times relative to the upstroke, seconds."""
        return self.t0_s + np.arange(self.v_mV.size) / self.fs_hz


def ensemble_average(
    beats: BeatTable,
    rows: np.ndarray,
    trace: Any,
    fs_hz: float,
    *,
    measure: Callable[[np.ndarray], Mapping[str, float] | None] | None = None,
) -> Ensemble | None:
    """Average the beats ``rows`` of a table, aligned at their upstroke.

    Parameters
    ----------
    beats : BeatTable
        With ``sweep``, ``t_upstroke_s``, ``t_mdp_s`` and ``cl_ms``.
    rows : ndarray of int
        The beats to average (eligible ones; see :func:`analysis.stats.eligible_mask`).
    trace : sweep source or callable
        The samples in mV (LJP-corrected): a sweep source with ``n_samples(sweep)`` and
        ``read(sweep, start, stop)`` (only each beat's window is read), or ``trace(sweep)``
        giving a whole sweep.
    fs_hz : float
    measure : callable or None
        Measures the averaged cycle repeated three times and returns the middle beat's
        parameters (see :func:`measure_cycle`); None leaves ``parameters`` empty.

    Returns
    -------
    Ensemble or None
        None when no beat has a defined CL and MDP time, or no cycle fits inside its sweep.
    """
    rows = np.asarray(rows, dtype=np.int64)
    t_up = np.asarray(beats["t_upstroke_s"], float)[rows]
    t_mdp = np.asarray(beats["t_mdp_s"], float)[rows] if "t_mdp_s" in beats else np.full(rows.size, np.nan)
    cl = np.asarray(beats["cl_ms"], float)[rows]
    ok = np.isfinite(t_up) & np.isfinite(cl) & np.isfinite(t_mdp)
    if not ok.any():
        return None
    pre_s = float(np.median(t_up[ok] - t_mdp[ok]))
    length = int(round(float(np.median(cl[ok])) * 1e-3 * fs_hz))
    if length < 4:
        return None
    offsets = np.arange(length) / fs_hz - pre_s
    average = RobustAverage(length)
    count = 0
    sweeps = np.asarray(beats["sweep"], dtype=np.int64)[rows]
    windowed = hasattr(trace, "read") and hasattr(trace, "n_samples")
    for s in np.unique(sweeps[ok]):
        if windowed:
            n = int(trace.n_samples(int(s)))
        else:
            whole = np.asarray(trace(int(s)), dtype=np.float64)
            n = whole.size
        t_end = (n - 1) / fs_hz
        for tu in t_up[ok & (sweeps == s)]:
            if tu + offsets[0] < 0 or tu + offsets[-1] > t_end:
                continue
            x = (tu + offsets) * fs_hz
            i = np.clip(np.floor(x).astype(np.int64), 0, n - 2)
            frac = x - i
            # Only the beat's own window is read from a sweep source (memory bounded by a cycle).
            lo, hi = int(i[0]), int(i[-1]) + 2
            v = np.asarray(trace.read(int(s), lo, hi), dtype=np.float64) if windowed else whole[lo:hi]
            j = i - lo
            average.add(v[j] * (1.0 - frac) + v[j + 1] * frac)
            count += 1
    if count == 0:
        return None
    avg = average.result()
    params: dict[str, float] = {}
    if measure is not None:
        got = measure(np.tile(avg, 3))
        if got:
            params = {k: float(v) for k, v in got.items()}
    return Ensemble(avg, float(fs_hz), float(offsets[0]), count, params)


def measure_cycle(
    v_mV: np.ndarray,
    fs_hz: float,
    analyze_trace: Callable[[np.ndarray, float], BeatTable],
    *,
    cycle_samples: int,
) -> dict[str, float] | None:
    """The parameters of the middle beat of a cycle repeated three times.

    Parameters
    ----------
    v_mV : ndarray
        The cycle repeated three times.
    fs_hz : float
    analyze_trace : callable
        ``analyze_trace(v_mV, fs_hz)`` runs the measurement core on one sweep and returns its
        beat table.
    cycle_samples : int
        Length of one cycle.

    Returns
    -------
    dict or None
        The numeric beats-CSV columns of the beat whose upstroke lies in the middle cycle, or
        None when the core finds none there.
    """
    table = analyze_trace(v_mV, fs_hz)
    if len(table) == 0:
        return None
    t = np.asarray(table["t_upstroke_s"], float)
    lo, hi = cycle_samples / fs_hz, 2 * cycle_samples / fs_hz
    middle = np.flatnonzero((t >= lo) & (t < hi))
    if middle.size == 0:
        return None
    row = table.row(int(middle[0]))
    out = {}
    for name in CSV_COLUMNS:
        value = row.get(name)
        if isinstance(value, float) and name not in ("t_upstroke_s",):
            out[name] = value if math.isfinite(value) else math.nan
    return out
