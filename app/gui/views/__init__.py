"""The views of a recording: the trace of one sweep, the whole-recording strip, the beat table.

They draw what they are given (samples prepared by :mod:`.trace_data`, the session's beat table)
and report what the user does with Qt signals; they never change the session themselves.
"""

from .bands import BandLabels, SpanBands
from .beat_table import SHOWN_COLUMNS, BeatTableModel, BeatTableView, header_label
from .cursor_tags import CursorTags
from .overview import MarkingViewBox, OverviewStrip
from .trace_data import DrawData, SweepLevels, envelope_of, recording_envelope
from .trace_view import DEFAULT_WINDOW_S, MARKER_COLUMNS, TraceView

__all__ = [
    "DEFAULT_WINDOW_S", "MARKER_COLUMNS", "SHOWN_COLUMNS", "BandLabels", "BeatTableModel", "BeatTableView", "CursorTags",
    "DrawData", "MarkingViewBox", "OverviewStrip", "SpanBands", "SweepLevels", "TraceView", "envelope_of",
    "header_label", "recording_envelope",
]
