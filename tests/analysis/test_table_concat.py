"""BeatTable.concat: tables of recordings without beats lack the measured-only columns."""

from __future__ import annotations

import numpy as np

from analysis.table import CSV_COLUMNS, BeatTable


def test_a_table_without_rows_does_not_break_concatenation():
    full = BeatTable({**{c: np.zeros(2) if c not in ("file", "flags", "condition") else ["a", "b"] for c in CSV_COLUMNS},
                      "ead_mV": [1.0, 2.0]})
    empty = BeatTable.empty()  # a quiescent recording: no beats, only the CSV's columns
    both = BeatTable.concat([empty, full, empty])
    assert len(both) == 2 and "ead_mV" in both.names  # construction: the rows of the one full table
    np.testing.assert_array_equal(both["ead_mV"], [1.0, 2.0])
    assert len(BeatTable.concat([empty, empty])) == 0
