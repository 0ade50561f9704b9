"""Event and quality flags on measured beats, and the automatic rejection rules.

Flags are suggestions the user confirms in review, except where a rejection rule of the quality
settings says otherwise. By default only artefact-like detections (``artefact``, ``clipped``)
are rejected; every physiological flag stays a suggestion, and ``no_overshoot`` can never reject
(central nodal cells can peak near 0 mV).

Vocabulary (the words of the ``flags`` column this module adds, in the order they are written)
------------------------------------------------------------------------------------------------
ead
    Early afterdepolarisation: during repolarisation, between ``ead_start_repol_pct`` % of
    repolarisation and APD90, the membrane potential (moving average over ``ead_smooth_ms``,
    taken on means of blocks an eighth as long; so is the DAD's) climbs again by at least
    ``ead_min_mV`` with a smoothed dV/dt above ``ead_min_dvdt_V_per_s`` (Cranefield's definition of
    an EAD as a depolarisation interrupting repolarisation; phase-2 EADs take off above -40 mV,
    phase-3 ones between -70 and -50 mV: Zhang & Qu 2021, Physiol Rep 9:e14883). The amplitude
    and take-off potential go to the ``ead_mV`` and ``ead_takeoff_mV`` columns.
dad
    Delayed afterdepolarisation: in the diastole after the beat (from its APD90 to the next
    beat's take-off, or to the end of the sweep), a transient depolarisation (moving average over
    ``dad_smooth_ms``) of at least ``dad_min_mV`` that falls back by as much before the next
    take-off, so that it did not fire
    (MEASUREMENTS.md: 1-5 mV, from memory). The flag goes on the beat the DAD follows; its
    amplitude to ``dad_mV``. A steadily rising phase 4 never counts: it does not fall back.
pause
    The beat's cycle length exceeds ``pause_factor`` times the running median of the cycle
    lengths around it (``pause_median_beats`` beats, same sweep; from memory, a setting).
clipped
    The beat's samples hold a run of at least ``clip_min_flat_ms`` (and ``clip_min_samples``)
    flat at the converter's limit: exactly at its highest or lowest code when the reader knows
    the range (ABF), otherwise equal samples at the sweep's highest or lowest value that cut the
    signal off, the trace falling away steeply on both sides (a smooth top that happens to be
    the sweep's maximum, even quantised into a run of equal samples, is not clipped).
noisy
    The rms noise of the beat's diastole (``noise_mV_rms`` column) exceeds ``noise_max_mV_rms``:
    the rms of the samples from MDP to take-off minus their zero-phase low-pass (second-order
    Butterworth, forward and backward, corner ``noise_highpass_hz``), so that white noise and
    50/60 Hz hum count fully and the slow phase-4 depolarisation does not. Diastoles shorter
    than two periods of the corner frequency are not assessed.
mdp_drift
    The MDP lies more than ``mdp_drift_max_mV`` from the median MDP of the recording's first
    ``mdp_reference_beats`` beats (a slowly failing seal or a drifting electrode).
low_apa
    APA below ``apa_min_mV``.
no_overshoot
    Peak below ``overshoot_min_mV`` (0 mV): a flag only, never a rejection.
artefact
    A detection no action potential can produce: dV/dt max above ``artefact_max_dvdt_V_per_s``
    or APD90 shorter than ``artefact_min_apd90_ms``.

Rejections set ``accepted`` to 0 and write ``auto: FLAG (why)`` to ``reject_reason``.
"""

from __future__ import annotations

from typing import Any

import numpy as np

from analysis.flags._trace import as_sweeps, sweep_trace_events
from analysis.table import BeatTable

__all__ = ["AUTO_PREFIX", "EVENT_FLAGS", "REJECTABLE_FLAGS", "TRACE_FLAGS", "apply_events", "artefact_like", "is_event_warning", "reapply_rules", "rejection_flags", "strip_events", "table_events"]

#: The flag words this module writes, in the order they appear in the ``flags`` column.
EVENT_FLAGS: tuple[str, ...] = (
    "ead", "dad", "pause", "clipped", "noisy", "mdp_drift", "low_apa", "no_overshoot", "artefact",
)
#: Flags a quality rule may reject automatically (``no_overshoot`` is deliberately absent).
REJECTABLE_FLAGS: tuple[str, ...] = (
    "artefact", "clipped", "noisy", "low_apa", "mdp_drift", "ead", "dad", "pause",
)
#: Extra columns this module adds to the beat table.
EVENT_COLUMNS: tuple[str, ...] = ("ead_mV", "ead_takeoff_mV", "dad_mV", "noise_mV_rms")
AUTO_PREFIX = "auto: "


