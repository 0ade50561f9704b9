"""What the main window shows, and the widgets it shows it in: shared by its controllers.

:class:`WindowState` holds the session and what is under review (recording, channel, sweep,
beat), with the questions every controller asks of it (the reviewed table of the channel shown,
a sweep's beats in time order, the LJP the results subtract). :class:`WindowViews` names the
views and panels the controllers drive. Both are plain containers: the window builds them and
hands them to each controller (:mod:`.display`, :mod:`.loading`, :mod:`.reviewing`, :mod:`.files`).
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np
from PySide6 import QtWidgets

from analysis.session import Session

from ..figures.plots import FiguresPanel
from ..panels.beat_card import BeatCard, ReasonPicker
from ..panels.conditions import ConditionsPanel
from ..panels.cursors import CursorPanel
from ..panels.settings_form import SettingsForm
from ..panels.summary_panel import SummaryPanel
from ..views.beat_table import BeatTableView
from ..views.derivative_strip import DerivativeStrip
from ..views.overview import OverviewStrip
from ..views.trace_data import SweepLevels
from ..views.trace_view import TraceView

__all__ = ["WindowState", "WindowViews"]


@dataclass(eq=False)
class WindowViews:
    """The views, panels and toolbar controls of the main window."""

    trace_view: TraceView
    dvdt_strip: DerivativeStrip
    overview: OverviewStrip
    table: BeatTableView
    figures: FiguresPanel
    beat_card: BeatCard
    cursor_panel: CursorPanel
    conditions_panel: ConditionsPanel
    summary_panel: SummaryPanel
    settings_form: SettingsForm
    reason_picker: ReasonPicker
    recording_combo: QtWidgets.QComboBox
    channel_combo: QtWidgets.QComboBox
    sweep_spin: QtWidgets.QSpinBox


class WindowState:
    """The session and what of it the window shows.

    Attributes
    ----------
    session : Session
        The review session (replaced when another file is opened); ``bridge`` re-emits its
        changes as Qt signals.
    key : str or None
        The recording shown, once it is in the session (None while its analysis runs).
    recording, channel, sweep, current_row
        The recording, its channel and sweep shown, and the row of the beat under review (-1: none).
    origin, results_path : str or None
        Where the review came from (a recording or results file) and the results file it is
        saved to (None until saved).
    journal, journaled_keys
        The autosave journal of the recording shown, and the recordings whose journal this
        window wrote or replayed (their review is the session's).
    """

    def __init__(self, session: Session) -> None:
        self.session = session
        self.bridge = None
        self.journaled_keys: set[str] = set()
        self.recording = None
        self.key: str | None = None
        self.origin: str | None = None
        self.results_path: str | None = None
        self.channel = 0
        self.sweep = -1
        self.current_row = -1
        self.journal = None
        self.last_readout = None
        self.label: str | None = None
        self.pending_conditions = ()
        self.pending_settings = None
        #: The reviewed table of the analysed channel, as last drawn.
        self.table = None
        self.levels_cache: dict[int, SweepLevels] = {}
        self.summaries: list = []
        self.summaries_of: tuple[str, int] | None = None  # (recording, beats) the summaries shown are of

    @property
    def beats(self):
        """The reviewed beat table of the channel shown (None before analysis, or when the
        channel shown is not the analysed one)."""
        if self.key is None or self.session.info(self.key).channel != self.channel:
            return None
        return self.table

    def sweep_rows(self, sweep: int | None = None) -> np.ndarray:
        """Rows of a sweep's beats (default: the sweep shown), in time order."""
        b = self.beats
        if b is None or not len(b):
            return np.empty(0, dtype=np.int64)
        sweep = self.sweep if sweep is None else sweep
        rows = np.flatnonzero(np.asarray(b["sweep"]) == sweep)
        return rows[np.argsort(np.asarray(b["t_upstroke_s"])[rows], kind="stable")]

    def time_order(self) -> np.ndarray:
        """Every row, by sweep then upstroke time."""
        b = self.beats
        if b is None or not len(b):
            return np.empty(0, dtype=np.int64)
        return np.lexsort((np.asarray(b["t_upstroke_s"]), np.asarray(b["sweep"])))

    def ljp_mV(self) -> float:
        """The liquid-junction potential the current results subtract (0 before analysis).

        The session's own value (its recording's settings), so the trace, the markers, the
        readout and the summaries always agree.
        """
        if self.key is None:
            return 0.0
        return float(self.session.info(self.key).ljp_mV)

    def levels(self, sweep: int) -> SweepLevels:
        """Drawable samples of a sweep of the shown channel (made on first use)."""
        if sweep not in self.levels_cache:
            self.levels_cache[sweep] = SweepLevels(self.recording, sweep, self.channel)
        return self.levels_cache[sweep]

    def sweep_at(self, t_s: float) -> int:
        """The sweep holding a time of the recording (seconds from its start)."""
        starts = np.asarray(self.recording.sweep_starts_s)
        return int(np.clip(np.searchsorted(starts, t_s, side="right") - 1, 0, len(starts) - 1))

    def recording_end_s(self) -> float:
        """The end of the recording, in seconds from its start (from the session without it)."""
        rec = self.recording
        if rec is None:
            info = self.session.info(self.key)
            return info.sweep_starts_s[-1] + info.sweep_durations_s[-1]
        return rec.sweep_starts_s[-1] + rec.n_samples(rec.n_sweeps - 1) / rec.sampling_rate_hz
