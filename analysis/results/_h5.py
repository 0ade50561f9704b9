"""Small HDF5 helpers the results file's writers and readers share: text, tables, checks.

A *table* is a group with one dataset per column and an attribute ``columns`` naming them in
order (docs/results-format.md). Text is UTF-8 variable-length strings; numbers are stored as
they are. Reading refuses what no results file holds (opaque or compound types, a dataset that
declares more values than the file stores, an overlong text) before reading any of it.
"""

from __future__ import annotations

from typing import Mapping

import numpy as np

from analysis.errors import ResultsFileError

__all__ = [
    "MAX_TEXT_CHARS", "checked", "damaged", "h5_is_string", "read_columns", "read_text_column", "set_text_attr",
    "str_dtype", "text", "text_array", "write_column", "write_columns",
]

#: The longest single text a results file may hold (a label, a path, the settings JSON, a
#: warning, a reason). Anything longer is damage or a crafted file: refused, never shown.
MAX_TEXT_CHARS = 1_000_000


def str_dtype():
    import h5py  # heavy; analyze without --out never needs it

    return h5py.string_dtype("utf-8")


def text_array(values) -> np.ndarray:
    """``values`` as an object array of str ("" for None)."""
    return np.array(["" if v is None else str(v) for v in np.asarray(values, dtype=object).tolist()], dtype=object)


def write_column(group, name: str, values: np.ndarray, **create) -> None:
    """One column: text as UTF-8 strings, numbers as they are."""
    arr = np.asarray(values)
    if arr.dtype.kind in "OUS":
        group.create_dataset(name, data=text_array(arr), dtype=str_dtype(), track_times=False, **create)
    else:
        group.create_dataset(name, data=arr, track_times=False, **create)


def write_columns(group, columns: Mapping[str, np.ndarray]) -> None:
    """A table: the ``columns`` attribute, then one dataset per column."""
    group.attrs.create("columns", np.array(list(columns), dtype=object), dtype=str_dtype())
    for name, values in columns.items():
        write_column(group, name, values)


def set_text_attr(obj, name: str, value: str) -> None:
    obj.attrs.create(name, str(value), dtype=str_dtype())


def text(value) -> str:
    """A stored text as str, refusing an overlong one."""
    out = value.decode("utf-8") if isinstance(value, bytes) else str(value)
    if len(out) > MAX_TEXT_CHARS:
        raise ValueError(f"a stored text of {len(out)} characters is too long (at most {MAX_TEXT_CHARS})")
    return out


def h5_is_string(ds) -> bool:
    import h5py  # heavy; analyze without --out never needs it

    return h5py.check_string_dtype(ds.dtype) is not None


def checked(ds):
    """``ds``, after refusing what no results file holds, before any of it is read.

    Only datasets of numbers or text are read (never opaque, compound or reference types), and
    only when the file stores the data they declare: a dataset's shape is just a declaration
    (10^12 rows with no chunk written take a few bytes), and reading it would allocate it.
    """
    import h5py  # heavy; analyze without --out never needs it

    if not isinstance(ds, h5py.Dataset):
        raise TypeError(f"{ds.name} is not a dataset")
    if not (ds.dtype.kind in "biuf" or h5_is_string(ds)):
        raise TypeError(f"{ds.name} holds {ds.dtype} values, neither numbers nor text")
    declared = ds.size * ds.dtype.itemsize
    if declared and ds.id.get_storage_size() < declared and ds.id.get_create_plist().get_nfilters() == 0:
        raise ValueError(f"{ds.name} declares {ds.size} values but the file stores fewer")
    return ds


def read_text_column(ds, start: int = 0, stop: int | None = None) -> np.ndarray:
    """Rows ``start:stop`` of a text dataset as an object array of str."""
    raw = ds.asstr()[start:stop] if ds.ndim else [ds.asstr()[()]]
    return np.array([text(v) for v in np.ravel(raw)], dtype=object)


def _column(ds, start: int, stop: int | None) -> np.ndarray:
    if ds.dtype.kind == "O" or h5_is_string(ds):
        return read_text_column(ds, start, stop)
    return ds[start:stop] if ds.ndim else ds[()]


def read_columns(group, start: int = 0, stop: int | None = None, *, names=None) -> dict[str, np.ndarray]:
    """Rows ``start:stop`` of a table's columns (all its columns, or ``names`` in that order)."""
    names = [text(n) for n in group.attrs["columns"]] if names is None else list(names)
    out: dict[str, np.ndarray] = {}
    shape = None
    for name in names:
        ds = checked(group[name])
        shape = ds.shape if shape is None else shape
        if ds.shape != shape or len(shape) > 1:
            raise ValueError(f"{ds.name} is not a column as long as the others of its table")
        out[name] = _column(ds, start, stop)
        if np.ndim(out[name]) != 1 or len(out[name]) != len(next(iter(out.values()))):
            raise ValueError(f"{ds.name} is not a column as long as the others of its table")
    return out


def damaged(path: str, exc: BaseException):
    """The one-line error for a results file whose content cannot be read."""
    return ResultsFileError(
        path, f"is damaged and cannot be read ({type(exc).__name__}: {' '.join(str(exc).split())[:120]})",
        "restore it from a backup or analyse the recordings again",
    )
