"""The beat table: equal-length column arrays, one row per beat, rows never deleted.

Rejection is a value in the ``accepted`` column with a reason elsewhere, never a removed row, so
columns cannot fall out of line. The columns that the beats CSV carries, in its order, are
:data:`BEATS_CSV_COLUMNS`: the contract's :data:`CSV_COLUMNS`, then the review's
:data:`REVIEW_CSV_COLUMNS`; a table may carry more (marker times and sample indices used by events,
summaries and the app), which the CSV leaves out. Every column is declared once, in the catalogue
:mod:`analysis.columns`.
"""

from __future__ import annotations

import csv
import io
import math
from typing import IO, Iterable, Iterator, Mapping, Sequence

import numpy as np

from analysis.columns import BeatColumn, csv_columns, review_csv_columns

__all__ = ["BEATS_CSV_COLUMNS", "COLUMNS", "CSV_COLUMNS", "REVIEW_CSV_COLUMNS", "BeatTable", "format_value"]


#: The contract's columns of the beats CSV, in the contract's order: the catalogue's CSV columns.
COLUMNS: tuple[BeatColumn, ...] = csv_columns()
CSV_COLUMNS: tuple[str, ...] = tuple(c.name for c in COLUMNS)
#: The review's columns the beats CSV writes after them: verdict, reason, who decided, recording id.
REVIEW_CSV_COLUMNS: tuple[str, ...] = tuple(c.name for c in review_csv_columns())
#: Every column of the beats CSV, in its order.
BEATS_CSV_COLUMNS: tuple[str, ...] = CSV_COLUMNS + REVIEW_CSV_COLUMNS
_BY_NAME = {c.name: c for c in (*COLUMNS, *review_csv_columns())}


def format_value(value: object, decimals: int | None) -> str:
    """One CSV cell: empty for NaN or None, fixed decimals for floats, plain text otherwise."""
    if value is None:
        return ""
    if isinstance(value, (float, np.floating)):
        if not math.isfinite(value):
            return ""
        if decimals is None:
            return repr(float(value))
        text = f"{float(value):.{decimals}f}"
        return "0." + "0" * decimals if text == "-0." + "0" * decimals else text
    if isinstance(value, (bool, np.bool_)):
        return "1" if value else "0"
    if isinstance(value, (int, np.integer)):
        return str(int(value))
    return str(value)


