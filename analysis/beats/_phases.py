"""The action-potential phases of each beat, as time spans built from its markers.

Phases follow the usual numbering of the cardiac action potential: 4 diastolic (pacemaker)
depolarisation, 0 upstroke, 1 early rapid repolarisation, 2 plateau, 3 final repolarisation
(common practice, no source). Nodal-like beats have no distinct phases 1 and 2: their
repolarisation runs straight from the peak. Here a beat is given phases 1 and 2 only when its
shape has a plateau, judged by the ratio APD90 / APD50: a plateau keeps the membrane depolarised
for most of the AP, so APD50 is close to APD90 (the same ratio the cell-type hint uses for
ventricular-like cells, <= about 1.3-1.4; from memory).

With a plateau, phase 2 ends (and phase 3 begins) at 20 % repolarisation, where the plateau gives
way; phase 1, the early rapid repolarisation, ends at the notch (the lowest point before the
dome) or, without a notch, where the early repolarisation has slowed to a fifth of its fastest
(:func:`phase1_end_s`, which needs the samples; without them phase 1 is left out and phase 2
starts at the peak). These boundaries are for display (common practice, no source); no value in
the beat table depends on them.
"""

from __future__ import annotations

from dataclasses import dataclass

from typing import Callable

import numpy as np

from analysis.table import BeatTable

__all__ = ["PhaseSpans", "phase_spans", "phase1_end_s", "PLATEAU_MAX_APD90_OVER_APD50"]

#: samples(sweep, start, stop) -> the sweep's samples in that range (mV).
SampleSource = Callable[[int, int, int], np.ndarray]

#: A beat whose APD90 / APD50 is at most this has a plateau (phases 1 and 2 are shown).
PLATEAU_MAX_APD90_OVER_APD50 = 1.4


@dataclass(frozen=True)
class PhaseSpans:
    """Phase spans of many beats: parallel arrays, one entry per span.

    Attributes
    ----------
    row : ndarray of int
        The beat's row in the table the spans were built from.
    phase : ndarray of int
        4, 0, 1, 2 or 3.
    t0_s, t1_s : ndarray of float
        Start and end of the span, seconds from the start of the beat's sweep.
    """

    row: np.ndarray
    phase: np.ndarray
    t0_s: np.ndarray
    t1_s: np.ndarray

    def __len__(self) -> int:
        return len(self.row)

    def of_row(self, row: int) -> dict[int, tuple[float, float]]:
        """The spans of one beat as ``{phase: (t0_s, t1_s)}``."""
        sel = np.flatnonzero(self.row == row)
        return {int(self.phase[i]): (float(self.t0_s[i]), float(self.t1_s[i])) for i in sel}


def _col(beats: BeatTable, name: str) -> np.ndarray:
    values = beats.get(name)
    if values is None:
        return np.full(len(beats), np.nan)
    return np.asarray(values, dtype=np.float64)


