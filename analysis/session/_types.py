"""The plain data of a review session: notifications, recording facts, prepared changes.

These types belong to :class:`analysis.session.Session` (which re-exports the public ones); they
live here so that the session's modules stay small.
"""

from __future__ import annotations

import os
from dataclasses import dataclass, field
from typing import Any, Callable, Protocol, Sequence

import numpy as np

from analysis.conditions import Condition, assign_conditions
from analysis.decisions import DecisionLog, apply_status, update_status
import analysis.flags as flags
from analysis.pipeline import analyze, stage_of_change
from analysis.recording import Recording, recording_id
from analysis.results import RecordingFacts, facts_values, provenance_now
from analysis.stats import measure_cycle
from analysis.table import BeatTable

__all__ = ["EVENTS", "LAZY_ENTRY_FIELDS", "SessionCore", "Change", "Entry", "RecordingInfo", "SettingsChange", "VIEW_COLUMNS", "cycle_measurer", "info_from", "is_event_warning", "key_of", "mV_scale", "reviewed_table", "scope"]

EVENTS = (
    "recording_added", "recording_removed", "results_changed", "decisions_changed",
    "conditions_changed", "settings_changed", "history_changed", "saved", "warning",
)
#: Columns the session writes anew in its view of the automatic table.
VIEW_COLUMNS = ("reviewed", "verdict", "decided_by")


class SessionCore(Protocol):
    """What the session's commands and its results-file persistence see of a session.

    :class:`analysis.session.Session` satisfies it; the commands and the persistence depend on
    this description instead of on the session's module, so that the session imports them and
    not the other way round.
    """

    _entries: dict[str, "Entry"]
    default_settings: Any
    path: str | None
    open_warnings: list[str]
    _clean_depth: int

    @property
    def recordings(self) -> tuple[str, ...]: ...

    def _entry(self, key: str) -> "Entry": ...

    def _invalidate(self, key: str) -> None: ...

    def _emit(self, event: str, recording: str | None = None, rows: Sequence[int] = (), detail: str = "") -> None: ...

    def beats(self, key: str) -> BeatTable: ...

    def summaries(self, key: str) -> Any: ...


@dataclass(frozen=True)
class Change:
    """One change notification.

    Attributes
    ----------
    event : str
        One of :data:`EVENTS`.
    recording : str or None
        The recording's key, when the change concerns one.
    rows : tuple of int
        Rows of :meth:`Session.beats` concerned (decisions), else empty.
    detail : str
        Text for ``warning`` and ``saved`` (the path), else empty.
    """

    event: str
    recording: str | None = None
    rows: tuple[int, ...] = ()
    detail: str = ""


@dataclass
class RecordingInfo(RecordingFacts):
    """Source, reader, channel, LJP, geometry and provenance of a recording: a snapshot.

    The recording's facts (:class:`analysis.results.RecordingFacts`: ``source_path``, ``label``,
    ``sha256``, ``reader``, ``channel`` (index), ``channel_name``, ``units``, ``sweeps`` (None:
    all), ``sampling_rate_hz``, ``sweep_starts_s``, ``sweep_lengths``, ``provenance``) and
    ``ljp_mV``, as :class:`analysis.results.StoredRecording` holds them. ``ljp_mV`` is read from
    the recording's settings when the snapshot is made (:meth:`Session.info`), so it always equals
    ``session.settings(key).preprocess.ljp_mV``; changing the snapshot changes nothing in the session.
    """

    ljp_mV: float = 0.0

    @classmethod
    def of(cls, facts: RecordingFacts, ljp_mV: float) -> "RecordingInfo":
        return cls(**facts_values(facts), ljp_mV=float(ljp_mV))


#: Fields of an :class:`Entry` opened from a results file that are read when first used.
LAZY_ENTRY_FIELDS = ("table", "warnings", "decisions", "conditions", "summaries")


@dataclass
class Entry:
    """A recording's state inside a session (internal to the session modules).

    An entry opened from a results file may be *lazy*: it holds a ``_load`` callable in place of
    the fields in :data:`LAZY_ENTRY_FIELDS`, which the first access to any of them calls to read
    them all (:func:`analysis.session.open_session`). None of those fields has a class-level
    default, so that the access reaches :meth:`__getattr__`.
    """

    info: RecordingFacts
    settings: Any
    table: BeatTable
    warnings: tuple[str, ...]
    decisions: DecisionLog
    conditions: tuple[Condition, ...]
    recording: Recording | None = None
    requested_channel: int | str | None = None
    summaries: list | None = field(default_factory=lambda: None)
    version: int = 0
    #: (table, detections): what detection found for that automatic table
    #: (:attr:`analysis.pipeline.AnalysisResult.detections`), so that a measurement change
    #: measures again without detecting; None when unknown (reopened from a results file).
    detected: tuple | None = None
    #: True for a recording opened from a results file whose source's SHA-256 is still to be
    #: compared with the one analysed (done when the source is first opened).
    unverified: bool = False

    def __getattr__(self, name: str) -> Any:
        load = self.__dict__.get("_load")
        if load is None or name not in LAZY_ENTRY_FIELDS:
            raise AttributeError(f"{type(self).__name__!r} object has no attribute {name!r}")
        self.__dict__.update(load())
        del self.__dict__["_load"]
        return self.__dict__[name]

    @property
    def loaded(self) -> bool:
        """False while an entry opened from a results file has not read its tables yet."""
        return "_load" not in self.__dict__

    @property
    def ljp_mV(self) -> float:
        """The liquid-junction potential the results subtract: the settings' own value."""
        return float(self.settings.preprocess.ljp_mV)


