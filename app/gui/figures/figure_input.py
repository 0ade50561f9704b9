"""What the figures are drawn from: the recording, its reviewed beats, the conditions, and the
beats each condition's summary used. Plain data, no drawing.
"""

from __future__ import annotations

from dataclasses import dataclass, field

import numpy as np

from analysis import readouts
from analysis.recording import Recording
from analysis.table import BeatTable

__all__ = ["FigureInput", "summary_beat_rows"]


@dataclass
class FigureInput:
    """What the figures are drawn from.

    ``groups`` are ``(name, colour)`` in display order; a beat's group is its ``condition``
    column (beats outside every condition form the group ``""``, shown as "outside conditions").
    ``spans`` are the conditions as ``(name, start_s, end_s, colour)`` in recording time.
    """

    recording: Recording
    beats: BeatTable
    channel: int = 0
    offset_mV: float = 0.0
    groups: list[tuple[str, str]] = field(default_factory=list)
    spans: list[tuple[str, float, float, str]] = field(default_factory=list)
    current_row: int = -1
    measurement: object = None  # the measurement settings (their take-off derivative window)
    #: The beats each group's summary used, ``{name: (rows, window rule)}``
    #: (:func:`summary_beat_rows`); None: every accepted beat of the group.
    summary_rows: dict[str, tuple[np.ndarray, str]] | None = None


#: Window rules under which a summary uses every eligible beat of its condition.
_WHOLE_RULES = ("all", "auto (none found: all)")


def summary_beat_rows(beats: BeatTable, summaries, sweep_starts_s) -> dict[str, tuple[np.ndarray, str]]:
    """The beats each condition's summary used (its steady-state window), by condition name.

    Parameters
    ----------
    beats : BeatTable
        The reviewed table the summaries were made from.
    summaries : sequence of analysis.stats._summary.Summary
        The session's current summaries of the recording (all sweep groups).
    sweep_starts_s : sequence of float
        The recording's sweep starts, to place beats in recording time.

    Returns
    -------
    dict of str to (ndarray of int, str)
        Rows in time order and the window rule (the summary's ``window`` column) per condition,
        sweep groups pooled.

    Notes
    -----
    A summary computed in this session lists its rows (``Summary.beat_rows``); one read back
    from a results file does not, and its rows are those :func:`analysis.stats.summarize`
    selects: the eligible beats (:func:`analysis.stats.eligible_mask`) of the condition and
    sweep group inside the window's first and last beat.
    """
    from analysis.stats import eligible_mask

    n = len(beats)
    t_rec = readouts.recording_times_s(beats, sweep_starts_s) if n else np.empty(0)
    condition = np.asarray(beats["condition"], dtype=object) if "condition" in beats else np.full(n, "", dtype=object)
    sweep = np.asarray(beats["sweep"], dtype=np.int64) if n else np.empty(0, np.int64)
    eligible = eligible_mask(beats) if n else np.zeros(0, bool)
    found: dict[str, tuple[list[np.ndarray], str]] = {}
    for s in summaries:
        v = s.values
        name = str(v["condition"])
        rows = np.asarray(s.beat_rows, dtype=np.int64)
        if not rows.size and int(v["n_used"]):
            lo, hi = float(v["window_start_s"]), float(v["window_end_s"])
            sel = eligible & (condition == name) & (t_rec >= lo - 1e-9) & (t_rec <= hi + 1e-9)
            if str(v["sweep_group"]) != "all":
                sel &= sweep == int(v["sweep_group"])
            rows = np.flatnonzero(sel)
        parts, _rule = found.get(name, ([], ""))
        found[name] = ([*parts, rows], str(v["window"]))
    out = {}
    for name, (parts, rule) in found.items():
        rows = np.unique(np.concatenate(parts)) if parts else np.empty(0, np.int64)
        out[name] = (rows[np.lexsort((t_rec[rows], sweep[rows]))] if rows.size else rows, rule)
    return out