def rejection_flags(quality) -> tuple[str, ...]:
    """The flags the quality settings reject automatically (their ``reject_FLAG`` fields)."""
    return tuple(f for f in REJECTABLE_FLAGS if bool(getattr(quality, f"reject_{f}", False)))


def _running_median(x: np.ndarray, size: int) -> np.ndarray:
    size = max(1, int(size)) | 1
    half = size // 2
    padded = np.concatenate((np.full(half, np.nan), x, np.full(half, np.nan)))
    windows = np.lib.stride_tricks.sliding_window_view(padded, size)
    med = np.full(x.size, np.nan)
    ok = np.isfinite(windows).any(axis=1)
    if ok.any():
        med[ok] = np.nanmedian(windows[ok], axis=1)
    return med


def artefact_like(dvdt_max_V_per_s: np.ndarray, apd90_ms: np.ndarray, quality) -> tuple[np.ndarray, np.ndarray, np.ndarray]:
    """Detections no action potential can produce: (either, too fast, too short), per beat.

    Too fast: dV/dt max above ``artefact_max_dvdt_V_per_s``; too short: APD90 below
    ``artefact_min_apd90_ms`` (undefined values never count).
    """
    dvdt = np.asarray(dvdt_max_V_per_s, float)
    apd90 = np.asarray(apd90_ms, float)
    with np.errstate(invalid="ignore"):
        too_fast = np.isfinite(dvdt) & (dvdt > quality.artefact_max_dvdt_V_per_s)
        too_short = np.isfinite(apd90) & (apd90 < quality.artefact_min_apd90_ms)
    return too_fast | too_short, too_fast, too_short


def table_events(beats: BeatTable, quality) -> tuple[dict[str, np.ndarray], list[str]]:
    """The table-based events: pause, MDP drift, low APA, no overshoot, artefact.

    Parameters
    ----------
    beats : BeatTable
        All beats of the recording, sorted by sweep then time.
    quality
        The quality settings section.

    Returns
    -------
    (dict of str to ndarray, list of str)
        Boolean flag arrays and ``artefact_detail`` text per beat; warnings for the recording.
    """
    k = len(beats)
    warnings: list[str] = []
    sweep = np.asarray(beats["sweep"])
    cl = np.asarray(beats["cl_ms"], float)
    pause = np.zeros(k, bool)
    for s in np.unique(sweep):
        rows = np.flatnonzero(sweep == s)
        med = _running_median(cl[rows], quality.pause_median_beats)
        with np.errstate(invalid="ignore"):
            pause[rows] = np.isfinite(cl[rows]) & (cl[rows] > quality.pause_factor * med)
    mdp = np.asarray(beats["mdp_mV"], float)
    drift = np.zeros(k, bool)
    finite = np.flatnonzero(np.isfinite(mdp))
    if finite.size:
        reference = float(np.median(mdp[finite[: int(quality.mdp_reference_beats)]]))
        with np.errstate(invalid="ignore"):
            drift = np.isfinite(mdp) & (np.abs(mdp - reference) > quality.mdp_drift_max_mV)
        spread = float(np.max(np.abs(mdp[finite] - reference)))
        if drift.any():
            warnings.append(
                f"MDP drifts by up to {spread:.1f} mV from the first beats' median ({reference:.1f} mV); "
                f"{int(drift.sum())} beat(s) flagged mdp_drift"
            )
    apa = np.asarray(beats["apa_mV"], float)
    peak = np.asarray(beats["peak_mV"], float)
    dvdt = np.asarray(beats["dvdt_max_V_per_s"], float)
    apd90 = np.asarray(beats["apd90_ms"], float)
    with np.errstate(invalid="ignore"):
        low_apa = np.isfinite(apa) & (apa < quality.apa_min_mV)
        no_overshoot = np.isfinite(peak) & (peak < quality.overshoot_min_mV)
    _, too_fast, too_short = artefact_like(dvdt, apd90, quality)
    detail = np.full(k, "", dtype=object)
    for i in np.flatnonzero(too_fast | too_short):
        parts = []
        if too_fast[i]:
            parts.append(f"dV/dt max {dvdt[i]:.4g} V/s > {quality.artefact_max_dvdt_V_per_s:g}")
        if too_short[i]:
            parts.append(f"APD90 {apd90[i]:.3g} ms < {quality.artefact_min_apd90_ms:g}")
        detail[i] = ", ".join(parts)
    flags = {
        "pause": pause, "mdp_drift": drift, "low_apa": low_apa, "no_overshoot": no_overshoot,
        "artefact": too_fast | too_short, "artefact_detail": detail,
    }
    return flags, warnings


