"""Saving a :class:`~analysis.session.Session` to a results file and opening it again.

The results file stores each recording's beat table as the user sees it (decisions and
conditions applied) so that h5py, MATLAB and R users read the reviewed verdicts directly, plus
two columns with the automatic verdicts (``auto_accepted``, ``auto_reject_reason``) from which,
with the decision log, the session is rebuilt exactly.
"""

from __future__ import annotations

import contextlib
import json
import math
import os
from types import SimpleNamespace

import numpy as np

from analysis.conditions import ConditionError, check_conditions
from analysis.decisions import apply_status
from analysis.errors import ResultsFileError, SettingsError
from analysis.results import (
    RecordingFacts,
    ResultsFile,
    StoredRecording,
    facts_values,
    load_results,
    results_lock,
    save_results,
)
from analysis.session._jobs import summaries_of
from analysis.session._types import Entry as _Entry
from analysis.session._types import SessionCore, reviewed_table
from analysis.session._types import key_of as _key_of
from analysis.settings import Settings
from analysis.stats import (
    PARAMETERS,
    SUMMARY_COLUMNS,
    SUMMARY_DECIMALS,
    Ensemble,
    Summary,
    summary_columns,
)
from analysis.table import BeatTable

__all__ = ["AUTO_COLUMNS", "open_session", "save_session", "stored_recordings"]

#: Columns of the stored beat table that hold the automatic verdicts.
AUTO_COLUMNS = ("auto_accepted", "auto_reject_reason")


def stored_recordings(session: SessionCore) -> list[StoredRecording]:
    """Every recording of a session in the results file's terms (summaries computed)."""

    out = []
    for key in session.recordings:
        e = session._entry(key)
        view = session.beats(key)
        auto = e.table
        n = len(auto)
        reasons = auto["reject_reason"] if "reject_reason" in auto else np.full(n, "", dtype=object)
        stored = view.with_columns(auto_accepted=np.asarray(auto["accepted"]), auto_reject_reason=reasons)
        summaries = session.summaries(key)
        ensembles = [
            (s.ensemble.v_mV, s.ensemble.fs_hz, s.ensemble.t0_s) if s.ensemble is not None else (np.empty(0), e.info.sampling_rate_hz, 0.0)
            for s in summaries
        ]
        out.append(StoredRecording(
            **facts_values(e.info), ljp_mV=e.ljp_mV,
            settings_json=json.dumps(e.settings.to_dict(), sort_keys=True, indent=1, allow_nan=False),
            settings_schema=int(e.settings.to_dict()["schema_version"]), settings_hash=e.settings.short_hash(),
            beats=stored, decisions=e.decisions.copy(), conditions=tuple(e.conditions),
            summary=summary_columns(summaries), ensembles=ensembles, warnings=tuple(e.warnings),
        ))
    return out


def save_session(session: SessionCore, path: str | os.PathLike, *, atomic: bool = True) -> None:
    """Write a session atomically (see :func:`analysis.results.save_results` for ``atomic``).

    Saving into the file the session came from (or was last saved to) keeps what other writers
    (``upstroke analyze --out``, ``upstroke batch``, another window) added to it meanwhile: under
    the results file's lock (:func:`analysis.results.results_lock`) the file is read again, and
    each recording of it that the session does not hold follows the session's own, unless the
    user removed it from the session (:attr:`Session.removed_keys`): that one stays removed.
    """
    default = json.dumps(session.default_settings.to_dict(), sort_keys=True, indent=1, allow_nan=False)
    target = os.path.abspath(os.fspath(path))
    with results_lock(target) if atomic else contextlib.nullcontext():
        mine = stored_recordings(session)
        others = _added_by_others(session, target)
        # The file the session came from lends the new file any groups of other modules it holds.
        save_results(path, ResultsFile(mine + others, default, path=session.path), atomic=atomic)


