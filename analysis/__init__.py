"""Upstroke's analysis core: Qt-free, numpy and scipy only, usable from a notebook.

The stable API is small::

    from analysis import open_recording, analyze
    rec = open_recording("cell.abf")
    result = analyze(rec)
    result.beats          # BeatTable with the beats CSV's columns

Review, conditions, summaries and the results file go through :class:`Session`::

    from analysis import Session
    session = Session.open("study.h5")    # or Session(); session.add("cell.abf")
"""

from .errors import InputError, RecordingError, ResultsFileError, SettingsError
from .pipeline import AnalysisResult, analyze
from .readers import open_recording, supported_extensions
from .recording import Channel, Recording
from .settings import Settings
from .table import CSV_COLUMNS, BeatTable

__all__ = [
    "AnalysisResult",
    "BeatTable",
    "CSV_COLUMNS",
    "Channel",
    "InputError",
    "Recording",
    "RecordingError",
    "ResultsFileError",
    "SettingsError",
    "Session",
    "Settings",
    "analyze",
    "open_recording",
    "supported_extensions",
]

__version__ = "0.1.0"


def __getattr__(name: str):
    # The review session is imported on first use: the command line's analyze and batch, and
    # every worker process, start faster without it.
    if name == "Session":
        from .session import Session

        return Session
    raise AttributeError(f"module 'analysis' has no attribute {name!r}")
