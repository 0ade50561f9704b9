"""The HDF5 results file: analysed recordings with settings, decisions, conditions and summaries.

The layout is documented for h5py, MATLAB and R users in ``docs/results-format.md``; this module
and :mod:`analysis.results._layout` are its reference implementation. In short (schema 2)::

    /                   attrs: format="upstroke-results", schema_version=2, upstroke_version
    /default_settings   JSON text (optional): settings for recordings added later
    /index/             one row per recording: id, label, source, reader, channel, geometry,
                        settings_row, and NAME_start / NAME_count of its rows in each table below
    /settings/          the distinct settings: json, schema_version, hash
    /provenance/        one row per recording: software versions, analysed_at_utc
    /beats/ /decisions/ /conditions/ /summary/ /ensembles/ /warnings/ /sweeps/ /sweep_geometry/
                        tables across recordings, column-wise, rows recording after recording
    /ensemble_samples/  v_mV: the ensemble-averaged beats' samples, one after another

No pickled objects: numbers are float64 / int64 datasets, text is UTF-8 variable-length strings,
undefined values are NaN. Saves are atomic (:mod:`analysis.results._atomic`). Any other
top-level group or dataset (another module's, such as a study layout) is copied through
unchanged when the file is rewritten. Files of schema 1 (one group per recording) are read too.
"""

from __future__ import annotations

import contextlib
import os
from typing import Sequence

import numpy as np

from analysis._version import __version__
from analysis.errors import ResultsFileError, missing
from analysis.recording import file_sha256
from analysis.results._atomic import atomic_output
from analysis.results._h5 import checked, damaged, set_text_attr, str_dtype, text
from analysis.results._layout import OWNED, read_v2, write_v2
from analysis.results._legacy import read_v1
from analysis.results._lock import results_lock
from analysis.results._records import ResultsFile, StoredRecording
from analysis.results._study import carry_study

__all__ = ["FORMAT_NAME", "SCHEMA_VERSION", "changed_source_warning", "load_results", "save_results"]

FORMAT_NAME = "upstroke-results"
#: Version of the layout above. Readers refuse files with a newer version.
SCHEMA_VERSION = 2
_OPEN_FIX = "open a results file written by upstroke analyze --out, or analyse the recording again"


def _carry_from(source: str | None, target: str):
    """The file whose top-level objects that this layout does not own are copied into the new one."""
    for candidate in (source, target):
        if candidate and os.path.isfile(candidate):
            return candidate
    return None


def _copy_foreign(source: str | None, f) -> None:
    import h5py  # heavy; analyze without --out never needs it

    if source is None:
        return
    try:
        src = h5py.File(source, "r")
    except OSError:
        return  # not a readable HDF5 file: nothing of another module's to keep
    with src:
        if src.attrs.get("format") is not None and text(src.attrs["format"]) != FORMAT_NAME:
            return
        for name in src:
            if name not in OWNED and name not in f:
                src.copy(src[name], f, name=name)


def _release(recordings: Sequence[StoredRecording]) -> None:
    # Read what is still in a file being replaced, and let go of it (Windows cannot replace an
    # open file).
    seen = set()
    for r in recordings:
        loader = r.__dict__.get("_loader")
        if loader is not None and id(loader) not in seen:
            seen.add(id(loader))
            loader.close()


def save_results(
    path: str | os.PathLike, results: ResultsFile | Sequence[StoredRecording], *, atomic: bool = True,
) -> None:
    """Write a results file atomically.

    Parameters
    ----------
    path : str or path
        The file to write. An existing file is replaced only once the new one is complete; the
        top-level objects of it that this layout does not own (another module's groups) are
        copied into the new file unchanged. When ``results`` is a :class:`ResultsFile` read from
        another file (``results.path``), that file's are copied instead.
    results : ResultsFile or sequence of StoredRecording
    atomic : bool
        False when ``path`` is itself a temporary file that the caller moves into place (a
        command writing several outputs all or none): it is then written directly, without a
        second temporary file beside it that a kill could strand.

    Raises
    ------
    ResultsFileError
        When the folder does not exist or cannot be written.
    """
    import h5py  # heavy; analyze without --out never needs it

    target = os.path.abspath(os.fspath(path))
    folder = os.path.dirname(target)
    if not os.path.isdir(folder):
        raise ResultsFileError(path, "its folder does not exist", "create the folder or choose another place")
    content = results if isinstance(results, ResultsFile) else ResultsFile(list(results))
    recordings = list(content.recordings)
    carry = _carry_from(content.path, target if atomic else None)
    try:
        # One writer at a time (a caller that read the file first holds the lock already).
        with results_lock(target) if atomic else contextlib.nullcontext(), \
                atomic_output(target) if atomic else contextlib.nullcontext(target) as tmp:
            with h5py.File(tmp, "w", libver=("earliest", "v110"), track_order=False) as f:
                set_text_attr(f, "format", FORMAT_NAME)
                f.attrs["schema_version"] = np.int64(SCHEMA_VERSION)
                set_text_attr(f, "upstroke_version", __version__)
                if content.default_settings_json is not None:
                    f.create_dataset("default_settings", data=content.default_settings_json, dtype=str_dtype(), track_times=False)
                write_v2(f, recordings, folder)
                _copy_foreign(carry, f)
                f.flush()
            _release(recordings)
            carry_study(target, tmp)  # a study's layout stays with the file it describes
    except PermissionError as exc:
        raise ResultsFileError(path, f"cannot be written ({exc.strerror})", "choose a folder you can write to") from None