_WARNING_MARKS = (
    "beat(s) rejected automatically by the quality rules", "beat(s) flagged mdp_drift", "beat(s) wait for review",
)


def is_event_warning(text: str) -> bool:
    """True for a warning this module wrote (replaced when the events are run again)."""
    return any(mark in text for mark in _WARNING_MARKS)


def strip_events(beats: BeatTable) -> BeatTable:
    """The table without this module's flags, columns and automatic rejections.

    Makes :func:`apply_events` idempotent, so that a change of the quality settings re-runs only
    the events, on the measured table.
    """
    if len(beats) == 0:
        return beats
    mine = set(EVENT_FLAGS)
    flags = np.array(
        [";".join(w for w in str(f).split(";") if w and w not in mine) for f in beats["flags"]], dtype=object,
    )
    reasons = beats.get("reject_reason")
    accepted = np.asarray(beats["accepted"]).copy()
    if reasons is not None:
        kept = []
        for i, r in enumerate(reasons):
            parts = [p for p in str(r).split("; ") if p and not p.startswith(AUTO_PREFIX)]
            if not parts:  # neither a rule's rejection nor a hold for review survives the strip
                accepted[i] = 1
            kept.append("; ".join(parts))
        reasons = np.array(kept, dtype=object)
    cols = beats.columns()
    for c in EVENT_COLUMNS:
        cols.pop(c, None)
    cols["flags"] = flags
    cols["accepted"] = accepted
    if reasons is not None:
        cols["reject_reason"] = reasons
    return BeatTable(cols)


def apply_events(
    beats: BeatTable,
    sweeps_v_mV: Any,
    fs_hz: float,
    quality: Any,
    *,
    sweeps_raw: Any = None,
    detection: Any = None,
    spikes: Any = None,
) -> tuple[BeatTable, list[str]]:
    """Add event and quality flags to a measured table and apply the rejection rules.

    Parameters
    ----------
    beats : BeatTable
        The measured beats (any earlier events are replaced, see :func:`strip_events`).
    sweeps_v_mV
        The membrane potential per sweep after LJP correction, in mV: a sweep source
        (:class:`RecordingSweeps`, read in windows) or arrays (``sweeps_v_mV[s]``). None skips
        the trace-based events (EAD, DAD, clipped, noisy).
    fs_hz : float
    quality
        The quality settings section.
    sweeps_raw
        The samples as recorded per sweep, for the clipping test (None: ``sweeps_v_mV``).
    detection
        The detection settings: electrical spikes by their rule are bridged before EADs and
        DADs are looked for (:func:`sweep_trace_events`; None: the defaults).
    spikes
        Per sweep, the spike spans already found (``(start, stop)`` rows, as detection gives
        them); None finds them by the detection settings' rule.

    Returns
    -------
    (BeatTable, list of str)
        The flagged table, with the columns ``ead_mV``, ``ead_takeoff_mV``, ``dad_mV`` and
        ``noise_mV_rms`` added and ``accepted`` / ``reject_reason`` set by the rejection rules;
        warnings for the recording.
    """
    base = strip_events(beats)
    k = len(base)
    found = {f: np.zeros(k, bool) for f in EVENT_FLAGS}
    extra = {c: np.full(k, np.nan) for c in EVENT_COLUMNS}
    details = {f: np.full(k, "", dtype=object) for f in ("clipped", "artefact")}
    sweep = np.asarray(base["sweep"]) if k else np.empty(0, int)
    source, raw = as_sweeps(sweeps_v_mV), as_sweeps(sweeps_raw)
    if source is not None:
        for s in np.unique(sweep):
            rows = np.flatnonzero(sweep == s)
            res = sweep_trace_events(source, int(s), fs_hz, base.take(rows), quality, raw=raw, detection=detection,
                                     spikes=None if spikes is None else spikes.get(int(s)))
            for f in ("ead", "dad", "clipped", "noisy"):
                found[f][rows] = res[f]
            for c in EVENT_COLUMNS:
                extra[c][rows] = res[c]
            details["clipped"][rows] = res["clip_detail"]
    table_flags, warnings = table_events(base, quality) if k else ({}, [])
    for f in ("pause", "mdp_drift", "low_apa", "no_overshoot", "artefact"):
        if k:
            found[f] = table_flags[f]
    if k:
        details["artefact"] = table_flags["artefact_detail"]

    return _assemble(base, found, details, extra, quality, warnings)


