"""Results files (HDF5) that ``upstroke export`` must refuse: foreign, newer, cut short, damaged.

Seed: a results file written by ``upstroke analyze --out`` for a synthetic cell. Each case
rewrites one part with h5py at the place ``docs/results-format.md`` documents (root attributes
``format`` and ``schema_version``; the tables ``/index``, ``/beats``, ``/decisions``,
``/settings``, ``/summary``, ``/warnings``), or cuts the file.
"""

from __future__ import annotations

import contextlib
import io
import shutil
from pathlib import Path
from typing import Callable

import numpy as np

from .make_corpus import Case
from .settings_cases import good_recording

BEATS = "beats"
_DAMAGED = r"damaged|corrupt|cannot be read|not a readable|truncated"


def good_results(folder: Path) -> Path:
    """A results file for a synthetic cell, written by ``upstroke analyze --out``."""
    from app.cli import main

    path = folder / "good-results.h5"
    if not path.exists():
        with contextlib.redirect_stdout(io.StringIO()), contextlib.redirect_stderr(io.StringIO()):
            status = main(["analyze", str(good_recording(folder)), "--out", str(path)])
        if status != 0:
            raise RuntimeError(f"upstroke analyze could not write the seed results file ({status})")
    return path


def _variant(seed: Path, dest: Path, edit: Callable) -> Path:
    import h5py

    shutil.copyfile(seed, dest)
    with h5py.File(dest, "r+") as f:
        edit(f)
    return dest


def _first_beats_column(f) -> str:
    first = f[BEATS].attrs["columns"][0]
    return str(first.decode() if isinstance(first, bytes) else first)


def _replace_first(f, table: str, data) -> None:
    """Replace the first column of a stored table (its ``columns`` attribute names them)."""
    first = f[table].attrs["columns"][0]
    name = first.decode() if isinstance(first, bytes) else str(first)
    del f[f"{table}/{name}"]
    f[table].create_dataset(name, data=data)


def _replace_first_numeric(f, table: str, data) -> None:
    """Replace a stored table's first numeric column with ``data`` (text here)."""
    import h5py

    for first in f[table].attrs["columns"]:
        name = first.decode() if isinstance(first, bytes) else str(first)
        if f[f"{table}/{name}"].dtype.kind in "iuf":
            rows = f[f"{table}/{name}"].shape[0]
            del f[f"{table}/{name}"]
            f[table].create_dataset(name, data=np.resize(data, rows), dtype=h5py.string_dtype())
            return
    raise AssertionError(f"{table} has no numeric column")


def _replace_column(f, data=None, **create) -> None:
    name = _first_beats_column(f)
    del f[f"{BEATS}/{name}"]
    f[BEATS].create_dataset(name, data=data, **create)


def _set_text(path: str, value: str, *, lines: bool = False) -> Callable:
    import h5py

    def edit(f) -> None:
        attrs = dict(f[path].attrs)
        del f[path]
        data = np.array([value], dtype=object) if lines else value
        new = f.create_dataset(path, data=data, dtype=h5py.string_dtype("utf-8"))
        for key, item in attrs.items():
            new.attrs[key] = item

    return edit


def _long_warning(f) -> None:
    """The first recording's one warning: 5 million characters (the index counts it)."""
    _set_text("warnings/text", "W" * 5_000_000, lines=True)(f)
    f["index/warnings_start"][0] = 0
    f["index/warnings_count"][0] = 1


