"""Summaries: one per recording x sweep group x condition, and the summary CSV.

A summary covers the beats of one recording (the ``file``), one sweep group (all sweeps pooled,
``"all"``, or each sweep alone, by the ``sweep_groups`` summary setting) and one condition (empty
for beats outside every condition). It uses only *eligible* beats: accepted (after automatic
rules and review) and not flagged ``no_diastole`` or ``truncated``; of those, only the ones in the
condition's steady-state window (:class:`analysis.conditions.SteadyState`).

The window
----------
One concept, named ``window`` everywhere in a summary: the stretch of the condition its means are
taken over, chosen by the condition's steady-state rule (``window`` holds the rule;
``window_start_s`` and ``window_end_s`` its start and end, seconds from the start of the
recording). The
automatic rule's proposal is ``suggested_window_*``.

What a summary holds
--------------------
* the counts: ``n_beats`` (every beat of the group and condition, whatever its status),
  ``n_in_window`` (those whose upstroke lies in the window), ``n_used`` (the beats the means are
  taken over: accepted, in the window, not ``no_diastole`` or ``truncated``), ``n_rejected`` and
  ``n_to_review`` (beats of the condition rejected, and held for review by a flag of
  ``quality.review_flags``: :func:`analysis.decisions.beat_status`);
* mean and sample SD of every per-beat parameter;
* cycle-length variability (CV, RMSSD, Poincare SD1/SD2; SDNN is the CL SD) and the short-term
  variability of APD90, with the mean rate beside them (:mod:`analysis.stats._variability`);
* the DDR-CL relation across beats: least-squares slope of CL on DDR and Pearson's r;
* the cell-type hint and the rule that gave it;
* the suggested window (:func:`suggest_steady_state`);
* the ensemble-averaged beat (:mod:`analysis.stats._ensemble`) and its own parameters.

The summary CSV's columns are :data:`SUMMARY_COLUMNS`, described in ``docs/results-format.md``.
"""

from __future__ import annotations

import csv
import io
import math
from dataclasses import dataclass, field
from typing import Any, Callable, Mapping, Sequence

import numpy as np

from analysis.columns import summarised_columns
from analysis.conditions import Condition, SteadyState
from analysis.decisions import REJECTED, TO_REVIEW
from analysis.stats._ensemble import Ensemble, ensemble_average
from analysis.table import BeatTable, format_value
from analysis.stats._variability import CellTypeRule, cell_type_hint, coefficient_of_variation_pct, linear_relation, poincare_sd1_sd2, rmssd, stv

__all__ = [
    "PARAMETERS",
    "SUMMARY_COLUMNS",
    "SUMMARY_DECIMALS",
    "Summary",
    "eligible_mask",
    "suggest_steady_state",
    "summarize",
    "summary_columns",
    "summary_csv",
]

#: Per-beat parameters summarised: (beats column, name stem, unit as the name spells it), the
#: catalogue's summarised columns in CSV order.
PARAMETERS: tuple[tuple[str, str, str], ...] = tuple((c.name, c.stem, c.unit_in_name) for c in summarised_columns())
_EXCLUDED_FLAGS = ("no_diastole", "truncated")

#: The summary CSV's columns, in order, with their decimals (None: text or integers).
_COLUMN_SPECS: tuple[tuple[str, int | None], ...] = (
    ("file", None), ("sweep_group", None), ("condition", None), ("window", None),
    ("window_start_s", 3), ("window_end_s", 3),
    ("n_beats", None), ("n_in_window", None), ("n_used", None), ("n_rejected", None), ("n_to_review", None),
    *[(f"{stem}_{stat}_{unit}", 3) for _, stem, unit in PARAMETERS for stat in ("mean", "sd")],
    ("cl_cv_pct", 3), ("cl_rmssd_ms", 3), ("cl_sd1_ms", 3), ("cl_sd2_ms", 3), ("apd90_stv_ms", 3),
    ("ddr_cl_slope_ms_per_mV_per_s", 4), ("ddr_cl_r", 4),
    ("suggested_window_start_s", 3), ("suggested_window_end_s", 3), ("suggested_window_note", None),
    ("cell_type_hint", None), ("cell_type_rule", None),
    ("ensemble_n", None),
    *[(f"ensemble_{col}", 3) for col, stem, _ in PARAMETERS if stem not in ("cl", "rate")],
    ("settings_hash", None),
)
SUMMARY_COLUMNS: tuple[str, ...] = tuple(name for name, _ in _COLUMN_SPECS)
#: Digits after the decimal point of each summary column in CSV (None: not a number).
SUMMARY_DECIMALS = dict(_COLUMN_SPECS)