def phase1_end_s(v: np.ndarray, fs_hz: float, t0_s: float) -> float:
    """The end of phase 1 in a stretch of samples from the peak to the end of the plateau.

    Parameters
    ----------
    v : ndarray
        Samples (mV) from the peak (``v[0]``) on, covering at least the early repolarisation.
    fs_hz : float
    t0_s : float
        Time of ``v[0]``.

    Returns
    -------
    float
        The time of the notch (the lowest point of the first third, when V rises again after it
        by 0.5 mV or more: a spike-and-dome shape), else of the first sample after the fastest
        early repolarisation where it has slowed to a fifth of that rate; NaN when there are too
        few samples.

    Examples
    --------
    >>> import numpy as np
    >>> fs = 10_000.0
    >>> t = np.arange(2000) / fs                       # 200 ms from the peak
    >>> v = 30 - 15 * (1 - np.exp(-t / 0.004))         # fast early repolarisation to +15 mV
    >>> # slowed to a fifth at 4 ms x ln 5 = 6.4 ms (by hand); slopes taken over a millisecond
    >>> # see the fastest rate a little late, so the end is read up to a millisecond later
    >>> late = phase1_end_s(v, fs, 0.0) - 0.004 * np.log(5)
    >>> bool(0.0 <= late <= 0.0012)
    True
    """
    x = np.asarray(v, dtype=np.float64)
    if x.size < 8:
        return float("nan")
    # A millisecond of smoothing, and slopes over a millisecond, so that noise does not pass
    # for the fastest repolarisation.
    k = max(1, int(round(1e-3 * fs_hz)))
    if x.size < 4 * k:
        k = max(1, x.size // 8)
    smooth = np.convolve(x, np.ones(k) / k, mode="valid")
    head = smooth[: max(2 * k + 2, smooth.size // 3)]
    i_min = int(np.argmin(head))
    if 0 < i_min < head.size - 1 and smooth[i_min:].max() - smooth[i_min] >= 0.5:
        return t0_s + (i_min + (k - 1) / 2) / fs_hz
    slope = (head[k:] - head[:-k]) / k
    i_fast = int(np.argmin(slope))
    slowed = np.flatnonzero(slope[i_fast:] > 0.2 * slope[i_fast])
    i_end = i_fast + (int(slowed[0]) if slowed.size else slope.size - i_fast)
    return t0_s + (i_end + k - 0.5) / fs_hz  # the middle of the slope's span, on the samples' clock


def phase_spans(
    beats: BeatTable,
    *,
    rows: np.ndarray | None = None,
    samples: SampleSource | None = None,
    fs_hz: float | None = None,
    plateau_max_ratio: float = PLATEAU_MAX_APD90_OVER_APD50,
) -> PhaseSpans:
    """The phase spans of beats, from their marker times.

    Parameters
    ----------
    beats : BeatTable
        Needs ``sweep``, ``t_upstroke_s`` and the marker times ``t_mdp_s``, ``t_top_s``,
        ``t_peak_s``, ``t_apd20_s``, ``t_apd50_s``, ``t_apd90_s`` (missing markers leave out the
        spans they bound).
    rows : ndarray of int or None
        The rows to build spans for (None: all).
    samples : callable or None
        ``samples(sweep, start, stop)`` returns the samples (mV) of a sweep; with ``fs_hz`` it
        lets plateau beats have their phase 1 (see :func:`phase1_end_s`).
    fs_hz : float or None
        The sampling rate of ``samples``.
    plateau_max_ratio : float
        A beat has phases 1 and 2 when APD90 / APD50 is at most this.

    Returns
    -------
    PhaseSpans
        Phase 4 runs from the MDP to the take-off, phase 0 from the take-off to the peak. With a
        plateau, phase 1 runs from the peak to its end (with samples), phase 2 from there to 20 %
        repolarisation and phase 3 on; without one, phase 3 starts at the peak. Phase 3 ends at the next beat's
        MDP in the same sweep (where that beat's phase 4 starts, at its MDP marker), or at 90 %
        repolarisation when there is no next beat. A span is drawn only where both its ends are
        defined: a beat without APD90 (cut by the sweep's end, or without a known MDP) has no
        phase 1, 2 or 3; one without a take-off (no diastole before it, or no phase 4) has no
        phase 4 or 0.

    Examples
    --------
    >>> from analysis.table import BeatTable
    >>> t = BeatTable({"sweep": [0], "t_upstroke_s": [0.5], "t_mdp_s": [0.2], "t_top_s": [0.45],
    ...                "t_peak_s": [0.52], "t_apd20_s": [0.56], "t_apd50_s": [0.6],
    ...                "t_apd90_s": [0.66]})
    >>> sorted(phase_spans(t).of_row(0))      # APD90/APD50 = 1.6: no plateau
    [0, 3, 4]
    """
    n = len(beats)
    rows = np.arange(n) if rows is None else np.asarray(rows, dtype=np.int64)
    sweep = np.asarray(beats["sweep"]) if "sweep" in beats else np.zeros(n, dtype=np.int64)
    t_up = _col(beats, "t_upstroke_s")
    t_mdp, t_top, t_peak = _col(beats, "t_mdp_s"), _col(beats, "t_top_s"), _col(beats, "t_peak_s")
    t20, t50, t90 = _col(beats, "t_apd20_s"), _col(beats, "t_apd50_s"), _col(beats, "t_apd90_s")
    # The next beat of the same sweep (by upstroke time), for the end of phase 3.
    order = np.lexsort((t_up, sweep))
    next_of = np.full(n, -1, dtype=np.int64)
    same = sweep[order[1:]] == sweep[order[:-1]]
    next_of[order[:-1][same]] = order[1:][same]

    out_row: list[int] = []
    out_phase: list[int] = []
    out_t0: list[float] = []
    out_t1: list[float] = []

    def add(r: int, phase: int, a: float, b: float) -> None:
        if np.isfinite(a) and np.isfinite(b) and b > a:
            out_row.append(r)
            out_phase.append(phase)
            out_t0.append(float(a))
            out_t1.append(float(b))

    for r in rows:
        r = int(r)
        add(r, 4, t_mdp[r], t_top[r])
        add(r, 0, t_top[r], t_peak[r])
        if not np.isfinite(t90[r]):
            # No 90 % repolarisation (a beat cut by the sweep's end, or one whose MDP is not
            # known, so that its levels are not): where it repolarises is not known, and no
            # span after the peak is drawn rather than one that calls the whole beat phase 3.
            continue
        nxt = next_of[r]
        end = max(t_mdp[nxt], t90[r]) if nxt >= 0 and np.isfinite(t_mdp[nxt]) else t90[r]
        apd50, apd90 = t50[r] - t_up[r], t90[r] - t_up[r]
        plateau = (
            np.isfinite(apd50) and np.isfinite(apd90) and apd50 > 0
            and apd90 / apd50 <= plateau_max_ratio and np.isfinite(t20[r])
        )
        if plateau:
            p1 = np.nan
            if samples is not None and fs_hz and np.isfinite(t_peak[r]):
                i0, i1 = int(round(t_peak[r] * fs_hz)), int(round(t20[r] * fs_hz)) + 1
                if i1 - i0 >= 8:
                    p1 = phase1_end_s(samples(int(sweep[r]), i0, i1), fs_hz, i0 / fs_hz)
            if np.isfinite(p1) and t_peak[r] < p1 < t20[r]:
                add(r, 1, t_peak[r], p1)
                add(r, 2, p1, t20[r])
            else:
                add(r, 2, t_peak[r], t20[r])
            add(r, 3, t20[r], end)
        else:
            add(r, 3, t_peak[r], end)
    return PhaseSpans(
        np.asarray(out_row, dtype=np.int64), np.asarray(out_phase, dtype=np.int64),
        np.asarray(out_t0, dtype=np.float64), np.asarray(out_t1, dtype=np.float64),
    )