def build(folder: Path) -> list[Case]:
    """The results-file cases, written into ``folder``."""
    import h5py

    seed = good_results(folder)
    edits: list[tuple[str, Callable, str, str, bool]] = [
        ("results-newer-schema", lambda f: f.attrs.__setitem__("schema_version", np.int64(99)),
         r"newer Upstroke.*schema 99", "a results file from a future version", False),
        ("results-schema-as-text", lambda f: f.attrs.__setitem__("schema_version", "two"),
         r"schema version", "schema_version stored as text", False),
        ("results-schema-zero", lambda f: f.attrs.__setitem__("schema_version", np.int64(0)),
         r"unknown results schema", "schema version 0", False),
        ("results-no-format", lambda f: f.attrs.__delitem__("format"), r"not an Upstroke results file",
         "the format attribute removed", False),
        ("results-no-beats", lambda f: f.__delitem__(BEATS), _DAMAGED, "the beats table removed", False),
        ("results-no-column", lambda f: f.__delitem__(f"{BEATS}/{_first_beats_column(f)}"), _DAMAGED,
         "one beats column removed", False),
        ("results-no-decisions", lambda f: f.__delitem__("decisions"), _DAMAGED,
         "the decision log removed", False),
        ("results-index-out-of-range", lambda f: f["index/beats_count"].__setitem__(0, 10**9), _DAMAGED,
         "the index gives a recording more beats than the table holds", False),
        ("results-index-not-a-group",
         lambda f: (f.__delitem__("index"), f.create_dataset("index", data=np.zeros(3))), _DAMAGED,
         "/index is a dataset", False),
        ("results-settings-not-json", _set_text("settings/json", "{not json", lines=True), r"settings.*cannot be read|not JSON|damaged",
         "a recording's settings JSON broken", False),
        ("results-settings-out-of-range", _set_text("settings/json", '{"schema_version": 1, "detection": {"smoothing_ms": -5}}', lines=True),
         r"settings.*cannot be read|out of range|damaged", "a recording's settings out of range", False),
        ("results-opaque-column", lambda f: _replace_column(f, np.zeros(3, dtype="V8")), _DAMAGED,
         "a beats column of opaque bytes", False),
        ("results-column-length", lambda f: _replace_column(f, np.zeros(7)), _DAMAGED + r"|length",
         "a beats column longer than the others", False),
        ("results-summary-column-length", lambda f: _replace_first(f, "summary", np.zeros(0)), _DAMAGED,
         "one summary column emptied (found by the hypothesis fuzzer: it crashed the session)", False),
        # Found by the hypothesis fuzzer: text in a numeric summary column escaped as ValueError.
        ("results-summary-text", lambda f: _replace_first_numeric(f, "summary", np.array(["é" * 50], dtype=object)),
         _DAMAGED, "a numeric summary column holding text", False),
        ("results-beats-column-2d", lambda f: _replace_first(f, BEATS, np.zeros((3, 2))), _DAMAGED,
         "a beats column stored as a 3 x 2 table", False),
        ("results-huge-unstored-column", lambda f: _replace_column(f, None, shape=(10**12,), dtype="f8", chunks=(4096,)),
         r"declares|stores|holds|damaged", "a beats column declaring 10^12 rows, none stored", True),
        ("results-long-settings-text", _set_text("settings/json", "S" * 5_000_000, lines=True), r"too long|characters",
         "a settings text of 5 million characters", False),
        ("results-long-warning", _long_warning, r"too long|characters",
         "a warning of 5 million characters", False),
    ]
    cases = []
    for name, edit, expect, why, huge in edits:
        path = _variant(seed, folder / f"{name}.h5", edit)
        out_csv, out_summary = folder / f"{name}.beats.csv", folder / f"{name}.summary.csv"
        argv = ("export", str(path), "--csv", str(out_csv), "--summary-csv", str(out_summary))
        cases.append(Case(name, (path,), argv, path, expect, why, outputs=(out_csv, out_summary), huge=huge))
    data = seed.read_bytes()
    cut = folder / "results-cut-in-half.h5"
    cut.write_bytes(data[: len(data) // 2])
    foreign = folder / "results-foreign.h5"
    with h5py.File(foreign, "w") as f:
        f.create_dataset("spectra", data=np.ones((5, 5)))
    text = folder / "results-is-text.h5"
    text.write_text("file,sweep,beat\n", encoding="utf-8")
    for name, path, expect, why in [
        ("results-cut-in-half", cut, r"not a readable HDF5|truncated|corrupt", "the results file cut in half in a copy"),
        ("results-foreign", foreign, r"not an Upstroke results file", "an HDF5 file from another program"),
        ("results-is-text", text, r"not a readable HDF5", "a text file named .h5"),
    ]:
        out_csv, out_summary = folder / f"{name}.beats.csv", folder / f"{name}.summary.csv"
        argv = ("export", str(path), "--csv", str(out_csv), "--summary-csv", str(out_summary))
        cases.append(Case(name, (path,), argv, path, expect, why, outputs=(out_csv, out_summary)))
    return cases