class BeatTable:
    """Named, equal-length column arrays; one row per beat.

    Parameters
    ----------
    columns : mapping of str to array_like
        Column name to values. Float columns become float64, int columns int64, str columns
        object arrays of str. Columns not in :data:`COLUMNS` keep the dtype numpy gives them.

    Examples
    --------
    >>> t = BeatTable({"sweep": [0, 0], "beat": [0, 1], "cl_ms": [float("nan"), 812.5]})
    >>> len(t), t["cl_ms"][1]
    (2, 812.5)
    """

    __slots__ = ("_cols",)

    def __init__(self, columns: Mapping[str, object] | None = None) -> None:
        cols: dict[str, np.ndarray] = {}
        n: int | None = None
        for name, values in (columns or {}).items():
            arr = _as_column(name, values)
            if n is None:
                n = len(arr)
            elif len(arr) != n:
                raise ValueError(f"column {name!r} has {len(arr)} rows, expected {n}")
            arr.setflags(write=False)
            cols[name] = arr
        self._cols = cols

    @classmethod
    def empty(cls, names: Iterable[str] = BEATS_CSV_COLUMNS) -> "BeatTable":
        """A table with the given columns and no rows."""
        return cls({name: [] for name in names})

    @classmethod
    def concat(cls, tables: Sequence["BeatTable"]) -> "BeatTable":
        """Rows of several tables one after another; the columns are those of the first table
        that has rows (a table with no rows, from a recording without beats, may lack columns)."""
        tables = [t for t in tables if t is not None]
        if not tables:
            return cls.empty()
        with_rows = [t for t in tables if len(t)]
        tables = with_rows or tables[:1]
        names = tables[0].names
        return cls({n: np.concatenate([t[n] for t in tables]) if len(tables) > 1 else tables[0][n] for n in names})

    # -- access -------------------------------------------------------------------------------
    @property
    def names(self) -> list[str]:
        return list(self._cols)

    def __len__(self) -> int:
        return len(next(iter(self._cols.values()))) if self._cols else 0

    def __getitem__(self, name: str) -> np.ndarray:
        try:
            return self._cols[name]
        except KeyError:
            raise KeyError(f"the beat table has no column {name!r}") from None

    def __contains__(self, name: object) -> bool:
        return name in self._cols

    def get(self, name: str, default: object = None) -> object:
        return self._cols.get(name, default)

    def columns(self) -> dict[str, np.ndarray]:
        """A shallow copy of the column mapping (arrays are read-only)."""
        return dict(self._cols)

    def row(self, i: int) -> dict[str, object]:
        return {name: arr[i].item() if hasattr(arr[i], "item") else arr[i] for name, arr in self._cols.items()}

    def rows(self) -> Iterator[dict[str, object]]:
        for i in range(len(self)):
            yield self.row(i)

    # -- derived tables -----------------------------------------------------------------------
    def with_columns(self, **columns: object) -> "BeatTable":
        """A new table with columns added or replaced."""
        # The columns kept are already checked and read-only: only the new ones are converted.
        added = BeatTable(columns)._cols
        n = len(self) if self._cols else None
        for name, arr in added.items():
            if n is None:
                n = len(arr)
            elif len(arr) != n:
                raise ValueError(f"column {name!r} has {len(arr)} rows, expected {n}")
        out = BeatTable()
        out._cols = {**self._cols, **added}
        return out

    def with_rows_set(self, rows: np.ndarray, **values: object) -> "BeatTable":
        """A new table with ``values[name]`` written into rows ``rows`` of existing columns.

        Only those rows are converted to the column's kind; the rest of each column is copied
        as it is (a review verdict changes one row of a table of thousands).
        """
        rows = np.asarray(rows, dtype=np.int64).reshape(-1)
        cols = dict(self._cols)
        for name, new in values.items():
            column = np.array(self[name], copy=True)
            column[rows] = _as_column(name, new)
            column.setflags(write=False)
            cols[name] = column
        out = BeatTable()
        out._cols = cols
        return out

    def take(self, index: object) -> "BeatTable":
        """A new table of the rows a boolean mask or an index array selects (for views only)."""
        if not isinstance(index, (np.ndarray, slice, list)):
            return BeatTable({n: a[index] for n, a in self._cols.items()})
        # Rows of checked columns keep their kind: nothing to convert again.
        cols = {n: a[index] for n, a in self._cols.items()}
        for arr in cols.values():
            arr.setflags(write=False)
        out = BeatTable()
        out._cols = cols
        return out

    def equals(self, other: "BeatTable") -> bool:
        """Same columns in the same order with identical values (NaN equal to NaN)."""
        if self.names != other.names or len(self) != len(other):
            return False
        for n in self.names:
            a, b = self[n], other[n]
            if a.dtype.kind == "f" and b.dtype.kind == "f":
                if not np.array_equal(a, b, equal_nan=True):
                    return False
            elif not np.array_equal(a, b):
                return False
        return True

    # -- output -------------------------------------------------------------------------------
    def to_csv(self, fh: IO[str] | None = None, columns: Sequence[str] = BEATS_CSV_COLUMNS, header: bool = True) -> str | None:
        """Write the table as CSV (``\\n`` line ends, undefined values as empty cells).

        Returns the text when ``fh`` is None.
        """
        out = io.StringIO() if fh is None else fh
        writer = csv.writer(out, lineterminator="\n")
        if header:
            writer.writerow(columns)
        decimals = [(_BY_NAME[c].decimals if c in _BY_NAME else None) for c in columns]
        arrays = [self[c] for c in columns]
        for i in range(len(self)):
            writer.writerow([format_value(a[i], d) for a, d in zip(arrays, decimals)])
        return out.getvalue() if fh is None else None

    def __repr__(self) -> str:
        return f"BeatTable({len(self)} rows, columns={self.names})"


def _as_column(name: str, values: object) -> np.ndarray:
    spec = _BY_NAME.get(name)
    kind = spec.dtype if spec else None
    if kind == "float":
        return np.array(values, dtype=np.float64, copy=True).reshape(-1)
    if kind == "int":
        return np.array(values, dtype=np.int64, copy=True).reshape(-1)
    if kind == "str":
        arr = np.empty(len(values), dtype=object)  # type: ignore[arg-type]
        arr[:] = ["" if v is None else str(v) for v in values]  # type: ignore[union-attr]
        return arr
    arr = np.array(values, copy=True)
    if arr.dtype.kind in "US":
        arr = arr.astype(object)
    return arr.reshape(-1)