@dataclass
class Summary:
    """The summary of one recording x sweep group x condition; see the module docstring.

    Attributes
    ----------
    values : dict of str to object
        One entry per :data:`SUMMARY_COLUMNS` name (NaN where undefined).
    steady_suggestion : tuple of float or None
        The suggested steady-state window (start, end), seconds from the start of the recording.
    steady_note : str
        How the suggestion was found, or why there is none.
    ensemble : Ensemble or None
        The ensemble-averaged beat, when traces were available.
    beat_rows : ndarray of int
        Rows of the beat table the summary used.
    """

    values: dict[str, object]
    steady_suggestion: tuple[float, float] | None = None
    steady_note: str = ""
    ensemble: Ensemble | None = None
    beat_rows: np.ndarray = field(default_factory=lambda: np.empty(0, dtype=np.int64))

    def __getitem__(self, name: str) -> object:
        return self.values[name]


def eligible_mask(beats: BeatTable) -> np.ndarray:
    """True for beats a summary may use: accepted and not ``no_diastole`` or ``truncated``."""
    accepted = np.asarray(beats["accepted"]) == 1
    if not len(beats):
        return np.zeros(0, bool)
    # Judged once per distinct flag string (a table holds few), not once per beat.
    flags = np.asarray(beats["flags"], dtype=object)
    distinct, where = np.unique(flags.astype(str), return_inverse=True)
    clean = np.array([not any(f in x.split(";") for f in _EXCLUDED_FLAGS) for x in distinct], dtype=bool)
    return accepted & clean[where.reshape(-1)]


