"""A verdict's summary at once: only its conditions, from the per-beat values already measured.

A review key changes one beat, and so the summary of one condition. That summary is made again
here, on the GUI thread, by the core's own :func:`analysis.stats.summarize` over the beats of
that condition only and without the ensemble-averaged beat (which reads samples): a few
milliseconds. The other conditions keep their summaries as they are. The ensemble columns of the
changed condition keep their earlier values until the full summary job (ensemble included,
off the GUI thread) replaces them; :func:`merge_quick` says which conditions wait for it.
"""

from __future__ import annotations

from collections.abc import Iterable
from dataclasses import replace

import numpy as np

from analysis.session import Session
from analysis.stats import summarize
from analysis.table import BeatTable

__all__ = ["quick_summaries"]


def quick_summaries(session: Session, key: str, table: BeatTable, shown: list, rows: Iterable[int]) -> tuple[list, set[str]]:
    """The summaries shown, with the conditions of ``rows`` summarised again.

    Parameters
    ----------
    session : Session
    key : str
        The recording.
    table : BeatTable
        Its reviewed table, the verdicts of ``rows`` already applied.
    shown : list of analysis.stats.Summary
        The summaries shown now (all conditions).
    rows : iterable of int
        The beats whose verdict changed.

    Returns
    -------
    (list of Summary, set of str)
        The summaries (same order as ``shown``) and the names of the conditions summarised
        again, whose ensemble columns are those of before.
    """
    rows = np.asarray(sorted({int(r) for r in rows}), dtype=np.int64)
    if not shown or not rows.size or "condition" not in table:
        return shown, set()
    condition = np.asarray(table["condition"], dtype=object)
    names = set(condition[rows].tolist())
    if not names <= {str(s.values["condition"]) for s in shown}:
        return shown, set()  # a condition not summarised before: the full job makes it
    info = session.info(key)
    settings = session.settings(key)
    mine = np.flatnonzero(np.isin(condition, list(names)))
    fresh = summarize(
        table.take(mine), label=session.label(key), sweep_starts_s=info.sweep_starts_s,
        sweep_durations_s=info.sweep_durations_s,
        conditions=[c for c in session.conditions(key) if c.name in names],
        settings=settings.summary, settings_hash=settings.short_hash(),
    )
    by_name = {(str(s.values["condition"]), str(s.values["sweep_group"])): s for s in fresh}
    out = []
    for old in shown:
        new = by_name.get((str(old.values["condition"]), str(old.values["sweep_group"])))
        if new is None:
            out.append(old)
            continue
        values = dict(new.values)
        for name, value in old.values.items():
            if name.startswith("ensemble_"):
                values[name] = value
        out.append(replace(new, values=values, ensemble=old.ensemble, beat_rows=mine[np.asarray(new.beat_rows, np.int64)]))
    return out, names
