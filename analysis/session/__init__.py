"""The review session: recordings, settings, results, decisions and conditions, with undo and a journal.

The modules below are private to this package; import from here."""


from analysis.session._commands import (
    Command,
    ConditionsCommand,
    DecideCommand,
    SettingsCommand,
    SweepsCommand,
)
from analysis.session._jobs import Progress, SettingsJob, SummaryJob
from analysis.session._journal import (
    JOURNAL_VERSION,
    Journal,
    JournalError,
    JournalReview,
    PendingReview,
    RestoreReport,
    pending_reviews,
    write_durably,
)
from analysis.session._persist import (
    AUTO_COLUMNS,
    open_session,
    save_session,
    stored_recordings,
)
from analysis.session._session import Session
from analysis.session._types import (
    EVENTS,
    VIEW_COLUMNS,
    Change,
    Entry,
    RecordingFacts,
    RecordingInfo,
    SettingsChange,
    cycle_measurer,
    info_from,
    is_event_warning,
    key_of,
    mV_scale,
    reviewed_table,
    scope,
)
from analysis.session._work import SessionWork

__all__ = ["AUTO_COLUMNS", "Change", "Command", "ConditionsCommand", "DecideCommand", "EVENTS", "Entry", "JOURNAL_VERSION", "Journal", "JournalError", "JournalReview", "PendingReview", "Progress", "RecordingFacts", "RecordingInfo", "RestoreReport", "Session", "SessionWork", "SettingsChange", "SettingsCommand", "SettingsJob", "SummaryJob", "SweepsCommand", "VIEW_COLUMNS", "cycle_measurer", "info_from", "is_event_warning", "key_of", "mV_scale", "open_session", "pending_reviews", "reviewed_table", "save_session", "scope", "stored_recordings", "write_durably"]