@dataclass(frozen=True)
class SettingsChange:
    """New settings and the results they give, computed by :meth:`Session.prepare_settings`.

    Attributes
    ----------
    settings : Settings
    scopes : dict of str to str
        Per recording key, the earliest stage the change reran (:data:`analysis.pipeline.STAGES`):
        ``"none"`` (nothing changed), ``"summary"``, ``"rules"`` (the table re-flagged),
        ``"events"`` (the trace's events and the rules), ``"measure"`` (measured again from the
        detections) or ``"detect"`` (detected and measured again on the analysed sweeps).
    tables, warnings, provenance : dict
        The new results of the recordings that were re-analysed (scopes ``events`` and
        ``analysis``).
    summaries : dict of str to list
        Per recording changed, its summaries under the new settings, computed with the
        decisions and conditions of ``versions``.
    versions : dict of str to int
        Per recording, its version when the change was prepared: the summaries are kept only if
        nothing was edited since.
    bases : dict of str to (Settings, BeatTable)
        Per recording, the settings and automatic table the change was prepared from: the change
        applies only while they are still the recording's (see :meth:`Session.apply_settings`).
    """

    settings: Any
    scopes: dict[str, str]
    tables: dict[str, BeatTable]
    warnings: dict[str, tuple[str, ...]]
    provenance: dict[str, dict[str, str]]
    summaries: dict[str, list] = field(default_factory=dict)
    versions: dict[str, int] = field(default_factory=dict)
    bases: dict[str, tuple[Any, BeatTable]] = field(default_factory=dict)
    detections: dict[str, dict] = field(default_factory=dict)


def info_from(rec: Recording, result: Any, label: str, sweeps: Any) -> RecordingFacts:
    """The facts a session keeps about a recording just analysed."""

    return RecordingFacts(
        source_path=os.path.abspath(rec.source_path) if rec.source_path else label,
        label=label,
        sha256=(rec.sha256 or "") if rec.source_path else "",
        source_bytes=_size(rec.source_path),
        reader=rec.format,
        channel=int(result.channel),
        channel_name=str(result.channel_name),
        units=rec.units(int(result.channel)),
        sweeps=None if sweeps is None else tuple(int(s) for s in sweeps),
        sampling_rate_hz=rec.sampling_rate_hz,
        sweep_starts_s=tuple(rec.sweep_starts_s),
        sweep_lengths=tuple(rec.sweep_lengths),
        provenance=provenance_now(),
    )


def _size(path: str | None) -> int:
    try:
        return os.path.getsize(path) if path else -1
    except OSError:
        return -1


def reviewed_table(e: "Entry", tolerance_s: float) -> BeatTable:
    """An entry's automatic table with its decisions and conditions applied (see Session.beats)."""
    t = e.table
    n = len(t)
    sweep = np.asarray(t["sweep"], dtype=np.int64) if n else np.empty(0, np.int64)
    t_up = np.asarray(t["t_upstroke_s"], dtype=np.float64) if n else np.empty(0)
    starts = np.asarray(e.info.sweep_starts_s, dtype=np.float64)
    t_rec = starts[sweep] + t_up if n else np.empty(0)
    condition = assign_conditions(sweep, t_rec, e.conditions)
    view = apply_status(t, e.decisions, _review_flags(e), tolerance_s=tolerance_s)
    return view.with_columns(condition=condition, recording_id=np.full(n, recording_id(e.info.sha256), dtype=object))


def reviewed_table_after(e: "Entry", view: BeatTable, decided: int, tolerance_s: float) -> BeatTable:
    """:func:`reviewed_table` of an entry whose log has grown since ``view`` was made from its
    first ``decided`` entries, nothing else having changed: only the beats the new entries
    apply to are worked out again."""
    return update_status(view, e.table, e.decisions[decided:], _review_flags(e), tolerance_s=tolerance_s)


def _review_flags(e: "Entry") -> tuple[str, ...]:
    return getattr(getattr(e.settings, "quality", None), "review_flags", ())


def key_of(source: str) -> str:
    """The session key of a recording's source path."""
    return os.path.normcase(os.path.abspath(source))


def scope(old: Any, new: Any) -> str:
    """What a change of settings from ``old`` to ``new`` recomputes (see :class:`SettingsChange`)."""
    return stage_of_change(old, new)


def cycle_measurer(settings: Any, ljp_mV: float, fs_hz: float) -> Callable[[np.ndarray], dict | None]:
    """Measures an averaged cycle (repeated three times) with the measurement core."""

    def analyze_trace(v_mV: np.ndarray, rate_hz: float) -> BeatTable:
        # The averaged cycle is already corrected; analyze subtracts the LJP once more.
        rec = Recording.from_array(v_mV + ljp_mV, rate_hz, units="mV")
        return analyze(rec, settings=settings, channel=0).beats

    return lambda v: measure_cycle(v, fs_hz, analyze_trace, cycle_samples=v.size // 3)


def is_event_warning(text: str) -> bool:
    """True for a warning the events module wrote (replaced when the events run again)."""

    return flags.is_event_warning(text)


def mV_scale(units: str) -> float:
    """Factor from a voltage channel's units to mV (1 for mV and for unknown units)."""
    return {"v": 1000.0, "uv": 1e-3, "µv": 1e-3}.get(units.strip().lower(), 1.0)
