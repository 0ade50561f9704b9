"""Upstroke's analysis core: Qt-free, numpy and scipy only, usable from a notebook.

The stable API is small::

    from analysis import analyze

    from analysis.readers import open_recording
    rec = open_recording("cell.abf")
    result = analyze(rec)
    result.beats          # BeatTable with the beats CSV's columns

Review, conditions, summaries and the results file go through :class:`Session`::

    from analysis import Session
    session = Session.open("study.h5")    # or Session(); session.add("cell.abf")
"""

from analysis._version import __version__  # noqa: F401 (analysis.__version__)
from analysis.errors import InputError, RecordingError, ResultsFileError, SettingsError
from analysis.pipeline import AnalysisResult, analyze
from analysis.readers import open_recording, supported_extensions
from analysis.recording import Channel, Recording
from analysis.settings import Settings
from analysis.table import CSV_COLUMNS, BeatTable

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



def __getattr__(name: str):
    # The review session is imported on first use: the command line's analyze and batch, and
    # every worker process, start faster without it.
    if name == "Session":
        from analysis.session import Session  # on first use: analyze, batch and their workers start without the review session's modules

        return Session
    raise AttributeError(f"module 'analysis' has no attribute {name!r}")
