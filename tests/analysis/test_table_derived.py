"""Tables derived from a beat table (rows taken, columns added) equal the same table built and
checked afresh: the derived ones reuse the checked columns instead of converting them again.

The reference is the table's own constructor (the column kinds of CONTRACT.md's "Beats CSV");
numpy's fancy indexing gives the expected rows (numpy reference behaviour).
"""

from __future__ import annotations

import numpy as np
import pytest

from analysis.table import BeatTable


def _table() -> BeatTable:
    return BeatTable({
        "sweep": [0, 0, 1, 1], "beat": [0, 1, 0, 1], "t_upstroke_s": [0.4, 1.2, 0.5, 1.3],
        "cl_ms": [np.nan, 800.0, np.nan, 805.5], "flags": ["", "noisy", None, "ead"],
    })


@pytest.mark.parametrize("index", [np.array([3, 1]), np.array([True, False, True, False]), [0, 2], slice(1, 3)])
def test_rows_taken_equal_the_table_built_from_those_rows(index):
    t = _table()
    taken = t.take(index)
    afresh = BeatTable({n: np.asarray(t[n])[index].tolist() for n in t.names})
    assert taken.equals(afresh)
    assert [taken[n].dtype for n in taken.names] == [afresh[n].dtype for n in afresh.names]
    assert not any(taken[n].flags.writeable for n in taken.names)


def test_columns_added_are_checked_and_the_others_kept():
    t = _table()
    out = t.with_columns(flags=["a", None, "b", ""], accepted=[1, 0, 1, 1])
    afresh = BeatTable({**{n: t[n].tolist() for n in t.names}, "flags": ["a", "", "b", ""], "accepted": [1, 0, 1, 1]})
    assert out.equals(afresh) and out.names == t.names + ["accepted"]
    assert out["flags"].dtype == object and out["accepted"].dtype == np.int64
    assert out["cl_ms"] is t["cl_ms"]  # kept, not converted again
    with pytest.raises(ValueError, match="accepted"):
        t.with_columns(accepted=[1, 0])


def test_rows_set_equal_the_table_built_with_those_values():
    # The reference is the constructor on the whole columns with the rows replaced by hand
    # (CONTRACT.md's column kinds: a None in a text column reads as "", ints stay int64).
    t = _table().with_columns(accepted=[1, 1, 0, 1])
    out = t.with_rows_set(np.array([2, 0]), flags=[None, "ead"], accepted=[1, 0])
    afresh = BeatTable({**{n: t[n].tolist() for n in t.names}, "flags": ["ead", "noisy", "", "ead"],
                        "accepted": [0, 1, 1, 1]})
    assert out.equals(afresh)
    assert out["accepted"].dtype == np.int64 and out["flags"].dtype == object
    assert out["cl_ms"] is t["cl_ms"] and t["accepted"].tolist() == [1, 1, 0, 1]  # the source is untouched
    assert not any(out[n].flags.writeable for n in out.names)
    with pytest.raises(KeyError, match="verdict"):
        t.with_rows_set(np.array([0]), verdict=["accepted"])
