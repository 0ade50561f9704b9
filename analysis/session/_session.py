"""A review session: recordings, their settings and results, decisions, conditions; undo and redo.

A :class:`Session` is the model the desktop app and the command line share. It holds any number
of analysed recordings, keyed by their source path, each with its own settings, its automatic
beat table (measurement, events and quality rules), the user's review decisions (an append-only
:class:`~analysis.decisions.DecisionLog`) and its conditions. :meth:`Session.beats` gives the
table as the user sees it: each beat's status (:func:`analysis.decisions.beat_status`: accepted,
rejected, or held for review by a flag of ``quality.review_flags``) in ``verdict``, ``accepted``,
``reject_reason``, ``decided_by`` and ``reviewed`` (1 where a review decision applies), the
``condition`` column filled in, and the ``recording_id``; :meth:`Session.review_status` gives the
status alone.

Every edit is a command on an undo stack. Change notifications are plain Python callbacks
(:meth:`Session.subscribe`), so the app can forward them as Qt signals and the core stays
Qt-free. A session is not thread-safe: call it from one thread. Heavy work still runs elsewhere,
as pure jobs over snapshots (:mod:`analysis.session._jobs`): :meth:`Session.settings_job` and
:meth:`Session.summary_job` are made on the session's thread, called in a worker, and their
results applied back with :meth:`Session.apply_settings` and :meth:`Session.set_summaries`,
which drop a result the session has moved on from.

The liquid-junction potential has one home, the recording's settings
(``settings(key).preprocess.ljp_mV``): :meth:`Session.info`, :meth:`Session.trace_mV`, the
summaries' ensemble beat and the results file all read it from there.

Events
------
``recording_added``, ``recording_removed``, ``results_changed`` (re-analysed),
``decisions_changed`` (``rows`` holds the rows decided), ``conditions_changed``,
``settings_changed``, ``history_changed`` (undo/redo availability, modified state), ``saved``,
``warning`` (``detail`` holds the text). Subscribe to ``"*"`` for all of them.

Examples
--------
>>> from analysis.synthetic import preset, synthesize
>>> from analysis.conditions import parse_condition
>>> syn = synthesize(preset("nodal-like"), duration_s=8.0, fs_hz=5_000.0, seed=3)
>>> s = Session()
>>> key = s.add(syn.recording, label="cell-07")
>>> s.reject(key, [2], "electrode bump")
>>> int(s.beats(key)["accepted"][2]), s.beats(key)["reject_reason"][2]
(0, 'electrode bump')
>>> s.undo(); int(s.beats(key)["accepted"][2])
1
>>> s.set_conditions(key, [parse_condition("baseline=0-8s")])
>>> s.beats(key)["condition"][3]
'baseline'
"""

from __future__ import annotations

import os
from typing import Any, Iterable, Sequence

import numpy as np

import analysis.pipeline as pipeline
from analysis.conditions import Condition, check_conditions
from analysis.decisions import (
    ACCEPT,
    CLEAR,
    REJECT,
    BeatStatus,
    Decision,
    DecisionLog,
    beat_status,
    now_utc,
)
from analysis.errors import RecordingError
from analysis.readers import open_recording
from analysis.recording import Recording
from analysis.results import changed_source_warning
from analysis.session._commands import (
    ConditionsCommand,
    DecideCommand,
    SweepsCommand,
)
from analysis.session._history import SessionHistory
from analysis.session._persist import open_session, save_session
from analysis.session._types import (
    Entry,
    RecordingInfo,
    info_from,
    is_event_warning,
    key_of,
    mV_scale,
    reviewed_table,
    reviewed_table_after,
)
from analysis.session._work import SessionWork
from analysis.settings import Settings
from analysis.table import BeatTable

__all__ = ["Session"]


