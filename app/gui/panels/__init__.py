"""The window's side panels: the beat under review, conditions, cursors, settings, summaries.

Each shows what it is given and reports the user's requests with Qt signals; the window's
controllers (:mod:`app.gui.window`) turn those into changes of the session.
"""

from .beat_card import REASONS, BeatCard, ReasonPicker
from .conditions import NAME_SUGGESTIONS, STEADY_CHOICES, ConditionDialog, ConditionsPanel
from .cursors import READOUT_ROWS, CursorPanel
from .settings_form import SettingsForm, field_label, field_tooltip
from .summary_panel import SummaryPanel, summary_rows

__all__ = [
    "NAME_SUGGESTIONS", "READOUT_ROWS", "REASONS", "STEADY_CHOICES", "BeatCard", "ConditionDialog",
    "ConditionsPanel", "CursorPanel", "ReasonPicker", "SettingsForm", "SummaryPanel", "field_label",
    "field_tooltip", "summary_rows",
]