def _window_slopes(t: np.ndarray, y: np.ndarray, start: np.ndarray, stop: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
    """Least-squares slope and mean of y over beats ``start[k]:stop[k]``, for every k."""
    ok = np.isfinite(y)
    yy = np.where(ok, y, 0.0)
    tt = np.where(ok, t - t[0], 0.0)  # shift for numerical stability
    c = [np.concatenate(([0.0], np.cumsum(a))) for a in (ok.astype(float), tt, yy, tt * tt, tt * yy)]
    n, st, sy, stt, sty = (a[stop] - a[start] for a in c)
    with np.errstate(invalid="ignore", divide="ignore"):
        denom = n * stt - st * st
        slope = np.where((n >= 3) & (denom > 0), (n * sty - st * sy) / np.where(denom > 0, denom, 1.0), np.nan)
        mean = np.where(n > 0, sy / np.where(n > 0, n, 1.0), np.nan)
    return slope, mean


def suggest_steady_state(
    t_s: np.ndarray,
    cl_ms: np.ndarray,
    apd90_ms: np.ndarray,
    *,
    window_s: float,
    tolerance_pct_per_min: float,
    min_beats: int,
) -> tuple[tuple[float, float] | None, str]:
    """The latest stretch over which the rolling means of CL and APD90 are stable.

    Parameters
    ----------
    t_s : ndarray
        Upstroke times of the eligible beats of one condition, seconds from the start of the
        recording, increasing.
    cl_ms, apd90_ms : ndarray
        Their cycle lengths and APD90s (NaN allowed).
    window_s : float
        Length of the rolling window, centred on each beat (cut short at the ends).
    tolerance_pct_per_min : float
        A beat is steady when, over the window centred on it, the least-squares slopes of CL
        and of APD90 relative to their means are both below this, in % per minute: the
        rolling mean changes by less than that.
    min_beats : int
        Fewest beats a window may hold.

    Returns
    -------
    ((float, float) or None, str)
        The suggested window (time of its first and last beat): the latest run of consecutive
        steady beats; and a note saying how it was found or why none was.

    Notes
    -----
    Drug wash-in reaches a plateau at the end of a condition, so the latest steady run is the
    natural steady state; the user may always replace it (last T s, last N beats, all). A
    centred window keeps the beats of a wash-in's tail out: a beat counts as steady only when
    the change around it, on both sides, is small.
    """
    t = np.asarray(t_s, dtype=np.float64)
    if t.size < max(3, min_beats):
        return None, f"too few beats ({t.size}) for a steady state of at least {max(3, min_beats)} beats"
    start = np.searchsorted(t, t - window_s / 2.0, side="left")
    stop = np.searchsorted(t, t + window_s / 2.0, side="right")
    rel = []
    for y in (np.asarray(cl_ms, float), np.asarray(apd90_ms, float)):
        slope, mean = _window_slopes(t, y, start, stop)
        with np.errstate(invalid="ignore", divide="ignore"):
            rel.append(np.abs(slope / mean) * 6000.0)  # 1/s -> % per minute
    change = np.fmax(rel[0], rel[1])
    with np.errstate(invalid="ignore"):
        steady = (stop - start >= min_beats) & (rel[0] < tolerance_pct_per_min) & (rel[1] < tolerance_pct_per_min)
    if not steady.any():
        least = float(np.nanmin(change)) if np.isfinite(change).any() else math.nan
        return None, (
            f"no {window_s:g} s window with CL and APD90 changing by less than {tolerance_pct_per_min:g} %/min"
            + (f" (least change {least:.3g} %/min)" if math.isfinite(least) else "")
        )
    edges = np.diff(np.concatenate(([0], steady.astype(np.int8), [0])))
    runs = [(a, b - 1) for a, b in zip(np.flatnonzero(edges == 1), np.flatnonzero(edges == -1)) if b - a >= min_beats]
    if not runs:
        return None, f"steady stretches are shorter than {min_beats} beats"
    first, last = runs[-1]
    return (float(t[first]), float(t[last])), (
        f"CL and APD90 change by less than {tolerance_pct_per_min:g} %/min over {window_s:g} s windows"
    )


def _select_window(t: np.ndarray, steady: SteadyState, cond_end_s: float, suggestion) -> tuple[np.ndarray, str, float, float]:
    """Mask of eligible beats (time-ordered ``t``) inside a condition's steady-state window."""
    if t.size == 0:
        return np.zeros(0, bool), steady.text(), math.nan, math.nan
    if steady.kind == "last_s":
        end = min(cond_end_s, float(t[-1])) if math.isfinite(cond_end_s) else float(t[-1])
        lo = max(end - steady.value, -math.inf)
        return (t > lo - 1e-12) & (t <= end + 1e-12), steady.text(), lo, end
    if steady.kind == "last_beats":
        m = np.zeros(t.size, bool)
        m[-int(steady.value):] = True
        return m, steady.text(), float(t[m][0]), float(t[-1])
    if steady.kind == "auto" and suggestion is not None:
        lo, hi = suggestion
        return (t >= lo - 1e-12) & (t <= hi + 1e-12), "auto", lo, hi
    rule = "all" if steady.kind == "all" else "auto (none found: all)"
    return np.ones(t.size, bool), rule, float(t[0]), float(t[-1])


def _sweep_groups(sweep: np.ndarray, how: str) -> list[tuple[str, np.ndarray]]:
    if how == "each":
        return [(str(int(s)), sweep == s) for s in np.unique(sweep)]
    return [("all", np.ones(sweep.size, bool))]


def summarize(
    beats: BeatTable,
    *,
    label: str,
    sweep_starts_s: Sequence[float],
    sweep_durations_s: Sequence[float],
    conditions: Sequence[Condition] = (),
    settings,
    settings_hash: str = "",
    ensemble_source: Any = None,
    fs_hz: float | None = None,
    measure_ensemble: Callable[[np.ndarray], Mapping[str, float] | None] | None = None,
) -> list[Summary]:
    """Summaries of one recording's beats, one per sweep group x condition.

    Parameters
    ----------
    beats : BeatTable
        The reviewed table (decisions and conditions applied: ``accepted`` and ``condition``).
    label : str
        The ``file`` column.
    sweep_starts_s, sweep_durations_s : sequence of float
        Per sweep of the recording, to place beats in recording time.
    conditions : sequence of Condition
        The recording's conditions (for their steady-state windows and ends).
    settings
        The summary settings section (``sweep_groups``, ``steady_window_s``,
        ``steady_tolerance_pct_per_min``, ``steady_min_beats`` and the cell-type thresholds).
    settings_hash : str
        The analysis settings' short hash, written to every row.
    ensemble_source : sweep source, callable or None
        The samples in mV after LJP correction: a sweep source (``n_samples(sweep)``,
        ``read(sweep, start, stop)``; only beat windows are read) or ``ensemble_source(sweep)``
        returning a whole sweep; None skips the ensemble-averaged beat.
    fs_hz : float or None
        Sampling rate, needed with ``ensemble_source``.
    measure_ensemble : callable or None
        Measures the ensemble beat: given one cycle repeated three times, returns the middle
        beat's parameters by beats-table column name (:func:`analysis.stats.measure_cycle`).

    Returns
    -------
    list of Summary
        Sweep groups in order, then conditions in the given order, then the unnamed one.
    """
    n = len(beats)
    if n == 0:
        return []
    sweep = np.asarray(beats["sweep"], dtype=np.int64)
    starts = np.asarray(sweep_starts_s, dtype=np.float64)
    t_rec = starts[sweep] + np.asarray(beats["t_upstroke_s"], float)
    condition = np.asarray(beats["condition"], dtype=object)
    eligible = eligible_mask(beats)
    if "verdict" in beats:
        verdict = np.asarray(beats["verdict"], dtype=object)
        rejected, to_review = verdict == REJECTED, verdict == TO_REVIEW
    else:  # a table without statuses: accepted or rejected
        rejected, to_review = np.asarray(beats["accepted"]) == 0, np.zeros(n, bool)
    by_name = {c.name: c for c in conditions}
    names = [c.name for c in conditions if np.any(condition == c.name)]
    if np.any(condition == ""):
        names.append("")
    durations = np.asarray(sweep_durations_s, dtype=np.float64)
    rule = CellTypeRule(**{f: getattr(settings, f) for f in CellTypeRule.__dataclass_fields__ if hasattr(settings, f)})
    out: list[Summary] = []
    pending: list[tuple] = []
    for group, in_group in _sweep_groups(sweep, getattr(settings, "sweep_groups", "all")):
        for name in names:
            rows_all = np.flatnonzero(in_group & (condition == name))
            if rows_all.size == 0:
                continue
            rows = rows_all[eligible[rows_all]]
            rows = rows[np.argsort(t_rec[rows], kind="stable")]
            cond = by_name.get(name)
            steady = cond.steady if cond is not None else SteadyState("all")
            suggestion, note = suggest_steady_state(
                t_rec[rows], np.asarray(beats["cl_ms"], float)[rows], np.asarray(beats["apd90_ms"], float)[rows],
                window_s=settings.steady_window_s, tolerance_pct_per_min=settings.steady_tolerance_pct_per_min,
                min_beats=int(settings.steady_min_beats),
            )
            if cond is not None:
                cond_end = cond.span_s(starts, durations)[1]
            else:
                cond_end = math.inf
            mask, window, lo, hi = _select_window(t_rec[rows], steady, cond_end, suggestion)
            used = rows[mask]
            values = _values(beats, used, sweep)
            with np.errstate(invalid="ignore"):
                in_window = (t_rec[rows_all] >= lo - 1e-12) & (t_rec[rows_all] <= hi + 1e-12)
            values.update(
                file=label, sweep_group=group, condition=name, window=window, window_start_s=lo,
                window_end_s=hi, n_beats=int(rows_all.size), n_in_window=int(in_window.sum()),
                n_used=int(used.size), n_rejected=int(rejected[rows_all].sum()),
                n_to_review=int(to_review[rows_all].sum()), settings_hash=settings_hash,
                suggested_window_start_s=suggestion[0] if suggestion else math.nan,
                suggested_window_end_s=suggestion[1] if suggestion else math.nan, suggested_window_note=note,
            )
            hint, why = cell_type_hint(
                apd90_ms=values["apd90_mean_ms"], apd50_ms=values["apd50_mean_ms"],
                dvdt_max_V_per_s=values["dvdt_max_mean_V_per_s"], mdp_mV=values["mdp_mean_mV"],
                ddr_mV_per_s=values["ddr_mean_mV_per_s"], rule=rule,
            ) if used.size else ("unclassified", "no accepted beats")
            values.update(cell_type_hint=hint, cell_type_rule=why)
            ens = None
            if ensemble_source is not None and fs_hz is not None and used.size:
                ens = ensemble_average(beats, used, ensemble_source, fs_hz, measure=measure_ensemble)
            values["ensemble_n"] = ens.n_beats if ens is not None else 0
            for col, stem, _ in PARAMETERS:
                if stem not in ("cl", "rate"):
                    values[f"ensemble_{col}"] = ens.parameters.get(col, math.nan) if ens is not None else math.nan
            pending.append((values, suggestion, note, ens, used))
    _one_hint_per_cell([p[0] for p in pending])
    for values, suggestion, note, ens, used in pending:
        out.append(Summary({c: values.get(c, math.nan) for c in SUMMARY_COLUMNS}, suggestion, note, ens, used))
    return out


def _one_hint_per_cell(rows: list[dict[str, object]]) -> None:
    """The cell-type hint of a recording, judged once: on its first condition (the baseline, in
    the conditions' order) with accepted beats, and shown on every row. A drug that slows the
    rate or changes the action potential does not change what cell it is recorded from."""
    judged = next((r for r in rows if int(r.get("n_used", r.get("n_accepted", 0)) or 0) > 0), None)
    if judged is None:
        return
    name = str(judged.get("condition", "")) or "all beats"
    hint, why = judged["cell_type_hint"], f"{judged['cell_type_rule']} (judged once, on {name})"
    for r in rows:
        r.update(cell_type_hint=hint, cell_type_rule=why)


def _values(beats: BeatTable, used: np.ndarray, sweep: np.ndarray) -> dict[str, object]:
    values: dict[str, object] = {}
    for col, stem, unit in PARAMETERS:
        x = np.asarray(beats[col], float)[used]
        x = x[np.isfinite(x)]
        values[f"{stem}_mean_{unit}"] = float(np.mean(x)) if x.size else math.nan
        values[f"{stem}_sd_{unit}"] = float(np.std(x, ddof=1)) if x.size >= 2 else math.nan
    # Successive pairs only between beats that follow each other directly in one sweep.
    beat_no = np.asarray(beats["beat"], dtype=np.int64)[used]
    sw = sweep[used]
    consecutive = (np.diff(beat_no) == 1) & (np.diff(sw) == 0)
    cl = np.asarray(beats["cl_ms"], float)[used]
    apd90 = np.asarray(beats["apd90_ms"], float)[used]
    values["cl_cv_pct"] = coefficient_of_variation_pct(cl)
    values["cl_rmssd_ms"] = rmssd(cl, consecutive)
    values["cl_sd1_ms"], values["cl_sd2_ms"] = poincare_sd1_sd2(cl, consecutive)
    values["apd90_stv_ms"] = stv(apd90, consecutive)
    slope, r, _ = linear_relation(np.asarray(beats["ddr_mV_per_s"], float)[used], cl)
    values["ddr_cl_slope_ms_per_mV_per_s"] = slope
    values["ddr_cl_r"] = r
    return values


def summary_columns(summaries: Sequence[Summary]) -> dict[str, np.ndarray]:
    """Summaries as equal-length column arrays in :data:`SUMMARY_COLUMNS` order."""
    out: dict[str, np.ndarray] = {}
    for name in SUMMARY_COLUMNS:
        vals = [s.values[name] for s in summaries]
        if SUMMARY_DECIMALS[name] is not None:
            out[name] = np.array(vals, dtype=np.float64)
        elif name.startswith("n_") or name == "ensemble_n":
            out[name] = np.array(vals, dtype=np.int64)
        else:
            out[name] = np.array([str(v) for v in vals], dtype=object)
    return out


def summary_csv(columns: Mapping[str, Sequence] | Sequence[Mapping[str, Sequence]], *, header: bool = True) -> str:
    """The summary CSV text (``\\n`` line ends, undefined values empty) of one or more column sets."""
    sets = [columns] if isinstance(columns, Mapping) else list(columns)
    out = io.StringIO()
    writer = csv.writer(out, lineterminator="\n")
    if header:
        writer.writerow(SUMMARY_COLUMNS)
    for cols in sets:
        n = len(cols[SUMMARY_COLUMNS[0]]) if cols else 0
        for i in range(n):
            writer.writerow([format_value(_scalar(cols[c][i]), SUMMARY_DECIMALS[c]) for c in SUMMARY_COLUMNS])
    return out.getvalue()


def _scalar(v):
    return v.item() if hasattr(v, "item") else v
