"""The action-potential phases of each beat, as time spans built from its markers.

Phases follow the usual numbering of the cardiac action potential: 4 diastolic (pacemaker)
depolarisation, 0 upstroke, 1 early rapid repolarisation, 2 plateau, 3 final repolarisation
(common practice, no source). Nodal-like beats have no distinct phases 1 and 2: their
repolarisation runs straight from the peak. Here a beat is given phases 1 and 2 only when its
shape has a plateau, judged by the ratio APD90 / APD50: a plateau keeps the membrane depolarised
for most of the AP, so APD50 is close to APD90 (the same ratio the cell-type hint uses for
ventricular-like cells, <= about 1.3-1.4; from memory).

Spans come from the marker times the measurement core put in the beat table; nothing is measured
again here.
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np

from .table import BeatTable

__all__ = ["PhaseSpans", "phase_spans", "PLATEAU_MAX_APD90_OVER_APD50"]

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


def phase_spans(
    beats: BeatTable,
    *,
    rows: np.ndarray | None = None,
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
    plateau_max_ratio : float
        A beat has phases 1 and 2 when APD90 / APD50 is at most this.

    Returns
    -------
    PhaseSpans
        Phase 4 runs from the MDP to the take-off, phase 0 from the take-off to the peak. With a
        plateau, phase 1 runs from the peak to 20 % repolarisation, phase 2 from there to 50 %
        and phase 3 on; without one, phase 3 starts at the peak. Phase 3 ends at the next beat's
        MDP in the same sweep, or at 90 % repolarisation when there is no next beat.

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
        nxt = next_of[r]
        end = t_mdp[nxt] if nxt >= 0 and np.isfinite(t_mdp[nxt]) else t90[r]
        apd50, apd90 = t50[r] - t_up[r], t90[r] - t_up[r]
        plateau = (
            np.isfinite(apd50) and np.isfinite(apd90) and apd50 > 0
            and apd90 / apd50 <= plateau_max_ratio and np.isfinite(t20[r])
        )
        if plateau:
            add(r, 1, t_peak[r], t20[r])
            add(r, 2, t20[r], t50[r])
            add(r, 3, t50[r], end)
        else:
            add(r, 3, t_peak[r], end)
    return PhaseSpans(
        np.asarray(out_row, dtype=np.int64), np.asarray(out_phase, dtype=np.int64),
        np.asarray(out_t0, dtype=np.float64), np.asarray(out_t1, dtype=np.float64),
    )
