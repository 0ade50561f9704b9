"""The facts of one analysed recording, declared once for the session and the results file.

:class:`RecordingFacts` is what is known of a recording's source and of the run that analysed it.
The results file's :class:`~analysis.results.StoredRecording` and the session's
:class:`~analysis.session.RecordingInfo` extend it, and :func:`facts_values` copies the facts
from one record to another field by field, so that no field is named twice.
"""

from __future__ import annotations

import math
from dataclasses import dataclass, field, fields
from typing import Any

__all__ = ["RecordingFacts", "facts_values"]


@dataclass
class RecordingFacts:
    """A recording's source, reader, channel, geometry and provenance, as analysed.

    Everything here is a fact of the source or of the analysis run; the liquid-junction potential
    is not, because it is a setting (``preprocess.ljp_mV``) and has one home: the recording's
    settings. :meth:`analysis.session.Session.info` adds it to a
    :class:`~analysis.session.RecordingInfo` snapshot, and the results file stores the value
    applied beside the facts (:class:`~analysis.results.StoredRecording`).

    Attributes
    ----------
    source_path : str
        The recording's path (absolute when analysed from a file; a name for in-memory data).
    label : str
        The ``file`` column of the CSVs (as given on the command line).
    sha256 : str
        SHA-256 of the source when analysed ("" for in-memory data).
    source_bytes : int
        The source file's size when analysed (-1: not known), so that opening a results file
        notices a changed source without reading it whole.
    reader, channel, channel_name, units : str, int, str, str
        How the samples were read.
    sweeps : tuple of int or None
        The sweeps analysed (None: all).
    sampling_rate_hz, sweep_starts_s, sweep_lengths
        The recording's geometry, so conditions and figures work without the source.
    provenance : dict of str to str
        Versions of the software that analysed it, and when (:func:`~analysis.results.provenance_now`).
    """

    source_path: str
    label: str
    sha256: str = ""
    source_bytes: int = -1
    reader: str = ""
    channel: int = 0
    channel_name: str = ""
    units: str = "mV"
    sweeps: tuple[int, ...] | None = None
    sampling_rate_hz: float = math.nan
    sweep_starts_s: tuple[float, ...] = ()
    sweep_lengths: tuple[int, ...] = ()
    provenance: dict[str, str] = field(default_factory=dict)

    @property
    def sweep_durations_s(self) -> tuple[float, ...]:
        return tuple(n / self.sampling_rate_hz for n in self.sweep_lengths)


def facts_values(record: RecordingFacts) -> dict[str, Any]:
    """The facts of ``record`` (a :class:`RecordingFacts` or any record extending it) by field
    name, the provenance copied: ``OtherRecord(**facts_values(record), ...)`` copies them."""
    values = {f.name: getattr(record, f.name) for f in fields(RecordingFacts)}
    values["provenance"] = dict(record.provenance)
    return values