def _stored_key(r: StoredRecording) -> str:
    return _key_of(r.source_path) if r.sha256 else r.label


def _added_by_others(session: SessionCore, target: str) -> list[StoredRecording]:
    """The recordings another writer added to ``target`` since the session read or wrote it."""
    if session.path is None or os.path.abspath(session.path) != target or not os.path.isfile(target):
        return []
    try:
        content = load_results(target, verify_sources=False)
    except ResultsFileError:
        return []  # not (or no longer) a results file: it is replaced, as before
    skip = set(session.recordings) | set(getattr(session, "removed_keys", ()))
    return [r for r in content.recordings if _stored_key(r) not in skip]


def _settings(text: str, path: str, label: str):
    try:
        return Settings.from_dict(json.loads(text))
    except (ValueError, SettingsError) as exc:
        problem = exc.problem if isinstance(exc, SettingsError) else f"not JSON ({exc})"
        raise ResultsFileError(path, f"the settings of {label} cannot be read: {problem}", "update Upstroke, or analyse the recording again") from None


def _auto_table(stored: BeatTable, review_flags) -> BeatTable:
    cols = stored.columns()
    for c in AUTO_COLUMNS:
        if c not in cols:
            raise KeyError(c)
    cols["accepted"] = cols.pop("auto_accepted")
    cols["reject_reason"] = cols.pop("auto_reject_reason")
    cols["condition"] = np.full(len(stored), "", dtype=object)
    # The stored status is the reviewed one; the automatic table holds the rules' own.
    return apply_status(BeatTable(cols), None, review_flags)


def _stored_summaries(r: StoredRecording) -> list:
    """The saved summaries, so that a session opened without its sources keeps them."""


    cols = r.summary
    if list(cols) != list(SUMMARY_COLUMNS):
        return None  # written by another version of the summaries: recompute when asked
    for c in SUMMARY_COLUMNS:  # numbers where the summary CSV writes numbers (a damaged file)
        if SUMMARY_DECIMALS[c] is not None and np.asarray(cols[c]).dtype.kind not in "biuf":
            raise TypeError(f"summary column {c} holds text, not numbers")
    n = len(cols[SUMMARY_COLUMNS[0]])
    out = []
    for i in range(n):
        values = {c: (cols[c][i].item() if hasattr(cols[c][i], "item") else cols[c][i]) for c in SUMMARY_COLUMNS}
        ens = None
        if i < len(r.ensembles) and r.ensembles[i][0].size:
            v, fs, t0 = r.ensembles[i]
            params = {col: float(values[f"ensemble_{col}"]) for col, stem, _ in PARAMETERS if stem not in ("cl", "rate")}
            ens = Ensemble(np.asarray(v), fs, t0, int(values["ensemble_n"]), params)
        lo, hi = float(values["suggested_window_start_s"]), float(values["suggested_window_end_s"])
        suggestion = (lo, hi) if math.isfinite(lo) and math.isfinite(hi) else None
        out.append(Summary(values, suggestion, str(values["suggested_window_note"]), ens))
    return out