# -- reading ----------------------------------------------------------------------------------
def changed_source_warning(label: str, path: str, how: str) -> str:
    """The warning for a source recording that differs from the one analysed (``how``: the test)."""
    return (
        f"{label}: the source recording ({path}) has changed since it was analysed "
        f"({how}); the saved results may not match it"
    )


def _check_source(rec: StoredRecording, relpath: str, folder: str, warnings: list[str], full: bool) -> None:
    # A results file moved together with its recordings finds them through the relative path.
    candidates = []
    if relpath:
        candidates.append(os.path.normpath(os.path.join(folder, relpath)))
    candidates.append(rec.source_path)
    found = next((p for p in candidates if os.path.isfile(p)), None)
    if found is None:
        warnings.append(
            f"{rec.label}: the source recording is missing ({rec.source_path}); the results open, "
            "but re-analysis needs the file"
        )
        return
    rec.source_path = os.path.abspath(found)
    try:
        size = os.path.getsize(found)
        digest = file_sha256(found) if full else None
    except OSError as exc:
        warnings.append(f"{rec.label}: the source recording cannot be read ({exc.strerror}); the results open")
        return
    if rec.source_bytes >= 0 and size != rec.source_bytes:
        warnings.append(changed_source_warning(rec.label, found, "its size differs"))
    elif digest is not None and digest != rec.sha256:
        warnings.append(changed_source_warning(rec.label, found, "SHA-256 differs"))


def load_results(path: str | os.PathLike, *, verify_sources: bool | str = True) -> ResultsFile:
    """Read a results file.

    Parameters
    ----------
    path : str or path
    verify_sources : bool or "quick"
        True: compare each source recording's size and SHA-256 with those saved; a changed or
        missing source adds a line to ``open_warnings`` (the results still open). ``"quick"``:
        only find each source and compare its size, which reads no recording (the session
        compares the SHA-256 when it first opens a recording). False: neither.

    Returns
    -------
    ResultsFile

    Raises
    ------
    ResultsFileError
        When the file is missing, not HDF5, truncated or corrupt, not an Upstroke results file, or
        of a newer or unknown schema version.
    """
    import h5py  # heavy; analyze without --out never needs it

    name = os.fspath(path)
    if not os.path.exists(name):
        raise ResultsFileError(name, *missing(name))
    if os.path.isdir(name):
        raise ResultsFileError(name, "is a folder, not a results file", "give the .h5 file itself")
    folder = os.path.dirname(os.path.abspath(name))
    try:
        f = h5py.File(name, "r")
    except OSError:
        raise ResultsFileError(
            name, "is not a readable HDF5 file (truncated, corrupt, or another format)", _OPEN_FIX,
        ) from None
    keep_open = False
    try:
        version = _check_header(f, name)
        default = text(checked(f["default_settings"]).asstr()[()]) if "default_settings" in f else None
        if version == 1:
            found = read_v1(f)
        else:
            found = read_v2(f, os.path.abspath(name))
            keep_open = bool(found)  # the recordings read their tables from it on first use
    except ResultsFileError:
        raise
    except (OSError, KeyError, ValueError, TypeError, RuntimeError, IndexError) as exc:
        raise damaged(name, exc) from None
    finally:
        if not keep_open:
            f.close()
    warnings: list[str] = []
    if verify_sources:
        for rec, relpath in found:
            if rec.sha256:
                _check_source(rec, relpath, folder, warnings, full=verify_sources != "quick")
    return ResultsFile([r for r, _ in found], default, warnings, os.path.abspath(name))


def _check_header(f, name: str) -> int:
    """The file's schema version, after refusing a foreign, unversioned or newer file."""
    if text(f.attrs.get("format", "")) != FORMAT_NAME:
        raise ResultsFileError(name, "is an HDF5 file but not an Upstroke results file", _OPEN_FIX)
    version = f.attrs.get("schema_version")
    if version is None or not np.issubdtype(np.asarray(version).dtype, np.integer):
        raise ResultsFileError(name, "has no valid results schema version", _OPEN_FIX)
    if int(version) > SCHEMA_VERSION:
        raise ResultsFileError(
            name, f"was written by a newer Upstroke (results schema {int(version)}; "
            f"this version reads up to {SCHEMA_VERSION})", "update Upstroke to open it",
        )
    if int(version) < 1:
        raise ResultsFileError(name, f"has an unknown results schema version {int(version)}", _OPEN_FIX)
    return int(version)
