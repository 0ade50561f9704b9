"""The line above the study grid: recordings analysed, and beats waiting for review and where."""

from __future__ import annotations

from app.gui.panels.study_panel import progress_text
from app.gui.views.study_grid import GridEntry


def _entry(cell: str, condition: str, to_review: int, *, analysed: bool = True) -> GridEntry:
    return GridEntry(cell, condition, key=f"{cell}/{condition}" if analysed else None, n_used=10,
                     n_to_review=to_review)


def test_the_line_counts_waiting_beats_and_their_recordings_in_good_english():
    # Common practice, no source: counts agree with their nouns ("1 beat", "2 beats").
    one = [_entry("NL-A", "baseline", 1), _entry("NL-A", "UP-113", 0)]
    assert progress_text(one) == "1 cell × 2 conditions, 2 recordings; 1 beat to review in 1 recording"
    many = [_entry("NL-A", "baseline", 2), _entry("NL-B", "baseline", 3), _entry("NL-B", "UP-113", 0)]
    assert progress_text(many) == "2 cells × 2 conditions, 3 recordings; 5 beats to review in 2 recordings"


def test_the_line_says_when_nothing_waits_and_counts_only_analysed_recordings():
    entries = [_entry("NL-A", "baseline", 0), _entry("NL-A", "washout", 4, analysed=False)]
    assert progress_text(entries) == "1 cell × 2 conditions, 1 recording; no beat waiting for review"