def open_session(cls: type[SessionCore], path: str | os.PathLike, *, verify_sources: bool = True, match_tolerance_s: float = 0.010) -> SessionCore:
    """Rebuild a session from a results file (recordings are opened lazily).

    Only the file's index is read now: each recording's facts and settings. Its beat table,
    decisions, conditions, summaries and warnings are read the first time the session uses them
    (schema-2 files; a schema-1 file is read whole but converted on first use all the same).
    """

    text = os.fspath(path)
    # Opening finds each source and compares its size; the SHA-256, which reads the whole
    # recording, is compared when the session first opens it (Session.recording).
    content: ResultsFile = load_results(text, verify_sources="quick" if verify_sources else False)
    default = _settings(content.default_settings_json, text, "the session") if content.default_settings_json else None
    session = cls(default, match_tolerance_s=match_tolerance_s)
    parsed: dict[str, object] = {}  # the distinct settings of the file, each parsed once
    for r in content.recordings:
        settings = parsed.get(r.settings_json)
        if settings is None:
            settings = parsed[r.settings_json] = _settings(r.settings_json, text, r.label)
        # The stored ljp_mV attribute is not read back: the settings hold the LJP (one home).
        info = RecordingFacts(**facts_values(r))
        key = _key_of(r.source_path) if r.sha256 else r.label
        base, n = key, 2
        while key in session._entries:  # a file written elsewhere may hold a source twice
            key, n = f"{base}#{n}", n + 1
        entry = _Entry.__new__(_Entry)
        entry.__dict__.update(
            info=info, settings=settings, recording=None, requested_channel=r.channel, version=0,
            unverified=bool(verify_sources and r.sha256), _load=_loader(r, text, info, settings, match_tolerance_s),
        )
        session._entries[key] = entry
    session.path = os.path.abspath(text)
    session.open_warnings = list(content.open_warnings)
    session._clean_depth = 0
    return session


def _older_ensembles(r: StoredRecording) -> dict[tuple[str, str], Ensemble]:
    """The ensemble beats of summaries written by another version of the summary columns, by
    (sweep group, condition): their samples and measured parameters are kept even though the
    summaries themselves are recomputed."""
    cols = r.summary
    names = [f"ensemble_{col}" for col, stem, _ in PARAMETERS if stem not in ("cl", "rate")]
    if not all(c in cols for c in ("sweep_group", "condition", "ensemble_n")):
        return {}
    out = {}
    for i in range(len(cols["condition"])):
        if i >= len(r.ensembles) or not r.ensembles[i][0].size:
            continue
        v, fs, t0 = r.ensembles[i]
        params = {n[len("ensemble_"):]: float(cols[n][i]) for n in names if n in cols}
        out[(str(cols["sweep_group"][i]), str(cols["condition"][i]))] = Ensemble(
            np.asarray(v), fs, t0, int(cols["ensemble_n"][i]), params)
    return out


def _recomputed_summaries(r: StoredRecording, loaded: dict, info: RecordingFacts, settings, tolerance_s: float):
    """Summaries of a file whose summary columns another version wrote, recomputed from its
    reviewed table; each keeps the ensemble beat stored for the same sweep group and condition
    when that ensemble averaged as many beats as the summary now uses (the samples may be gone)."""
    kept = _older_ensembles(r)
    if not kept:
        return None
    entry = SimpleNamespace(info=info, settings=settings, **loaded)
    out = summaries_of(reviewed_table(entry, tolerance_s), info, entry.conditions, settings, None)
    for s in out:
        ens = kept.get((str(s.values.get("sweep_group")), str(s.values.get("condition"))))
        if ens is None or s.ensemble is not None or ens.n_beats != s.values.get("n_used"):
            continue
        s.ensemble = ens
        s.values["ensemble_n"] = ens.n_beats
        for name, value in ens.parameters.items():
            if f"ensemble_{name}" in s.values:
                s.values[f"ensemble_{name}"] = value
    return out


def _loader(r: StoredRecording, path: str, info: RecordingFacts, settings, tolerance_s: float):
    """Reads a stored recording's tables into the session's terms, once, when first needed."""

    def load() -> dict:
        try:
            loaded = {
                "table": _auto_table(r.beats, settings.quality.review_flags), "warnings": tuple(r.warnings),
                "decisions": r.decisions, "conditions": check_conditions(r.conditions),
            }
            summaries = _stored_summaries(r)
            if summaries is None:
                summaries = _recomputed_summaries(r, loaded, info, settings, tolerance_s)
            return {**loaded, "summaries": summaries}
        except (KeyError, ValueError, TypeError, IndexError, ConditionError) as exc:
            raise ResultsFileError(path, f"the beats, conditions or summaries of {r.label} are damaged ({exc})", "analyse the recording again") from None

    return load