#: The flags read from the trace (:func:`sweep_trace_events`); the others come from the table.
TRACE_FLAGS: tuple[str, ...] = ("ead", "dad", "clipped", "noisy")


def reapply_rules(beats: BeatTable, quality: Any) -> tuple[BeatTable, list[str]] | None:
    """The flags and automatic rejections of new quality settings, without reading any samples.

    ``beats`` is a table :func:`apply_events` flagged under settings that differ from
    ``quality`` only in the table's rules (pause, MDP drift, low APA, overshoot, the noise
    threshold, which flags reject). The trace's findings are taken from it as they are: the
    ``ead``, ``dad`` and ``clipped`` words and the ``noise_mV_rms``, ``ead_mV``,
    ``ead_takeoff_mV`` and ``dad_mV`` columns; ``noisy`` is judged again on the noise column.
    The result is the table :func:`apply_events` gives with ``quality``. Returns None when it
    cannot be told from the table alone (a clipped beat to reject whose clipping detail the
    table does not hold): the events must then run again.
    """
    k = len(beats)
    if k == 0:
        return beats, []
    missing = [c for c in EVENT_COLUMNS if c not in beats]
    if missing:
        return None
    words = [set(str(f).split(";")) for f in beats["flags"]]
    found = {f: np.zeros(k, bool) for f in EVENT_FLAGS}
    for f in ("ead", "dad", "clipped"):
        found[f] = np.array([f in w for w in words], bool)
    details = {"clipped": np.full(k, "", dtype=object)}
    if getattr(quality, "reject_clipped", False) and found["clipped"].any():
        prefix = f"{AUTO_PREFIX}clipped ("
        for i in np.flatnonzero(found["clipped"]):
            parts = [p for p in str(beats["reject_reason"][i]).split("; ") if p.startswith(prefix)]
            if not parts:
                return None
            details["clipped"][i] = parts[0][len(prefix):-1]
    extra = {c: np.asarray(beats[c], float) for c in EVENT_COLUMNS}
    with np.errstate(invalid="ignore"):
        found["noisy"] = np.isfinite(extra["noise_mV_rms"]) & (extra["noise_mV_rms"] > quality.noise_max_mV_rms)
    base = strip_events(beats)
    table_flags, warnings = table_events(base, quality)
    for f in ("pause", "mdp_drift", "low_apa", "no_overshoot", "artefact"):
        found[f] = table_flags[f]
    details["artefact"] = table_flags["artefact_detail"]
    return _assemble(base, found, details, extra, quality, warnings)


def _assemble(base: BeatTable, found: dict, details: dict, extra: dict, quality: Any,
              warnings: list[str]) -> tuple[BeatTable, list[str]]:
    """The flagged table: event words appended, rejection rules applied, event columns added."""
    k = len(base)
    flags_out = []
    for i, old in enumerate(base["flags"]):
        words = [w for w in str(old).split(";") if w] + [f for f in EVENT_FLAGS if found[f][i]]
        flags_out.append(";".join(words))
    accepted = np.asarray(base["accepted"]).copy()
    reasons = list(base["reject_reason"]) if "reject_reason" in base else [""] * k
    rules = rejection_flags(quality)
    n_auto = 0
    for i in range(k):
        why = []
        for f in rules:
            if found[f][i]:
                detail = details[f][i] if f in details else ""
                why.append(f"{AUTO_PREFIX}{f}" + (f" ({detail})" if detail else ""))
        if why:
            n_auto += int(accepted[i] == 1)
            accepted[i] = 0
            reasons[i] = "; ".join([r for r in [str(reasons[i])] if r] + why)
    if n_auto:
        warnings.append(f"{n_auto} beat(s) rejected automatically by the quality rules ({', '.join(rules)})")
    table = base.with_columns(
        flags=np.array(flags_out, dtype=object), accepted=accepted,
        reject_reason=np.array(reasons, dtype=object), **extra,
    )
    return table, warnings
