"""A study's layout in the results file: the top-level ``/study`` group.

Layout (documented in ``docs/results-format.md`` and ``docs/study.md``)::

    /study                  attrs: source, root (absolute when written), root_relpath (from the
                            results file's folder), group_column, conditions (in order, baseline
                            first), extra_columns, unmatched
        file, cell, condition, group    one UTF-8 string per file of the study
        extra/NAME          one string dataset per column of the user's own, same order

Reading gives back the same :class:`~analysis.study_layout.StudyLayout`; when the study's folder
has moved together with the results file, ``root_relpath`` finds it again.
"""

from __future__ import annotations

import contextlib
import os
import shutil

import numpy as np

from analysis.errors import ResultsFileError
from analysis.results._atomic import atomic_output
from analysis.study_layout import StudyEntry, StudyLayout

__all__ = ["carry_study", "read_study", "write_study"]

_GROUP = "study"


def _strings(values) -> np.ndarray:
    return np.array([str(v) for v in values], dtype=object)


def write_study(path: str | os.PathLike, layout: StudyLayout, *, atomic: bool = True) -> None:
    """Store a study's layout in an existing results file (replacing any layout it held).

    Parameters
    ----------
    path : str or path
        The results file.
    layout : StudyLayout
    atomic : bool
        True rewrites a copy and replaces the file only once it is complete; False writes in
        place (for a temporary file the caller moves into place).

    Raises
    ------
    ResultsFileError
        When the file does not exist or cannot be written.
    """
    import h5py  # heavy; only the results file needs it

    target = os.fspath(path)
    if not os.path.isfile(target):
        raise ResultsFileError(target, "no such results file", "analyse the study's files first (upstroke batch --out)")
    folder = os.path.dirname(os.path.abspath(target))
    text = h5py.string_dtype("utf-8")
    with atomic_output(target) if atomic else contextlib.nullcontext(target) as tmp:
        if atomic:
            shutil.copyfile(target, tmp)
        with h5py.File(tmp, "r+") as f:
            if _GROUP in f:
                del f[_GROUP]
            g = f.create_group(_GROUP)
            g.attrs["source"] = layout.source
            g.attrs["root"] = layout.root
            g.attrs["root_relpath"] = os.path.relpath(layout.root, folder).replace(os.sep, "/")
            g.attrs["group_column"] = layout.group_column
            for name, values in (("conditions", layout.conditions), ("extra_columns", layout.extra_columns),
                                 ("unmatched", layout.unmatched)):
                g.create_dataset(f"_{name}", data=_strings(values), dtype=text)
            for column in ("file", "cell", "condition", "group"):
                g.create_dataset(column, data=_strings(getattr(e, column) for e in layout.entries), dtype=text)
            extra = g.create_group("extra")
            for column in layout.extra_columns:
                extra.create_dataset(column, data=_strings(e.value(column) for e in layout.entries), dtype=text)


def carry_study(old: str | os.PathLike, new: str | os.PathLike) -> None:
    """Copy the ``/study`` group of a results file about to be replaced into its new version.

    Nothing happens when ``old`` does not exist, is the same file, holds no study or cannot be
    read (a damaged file is the caller's to report), or when ``new`` already has a study.
    """
    import h5py  # heavy; only the results file needs it

    if not os.path.isfile(old) or os.path.abspath(old) == os.path.abspath(new):
        return
    try:
        with h5py.File(old, "r") as src:
            if _GROUP not in src:
                return
            with h5py.File(new, "r+") as dst:
                if _GROUP not in dst:
                    src.copy(src[_GROUP], dst, name=_GROUP)
    except OSError:
        return


def read_study(path: str | os.PathLike) -> StudyLayout | None:
    """The study layout stored in a results file, or None when it holds none.

    Raises
    ------
    ResultsFileError
        When the file cannot be read or its ``/study`` group is damaged.
    """
    import h5py  # heavy; only the results file needs it

    target = os.fspath(path)
    folder = os.path.dirname(os.path.abspath(target))
    try:
        with h5py.File(target, "r") as f:
            if _GROUP not in f:
                return None
            g = f[_GROUP]

            def texts(name: str, where=g) -> list[str]:
                return [str(v) for v in where[name].asstr()[()]]

            columns = {c: texts(c) for c in ("file", "cell", "condition", "group")}
            extra_columns = texts("_extra_columns")
            extras = {c: texts(c, g["extra"]) for c in extra_columns}
            n = len(columns["file"])
            if any(len(v) != n for v in (*columns.values(), *extras.values())):
                raise ValueError("the study's columns differ in length")
            entries = tuple(
                StudyEntry(columns["file"][i], columns["cell"][i], columns["condition"][i], columns["group"][i],
                           tuple((c, extras[c][i]) for c in extra_columns))
                for i in range(n)
            )
            root = str(g.attrs["root"])
            moved = os.path.normpath(os.path.join(folder, str(g.attrs["root_relpath"])))
            if not os.path.isdir(root) and os.path.isdir(moved):
                root = moved
            return StudyLayout(
                root, entries, tuple(texts("_conditions")), tuple(extra_columns), str(g.attrs["group_column"]),
                str(g.attrs["source"]), tuple(texts("_unmatched")),
            )
    except OSError:
        raise ResultsFileError(target, "is not a readable HDF5 file", "give an Upstroke results file") from None
    except (KeyError, ValueError, TypeError) as exc:
        raise ResultsFileError(
            target, f"its study layout is damaged ({type(exc).__name__}: {exc})",
            "write the layout again with upstroke batch --layout or --sheet",
        ) from None