class Session(SessionHistory, SessionWork):
    """Recordings with their results, review decisions and conditions, with undo and redo.

    Parameters
    ----------
    default_settings : Settings or None
        Settings for recordings added without their own; None takes the defaults.
    match_tolerance_s : float
        A decision applies to the beat of its sweep whose upstroke lies nearest its own, when
        within this many seconds; it then survives re-analyses that shift upstrokes slightly
        (for example a change of the upstroke-time definition).
    """

    def __init__(self, default_settings: Any = None, *, match_tolerance_s: float = 0.010,
                 workers: int | None = None) -> None:
        super().__init__()
        self.default_settings = default_settings if default_settings is not None else Settings()
        self.match_tolerance_s = float(match_tolerance_s)
        #: Processes a re-analysis shares a long sweep's chunks with (:mod:`analysis.chunkpool`;
        #: None: the caller's context, one unless it says otherwise).
        self.workers = workers
        self._entries: dict[str, Entry] = {}
        self._views: dict[str, tuple[tuple, BeatTable]] = {}  # key -> (what it is made of, reviewed table)
        self.path: str | None = None
        #: Keys of recordings the user removed: saving into the session's file leaves them out
        #: even when the file still holds them.
        self.removed_keys: set[str] = set()
        self.open_warnings: list[str] = []

    # -- recordings --------------------------------------------------------------------------
    @property
    def recordings(self) -> tuple[str, ...]:
        """Keys of the recordings, in the order they were added."""
        return tuple(self._entries)

    def add(
        self,
        source: Recording | str | os.PathLike,
        *,
        settings: Any = None,
        channel: int | str | None = None,
        sweeps: Sequence[int] | None = None,
        label: str | None = None,
        conditions: Sequence[Condition] = (),
        result: Any = None,
        keep_review: bool = True,
    ) -> str:
        """Analyse a recording and add it; returns its key.

        Parameters
        ----------
        source : Recording or path
            A path is opened with :func:`analysis.open_recording`.
        settings : Settings or None
            None uses :attr:`default_settings`.
        channel, sweeps
            As for :func:`analysis.analyze` (None: the current-clamp channel; all sweeps).
        label : str or None
            The ``file`` column; None uses the path as given (or ``"recording-N"``).
        conditions : sequence of Condition
        result : AnalysisResult or None
            A result already computed for exactly these arguments (for example in a worker
            thread or a batch); None analyses here.
        keep_review : bool
            When a recording of the same source is already in the session it is replaced; True
            carries its decisions (matched by upstroke time) and, if none are given here, its
            conditions over to the new analysis.

        Raises
        ------
        RecordingError, SettingsError
            On a bad recording, channel or settings.

        Notes
        -----
        Adding clears nothing from the undo history, but adding is not itself undoable.
        """

        given = source if not isinstance(source, Recording) else None
        rec = source if isinstance(source, Recording) else open_recording(source)
        settings = settings if settings is not None else self.default_settings
        if label is None:
            label = os.fspath(given) if given is not None else (rec.source_path or f"recording-{len(self._entries) + 1}")
        if result is None:
            result = pipeline.analyze(rec, settings=settings, channel=channel, sweeps=sweeps, label=label)
        key = key_of(rec.source_path) if rec.source_path else label
        info = info_from(rec, result, label, sweeps)
        entry = Entry(
            info=info, settings=settings, table=result.beats, warnings=tuple(result.warnings),
            decisions=DecisionLog(), conditions=(), recording=rec, requested_channel=channel,
            detected=(result.beats, getattr(result, "detections", None) or None),
        )
        old = self._entries.get(key)
        if old is not None and keep_review:
            entry.decisions = old.decisions.copy()
            if not conditions:
                conditions = old.conditions
        entry.conditions = check_conditions(conditions, info.sweep_starts_s, info.sweep_durations_s, where=label)
        if old is not None:
            self._drop_history(key)
        self._entries[key] = entry
        self._touch()
        self._emit("recording_added", key)
        for w in entry.warnings:
            self._emit("warning", key, detail=w)
        return key

    def remove(self, key: str) -> None:
        """Take a recording out of the session (not undoable; its history is dropped)."""
        self._entry(key)
        del self._entries[key]
        self.removed_keys.add(key)  # saving into its file does not bring it back (save_session)
        self._drop_history(key)
        self._touch()
        self._emit("recording_removed", key)

    def _entry(self, key: str) -> Entry:
        try:
            return self._entries[key]
        except KeyError:
            raise KeyError(f"no recording {key!r} in the session; it holds {list(self._entries)}") from None

    def info(self, key: str) -> RecordingInfo:
        """Source, reader, channel, LJP, geometry and provenance of a recording (a snapshot).

        ``ljp_mV`` is the recording's settings' ``preprocess.ljp_mV``, read now.
        """
        e = self._entry(key)
        return RecordingInfo.of(e.info, e.ljp_mV)

    def label(self, key: str) -> str:
        return self._entry(key).info.label

    def settings(self, key: str) -> Any:
        """The settings a recording was analysed with."""
        return self._entry(key).settings

    def warnings(self, key: str) -> tuple[str, ...]:
        """The analysis warnings of a recording."""
        return self._entry(key).warnings

    def recording(self, key: str) -> Recording:
        """The recording itself, opened from its source on first use after :meth:`open`.

        Raises
        ------
        RecordingError
            When the source is missing or unreadable (results opened from a file still work
            without it; only re-analysis and traces need it).
        """
        e = self._entry(key)
        if e.recording is None:
            path = e.info.source_path
            if not os.path.isfile(path):
                raise RecordingError(path, "the source recording is not there", "put it back or re-link it, then try again")
            rec = open_recording(path)
            if e.unverified:
                e.unverified = False
                if rec.sha256 != e.info.sha256:
                    warning = changed_source_warning(e.info.label, path, "SHA-256 differs")
                    self.open_warnings.append(warning)
                    self._emit("warning", key, detail=warning)
            if rec.units(e.info.channel) != e.info.units:
                # The units were declared anew when it was analysed (a mislabelled channel).
                rec = rec.with_units(e.info.channel, e.info.units)
            e.recording = rec
        return e.recording

    def trace_mV(self, key: str, sweep: int) -> np.ndarray:
        """One sweep of the analysed channel in mV after the LJP correction (no filters)."""
        e = self._entry(key)
        raw = self.recording(key).sweep(int(sweep), e.info.channel)
        return raw * mV_scale(e.info.units) - e.ljp_mV

    # -- tables ------------------------------------------------------------------------------
    def auto_beats(self, key: str) -> BeatTable:
        """The automatic beat table (measurement, events and quality rules; no review)."""
        return self._entry(key).table

    def beats(self, key: str) -> BeatTable:
        """The beat table as reviewed: decisions and conditions applied.

        Returns
        -------
        BeatTable
            The automatic table's columns in their order, with the status after the latest
            applying decision (``verdict``, ``accepted``, ``reject_reason``, ``decided_by``,
            ``reviewed``: 1 where a review decision applies, 0 where the automatic status
            stands), ``condition`` filled in, and ``recording_id``.
        """
        e = self._entry(key)
        # Kept while nothing it is made of has changed: a review key asks for it more than once.
        stamp = (e.version, len(e.decisions), id(e.table), id(e.decisions), e.conditions, id(e.settings),
                 self.match_tolerance_s, e.info.sweep_starts_s, e.info.sha256)
        cached = self._views.get(key)
        if cached is not None and cached[0] != stamp and cached[0][2:] == stamp[2:] and cached[0][1] < stamp[1]:
            # Only verdicts were added (a review key): the beats they apply to change, no other.
            cached = self._views[key] = (stamp, reviewed_table_after(e, cached[1], cached[0][1], self.match_tolerance_s))
        elif cached is None or cached[0] != stamp:
            cached = self._views[key] = (stamp, reviewed_table(e, self.match_tolerance_s))
        return cached[1]

    def all_beats(self, keys: Sequence[str] | None = None) -> BeatTable:
        """The reviewed tables of several recordings (all by default), one after another."""
        keys = list(self._entries) if keys is None else list(keys)
        tables = [self.beats(k) for k in keys]
        if not tables:
            return BeatTable.empty()
        names = tables[0].names
        common = [c for c in names if all(c in t for t in tables)]
        return BeatTable.concat([BeatTable({c: t[c] for c in common}) for t in tables])

    # -- decisions ---------------------------------------------------------------------------
    def review_flags(self, key: str) -> tuple[str, ...]:
        """The flags that hold a recording's beats for review (its ``quality.review_flags``)."""
        return tuple(getattr(getattr(self._entry(key).settings, "quality", None), "review_flags", ()))

    def review_status(self, key: str) -> BeatStatus:
        """Every beat's status, reason and who decided, by row of :meth:`beats`.

        The same :func:`analysis.decisions.beat_status` the beats CSV, the summaries and the
        command line use: ``status`` is ``accepted``, ``rejected`` or ``to_review``.
        """
        e = self._entry(key)
        return beat_status(e.table, e.decisions, self.review_flags(key), tolerance_s=self.match_tolerance_s)

    def decisions(self, key: str) -> DecisionLog:
        """A copy of a recording's decision log (every entry ever made, oldest first)."""
        return self._entry(key).decisions.copy()

    def orphaned_decisions(self, key: str) -> list[Decision]:
        """Decisions whose beat no longer exists (no upstroke within the tolerance)."""
        e = self._entry(key)
        t = e.table
        _, orphan = e.decisions.match(t["sweep"], t["t_upstroke_s"], tolerance_s=self.match_tolerance_s)
        return [d for d, o in zip(e.decisions, orphan) if o]

    def decide(self, key: str, rows: Iterable[int], accepted: bool | None, reason: str = "") -> None:
        """Accept (True), reject (False) or clear (None: back to automatic) beats; one undo step.

        Parameters
        ----------
        key : str
        rows : iterable of int
            Rows of :meth:`beats` (for example every beat in a dragged region).
        accepted : bool or None
        reason : str
            Why, for a rejection (kept in the log and the ``reject_reason`` column).
        """
        e = self._entry(key)
        rows = sorted({int(r) for r in rows})
        if not rows:
            return
        n = len(e.table)
        bad = [r for r in rows if not 0 <= r < n]
        if bad:
            raise IndexError(f"no beat row {bad[0]} in {e.info.label} (it has {n} beats)")
        value = CLEAR if accepted is None else (ACCEPT if accepted else REJECT)
        view = self.beats(key)
        stamp = now_utc()
        new = [
            Decision(int(view["sweep"][r]), int(view["beat"][r]), float(view["t_upstroke_s"][r]), value,
                     reason if value == REJECT else "", stamp, "review")
            for r in rows
        ]
        before = [
            (int(view["reviewed"][r]), int(view["accepted"][r]), str(view["reject_reason"][r])) for r in rows
        ]
        verb = {ACCEPT: "Accept", REJECT: "Reject", CLEAR: "Clear the decision on"}[value]
        text = f"{verb} {len(rows)} beat{'s' if len(rows) != 1 else ''}"
        self._run(DecideCommand(self, key, rows, new, before, text))

    def accept(self, key: str, rows: Iterable[int]) -> None:
        """Accept beats (one undo step)."""
        self.decide(key, rows, True)

    def reject(self, key: str, rows: Iterable[int], reason: str) -> None:
        """Reject beats with a reason (one undo step)."""
        self.decide(key, rows, False, reason)

    def clear_decisions(self, key: str, rows: Iterable[int]) -> None:
        """Return beats to their automatic verdict (one undo step)."""
        self.decide(key, rows, None)

    # -- conditions --------------------------------------------------------------------------
    def conditions(self, key: str) -> tuple[Condition, ...]:
        """A recording's conditions, sorted by start."""
        return self._entry(key).conditions

    def set_conditions(self, key: str, conditions: Sequence[Condition]) -> None:
        """Replace a recording's conditions (one undo step).

        Raises
        ------
        ConditionError
            When two share a name or overlap.
        """
        e = self._entry(key)
        new = check_conditions(conditions, e.info.sweep_starts_s, e.info.sweep_durations_s, where=e.info.label)
        if new == e.conditions:
            return
        self._run(ConditionsCommand(self, key, e.conditions, new))

    def add_condition(self, key: str, condition: Condition) -> None:
        """Add one condition (one undo step)."""
        self.set_conditions(key, list(self.conditions(key)) + [condition])

    def remove_condition(self, key: str, name: str) -> None:
        """Remove the condition of that name (one undo step)."""
        self.set_conditions(key, [c for c in self.conditions(key) if c.name != name])

    def replace_condition(self, key: str, name: str, condition: Condition) -> None:
        """Replace the condition of that name, e.g. a new range or steady-state window."""
        self.set_conditions(key, [condition if c.name == name else c for c in self.conditions(key)])

    # -- sweeps ------------------------------------------------------------------------------
    def set_sweeps(self, key: str, sweeps: Sequence[int] | None) -> None:
        """Analyse another selection of sweeps (None: all); one undo step.

        Only sweeps not analysed yet are detected and measured; the beats of sweeps still
        selected are kept as they are, those of sweeps left out are dropped from the table (their
        decisions stay in the log and apply again if the sweeps come back). The events and
        quality rules then run on the merged table, since MDP drift compares across sweeps.
        """

        e = self._entry(key)
        rec = self.recording(key)
        wanted = list(range(rec.n_sweeps)) if sweeps is None else sorted({int(s) for s in sweeps})
        had = set(range(rec.n_sweeps)) if e.info.sweeps is None else set(e.info.sweeps)
        if set(wanted) == had:
            return
        sweep_col = np.asarray(e.table["sweep"]) if len(e.table) else np.empty(0, np.int64)
        parts = [e.table.take(np.isin(sweep_col, wanted))]
        warnings = [w for w in e.warnings if not is_event_warning(w)]
        added = [s for s in wanted if s not in had]
        if added:
            channel = e.requested_channel if e.requested_channel is not None else e.info.channel
            res = pipeline.analyze(rec, settings=e.settings, channel=channel, sweeps=added, label=e.info.label)
            parts.append(BeatTable({n: res.beats[n] for n in parts[0].names}))
            warnings += [w for w in res.warnings if w not in warnings and not is_event_warning(w)]
        merged = BeatTable.concat(parts)
        order = np.lexsort((np.asarray(merged["t_upstroke_s"], float), np.asarray(merged["sweep"])))
        merged, more = pipeline.flag_and_reject(merged.take(order), rec, e.info.channel, e.settings, scale=mV_scale(e.info.units))
        selection = None if sweeps is None else tuple(wanted)
        self._run(SweepsCommand(self, key, selection, merged, tuple(warnings + more)))
    def _invalidate(self, key: str) -> None:
        e = self._entries[key]
        e.summaries = None
        e.version += 1

    # -- files -------------------------------------------------------------------------------
    def save(self, path: str | os.PathLike) -> None:
        """Write the session to a results file, atomically (see :mod:`analysis.results._store`)."""

        save_session(self, path)
        self.path = os.path.abspath(os.fspath(path))
        self._clean_depth = len(self._undo)
        self._emit("saved", detail=self.path)
        self._emit("history_changed")

    @classmethod
    def open(cls, path: str | os.PathLike, *, verify_sources: bool = True, match_tolerance_s: float = 0.010) -> "Session":
        """A session restored from a results file.

        Only the file's index is read now; each recording's tables are read when first used,
        and its source is opened only when needed (traces, re-analysis). A missing source, or
        one whose size differs from the one analysed, adds a line to :attr:`open_warnings` at
        once; a source whose SHA-256 differs adds one (and a ``warning`` event) when it is first
        opened. The results open either way.

        Raises
        ------
        ResultsFileError
            When the file is missing, damaged, foreign or of a newer schema.
        """

        return open_session(cls, path, verify_sources=verify_sources, match_tolerance_s=match_tolerance_s)
