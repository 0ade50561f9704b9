"""What a results file holds: :class:`StoredRecording` per recording, :class:`ResultsFile` in all.

A recording read from a schema-2 file is *lazy*: its facts, settings and index counts are read
when the file opens; its tables (beats, decisions, conditions, summaries, ensembles, warnings)
are read from the file the first time one of them is used (:data:`LAZY_FIELDS`).
"""

from __future__ import annotations

import platform
from dataclasses import dataclass, field
from typing import Any

import numpy as np

from analysis._version import __version__
from analysis.conditions import Condition
from analysis.decisions import DecisionLog, now_utc
from analysis.results._facts import RecordingFacts
from analysis.table import BeatTable

__all__ = ["LAZY_FIELDS", "ResultsFile", "StoredRecording", "provenance_now"]

#: Fields of a :class:`StoredRecording` that a schema-2 file reads when first used.
LAZY_FIELDS = ("beats", "decisions", "conditions", "summary", "ensembles", "warnings")


@dataclass
class StoredRecording(RecordingFacts):
    """Everything the results file keeps about one analysed recording.

    The recording's facts (:class:`RecordingFacts`: source, reader, channel, geometry,
    provenance), and:

    Attributes
    ----------
    ljp_mV : float
        Liquid-junction-potential correction applied (V_true = V_measured - LJP).
    settings_json : str
        The full settings as JSON text, ``settings_schema`` its schema version, ``settings_hash``
        the short hash.
    beats : BeatTable
        The per-beat table as the session shows it (decisions and conditions applied), with any
        extra columns.
    decisions : DecisionLog
    conditions : tuple of Condition
    summary : dict of str to ndarray
        Summary columns in order, one row per file x sweep group x condition.
    ensembles : list of (ndarray, float, float)
        Per summary row: the ensemble-averaged beat in mV, its sampling rate and the time of its
        first sample relative to the upstroke (s). An empty array when it could not be formed.
    warnings : tuple of str

    Notes
    -----
    The fields in :data:`LAZY_FIELDS` have no class-level default, so that a recording read
    lazily (which lacks them until first used) reaches :meth:`__getattr__` for them.
    """

    ljp_mV: float = 0.0
    settings_json: str = "{}"
    settings_schema: int = 0
    settings_hash: str = ""
    beats: BeatTable = field(default_factory=BeatTable.empty)
    decisions: DecisionLog = field(default_factory=DecisionLog)
    conditions: tuple[Condition, ...] = field(default_factory=tuple)
    summary: dict[str, np.ndarray] = field(default_factory=dict)
    ensembles: list[tuple[np.ndarray, float, float]] = field(default_factory=list)
    warnings: tuple[str, ...] = field(default_factory=tuple)

    def __getattr__(self, name: str) -> Any:
        # Reached only for attributes the instance lacks: a lazy recording's tables.
        loader = self.__dict__.get("_loader")
        if loader is None or name not in LAZY_FIELDS:
            raise AttributeError(f"{type(self).__name__!r} object has no attribute {name!r}")
        loader.fill(self.__dict__["_row"])
        return self.__dict__[name]

    @property
    def loaded(self) -> bool:
        """False while a lazily read recording's tables are still in the file."""
        return all(name in self.__dict__ for name in LAZY_FIELDS)


@dataclass
class ResultsFile:
    """The content of a results file, and what opening it found (``open_warnings``)."""

    recordings: list[StoredRecording] = field(default_factory=list)
    default_settings_json: str | None = None
    open_warnings: list[str] = field(default_factory=list)
    path: str | None = None


def provenance_now() -> dict[str, str]:
    """Versions of the software that analyses, and the time (UTC), for a new analysis."""
    import h5py  # heavy; analyze without --out never needs it
    import scipy  # only for its version, recorded in the provenance

    return {
        "upstroke_version": __version__,
        "numpy_version": np.__version__,
        "scipy_version": scipy.__version__,
        "h5py_version": h5py.__version__,
        "python_version": platform.python_version(),
        "analysed_at_utc": now_utc(),
    }
