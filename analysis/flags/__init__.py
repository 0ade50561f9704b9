"""Quality and arrhythmia flags of beats and sweeps, and the automatic rejection rules.

The modules below are private to this package; import from here."""


from analysis.flags._events import AUTO_PREFIX, EVENT_FLAGS, REJECTABLE_FLAGS, TRACE_FLAGS, apply_events, artefact_like, is_event_warning, reapply_rules, rejection_flags, strip_events, table_events
from analysis.flags._trace import ArraySweeps, RecordingSweeps, as_sweeps, box_mean, sweep_trace_events

__all__ = ["AUTO_PREFIX", "ArraySweeps", "EVENT_FLAGS", "REJECTABLE_FLAGS", "RecordingSweeps", "TRACE_FLAGS", "apply_events", "artefact_like", "as_sweeps", "box_mean", "is_event_warning", "reapply_rules", "rejection_flags", "strip_events", "sweep_trace_events", "table_events"]
