"""The HDF5 results file: analysed recordings with settings, decisions, conditions and summaries.

The layout is documented for h5py, MATLAB and R users in ``docs/results-format.md``; this module
is its reference implementation. In short::

    /                       attrs: format="upstroke-results", schema_version, upstroke_version
    /default_settings       JSON text (optional): settings for recordings added later
    /recordings/000000/     one group per analysed recording, in order
        attrs               source_path, source_relpath, sha256, label, reader, channel,
                            channel_name, units, ljp_mV, sweeps, sampling_rate_hz
        settings            JSON text; attrs schema_version, hash
        sweep_starts_s, sweep_lengths
        beats/              one dataset per column; attrs columns (their order)
        decisions/          sweep, beat, t_upstroke_s, accepted, reason, time_utc, action
        conditions/         name, unit, start, end, steady_kind, steady_value
        summary/            one dataset per summary column; attrs columns
        summary/ensemble/N  the ensemble-averaged beat of summary row N (mV); attrs fs_hz, t0_s
        warnings            text lines
        provenance          attrs: upstroke/numpy/scipy/h5py/python versions, analysed_at_utc

No pickled objects: numbers are float64 / int64 datasets, text is UTF-8 variable-length strings,
undefined values are NaN. Saves are atomic (:mod:`analysis.results._atomic`). The same content always
gives identical datasets and attributes; only ``provenance.analysed_at_utc`` (set when the
recording was analysed) and the decisions' own times carry a clock.
"""

from __future__ import annotations

import contextlib
import os
import platform
from dataclasses import dataclass, field
from typing import Mapping, Sequence

import numpy as np

from analysis._version import __version__
from analysis.conditions import Condition, SteadyState
from analysis.decisions import FIELDS as DECISION_FIELDS
from analysis.decisions import DecisionLog, now_utc
from analysis.errors import ResultsFileError
from analysis.recording import file_sha256
from analysis.results._atomic import atomic_output
from analysis.results._facts import RecordingFacts
from analysis.results._study import carry_study
from analysis.table import BeatTable

__all__ = [
    "FORMAT_NAME",
    "SCHEMA_VERSION",
    "ResultsFile",
    "StoredRecording",
    "load_results",
    "provenance_now",
    "save_results",
]

FORMAT_NAME = "upstroke-results"
#: Version of the layout above. Readers refuse files with a newer version.
SCHEMA_VERSION = 1
_OPEN_FIX = "open a results file written by upstroke analyze --out, or analyse the recording again"


@dataclass
class StoredRecording(RecordingFacts):
    """Everything the results file keeps about one analysed recording.

    The recording's facts (:class:`RecordingFacts`: source, reader, channel, geometry,
    provenance), and:

    Attributes
    ----------
    ljp_mV : float
        Liquid-junction-potential correction applied (V_true = V_measured - LJP).
    settings_json : str
        The full settings as JSON text, ``settings_schema`` its schema version, ``settings_hash``
        the short hash.
    beats : BeatTable
        The per-beat table as the session shows it (decisions and conditions applied), with any
        extra columns.
    decisions : DecisionLog
    conditions : tuple of Condition
    summary : dict of str to ndarray
        Summary columns in order, one row per file x sweep group x condition.
    ensembles : list of (ndarray, float, float)
        Per summary row: the ensemble-averaged beat in mV, its sampling rate and the time of its
        first sample relative to the upstroke (s). An empty array when it could not be formed.
    warnings : tuple of str
    """

    ljp_mV: float = 0.0
    settings_json: str = "{}"
    settings_schema: int = 0
    settings_hash: str = ""
    beats: BeatTable = field(default_factory=BeatTable.empty)
    decisions: DecisionLog = field(default_factory=DecisionLog)
    conditions: tuple[Condition, ...] = ()
    summary: dict[str, np.ndarray] = field(default_factory=dict)
    ensembles: list[tuple[np.ndarray, float, float]] = field(default_factory=list)
    warnings: tuple[str, ...] = ()


@dataclass
class ResultsFile:
    """The content of a results file, and what opening it found (``open_warnings``)."""

    recordings: list[StoredRecording] = field(default_factory=list)
    default_settings_json: str | None = None
    open_warnings: list[str] = field(default_factory=list)
    path: str | None = None


def provenance_now() -> dict[str, str]:
    """Versions of the software that analyses, and the time (UTC), for a new analysis."""
    import h5py  # heavy; analyze without --out never needs it
    import scipy  # only for its version, recorded in the provenance


    return {
        "upstroke_version": __version__,
        "numpy_version": np.__version__,
        "scipy_version": scipy.__version__,
        "h5py_version": h5py.__version__,
        "python_version": platform.python_version(),
        "analysed_at_utc": now_utc(),
    }


# -- writing ----------------------------------------------------------------------------------
def _str_dtype():
    import h5py  # heavy; analyze without --out never needs it

    return h5py.string_dtype("utf-8")


def _write_column(group, name: str, values: np.ndarray) -> None:
    arr = np.asarray(values)
    if arr.dtype.kind in "OUS":
        data = np.array(["" if v is None else str(v) for v in arr.tolist()], dtype=object)
        group.create_dataset(name, data=data, dtype=_str_dtype(), track_times=False)
    else:
        group.create_dataset(name, data=arr, track_times=False)


def _write_columns(group, columns: Mapping[str, np.ndarray]) -> None:
    group.attrs.create("columns", np.array(list(columns), dtype=object), dtype=_str_dtype())
    for name, values in columns.items():
        _write_column(group, name, values)


def _set_text_attr(obj, name: str, value: str) -> None:
    obj.attrs.create(name, str(value), dtype=_str_dtype())


def _write_recording(group, r: StoredRecording, results_folder: str) -> None:
    relpath = ""
    if r.sha256 and os.path.isabs(r.source_path):
        try:
            relpath = os.path.relpath(r.source_path, results_folder).replace(os.sep, "/")
        except ValueError:  # another drive on Windows
            relpath = ""
    for name, value in (
        ("source_path", r.source_path), ("source_relpath", relpath), ("sha256", r.sha256),
        ("label", r.label), ("reader", r.reader), ("channel_name", r.channel_name), ("units", r.units),
    ):
        _set_text_attr(group, name, value)
    group.attrs["channel"] = np.int64(r.channel)
    group.attrs["ljp_mV"] = np.float64(r.ljp_mV)
    group.attrs["sampling_rate_hz"] = np.float64(r.sampling_rate_hz)
    group.attrs["sweeps"] = np.array([] if r.sweeps is None else list(r.sweeps), dtype=np.int64)
    group.attrs["all_sweeps"] = np.int8(r.sweeps is None)
    settings = group.create_dataset("settings", data=r.settings_json, dtype=_str_dtype(), track_times=False)
    settings.attrs["schema_version"] = np.int64(r.settings_schema)
    _set_text_attr(settings, "hash", r.settings_hash)
    group.create_dataset("sweep_starts_s", data=np.asarray(r.sweep_starts_s, dtype=np.float64), track_times=False)
    group.create_dataset("sweep_lengths", data=np.asarray(r.sweep_lengths, dtype=np.int64), track_times=False)
    _write_columns(group.create_group("beats"), r.beats.columns())
    _write_columns(group.create_group("decisions"), r.decisions.columns())
    conds = r.conditions
    _write_columns(group.create_group("conditions"), {
        "name": np.array([c.name for c in conds], dtype=object),
        "unit": np.array([c.unit for c in conds], dtype=object),
        "start": np.array([c.start for c in conds], dtype=np.float64),
        "end": np.array([c.end for c in conds], dtype=np.float64),
        "steady_kind": np.array([c.steady.kind for c in conds], dtype=object),
        "steady_value": np.array([c.steady.value for c in conds], dtype=np.float64),
    })
    summary = group.create_group("summary")
    _write_columns(summary, r.summary)
    ens = summary.create_group("ensemble")
    for i, (v_mV, fs_hz, t0_s) in enumerate(r.ensembles):
        ds = ens.create_dataset(f"{i:06d}", data=np.asarray(v_mV, dtype=np.float64), track_times=False)
        ds.attrs["fs_hz"] = np.float64(fs_hz)
        ds.attrs["t0_s"] = np.float64(t0_s)
    group.create_dataset(
        "warnings", data=np.array(list(r.warnings), dtype=object), dtype=_str_dtype(), track_times=False,
    )
    prov = group.create_group("provenance")
    for key in sorted(r.provenance):
        _set_text_attr(prov, key, r.provenance[key])


def save_results(
    path: str | os.PathLike, results: ResultsFile | Sequence[StoredRecording], *, atomic: bool = True,
) -> None:
    """Write a results file atomically.

    Parameters
    ----------
    path : str or path
        The file to write. An existing file is replaced only once the new one is complete.
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
    try:
        with atomic_output(target) if atomic else contextlib.nullcontext(target) as tmp:
            with h5py.File(tmp, "w", libver=("earliest", "v110"), track_order=False) as f:
                _set_text_attr(f, "format", FORMAT_NAME)
                f.attrs["schema_version"] = np.int64(SCHEMA_VERSION)

                _set_text_attr(f, "upstroke_version", __version__)
                if content.default_settings_json is not None:
                    f.create_dataset("default_settings", data=content.default_settings_json, dtype=_str_dtype(), track_times=False)
                recs = f.create_group("recordings")
                for i, r in enumerate(content.recordings):
                    _write_recording(recs.create_group(f"{i:06d}"), r, folder)
                f.flush()
            carry_study(target, tmp)  # a study's layout stays with the file it describes
    except PermissionError as exc:
        raise ResultsFileError(path, f"cannot be written ({exc.strerror})", "choose a folder you can write to") from None


# -- reading ----------------------------------------------------------------------------------
#: The longest single text a results file may hold (a label, a path, the settings JSON, a
#: warning, a reason). Anything longer is damage or a crafted file: refused, never shown.
MAX_TEXT_CHARS = 1_000_000


def _text(value) -> str:
    text = value.decode("utf-8") if isinstance(value, bytes) else str(value)
    if len(text) > MAX_TEXT_CHARS:
        raise ValueError(f"a stored text of {len(text)} characters is too long (at most {MAX_TEXT_CHARS})")
    return text


def _checked(ds):
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


def _read_columns(group) -> dict[str, np.ndarray]:
    names = [_text(n) for n in group.attrs["columns"]]
    out: dict[str, np.ndarray] = {}
    for name in names:
        ds = _checked(group[name])
        if ds.dtype.kind == "O" or h5_is_string(ds):
            out[name] = np.array([_text(v) for v in np.ravel(ds.asstr()[()])], dtype=object)
        else:
            out[name] = ds[()]
        if np.ndim(out[name]) != 1 or len(out[name]) != len(next(iter(out.values()))):
            raise ValueError(f"{ds.name} is not a column as long as the others of its table")
    return out


def h5_is_string(ds) -> bool:
    import h5py  # heavy; analyze without --out never needs it

    return h5py.check_string_dtype(ds.dtype) is not None


def _read_recording(group, results_folder: str, verify: bool, warnings: list[str]) -> StoredRecording:
    a = group.attrs
    sweeps = None if int(a["all_sweeps"]) else tuple(int(s) for s in a["sweeps"])
    settings = group["settings"]
    cond_cols = _read_columns(group["conditions"])
    conditions = tuple(
        Condition(
            str(cond_cols["name"][i]), float(cond_cols["start"][i]), float(cond_cols["end"][i]),
            str(cond_cols["unit"][i]),
            SteadyState(str(cond_cols["steady_kind"][i]), float(cond_cols["steady_value"][i])),
        )
        for i in range(len(cond_cols["name"]))
    )
    decision_cols = _read_columns(group["decisions"])
    if list(decision_cols) != list(DECISION_FIELDS):
        raise KeyError("decisions")
    summary = group["summary"]
    ens = summary["ensemble"]
    ensembles = [
        (_checked(ens[name])[()], float(ens[name].attrs["fs_hz"]), float(ens[name].attrs["t0_s"]))
        for name in sorted(ens, key=int)
    ]
    rec = StoredRecording(
        source_path=_text(a["source_path"]),
        label=_text(a["label"]),
        sha256=_text(a["sha256"]),
        reader=_text(a["reader"]),
        channel=int(a["channel"]),
        channel_name=_text(a["channel_name"]),
        units=_text(a["units"]),
        ljp_mV=float(a["ljp_mV"]),
        sweeps=sweeps,
        sampling_rate_hz=float(a["sampling_rate_hz"]),
        sweep_starts_s=tuple(float(x) for x in _checked(group["sweep_starts_s"])[()]),
        sweep_lengths=tuple(int(x) for x in _checked(group["sweep_lengths"])[()]),
        settings_json=_text(_checked(settings).asstr()[()]),
        settings_schema=int(settings.attrs["schema_version"]),
        settings_hash=_text(settings.attrs["hash"]),
        beats=BeatTable(_read_columns(group["beats"])),
        decisions=DecisionLog.from_columns(decision_cols),
        conditions=conditions,
        summary=_read_columns(summary),
        ensembles=ensembles,
        warnings=tuple(_text(w) for w in np.ravel(_checked(group["warnings"]).asstr()[()])),
        provenance={k: _text(v) for k, v in group["provenance"].attrs.items()},
    )
    if verify and rec.sha256:
        _check_source(rec, _text(a["source_relpath"]), results_folder, warnings)
    return rec


def _check_source(rec: StoredRecording, relpath: str, folder: str, warnings: list[str]) -> None:
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
        digest = file_sha256(found)
    except OSError as exc:
        warnings.append(f"{rec.label}: the source recording cannot be read ({exc.strerror}); the results open")
        return
    if digest != rec.sha256:
        warnings.append(
            f"{rec.label}: the source recording ({found}) has changed since it was analysed "
            "(SHA-256 differs); the saved results may not match it"
        )


def load_results(path: str | os.PathLike, *, verify_sources: bool = True) -> ResultsFile:
    """Read a results file.

    Parameters
    ----------
    path : str or path
    verify_sources : bool
        Compare each source recording's SHA-256 with the one saved; a changed or missing source
        adds a line to ``open_warnings`` (the results still open).

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

    text = os.fspath(path)
    if not os.path.exists(text):
        raise ResultsFileError(text, "no such file", "check the path")
    if os.path.isdir(text):
        raise ResultsFileError(text, "is a folder, not a results file", "give the .h5 file itself")
    folder = os.path.dirname(os.path.abspath(text))
    warnings: list[str] = []
    try:
        f = h5py.File(text, "r")
    except OSError:
        raise ResultsFileError(
            text, "is not a readable HDF5 file (truncated, corrupt, or another format)", _OPEN_FIX,
        ) from None
    try:
        with f:
            fmt = _text(f.attrs.get("format", ""))
            if fmt != FORMAT_NAME:
                raise ResultsFileError(text, "is an HDF5 file but not an Upstroke results file", _OPEN_FIX)
            version = f.attrs.get("schema_version")
            if version is None or not np.issubdtype(np.asarray(version).dtype, np.integer):
                raise ResultsFileError(text, "has no valid results schema version", _OPEN_FIX)
            if int(version) > SCHEMA_VERSION:
                raise ResultsFileError(
                    text, f"was written by a newer Upstroke (results schema {int(version)}; "
                    f"this version reads up to {SCHEMA_VERSION})", "update Upstroke to open it",
                )
            if int(version) < 1:
                raise ResultsFileError(text, f"has an unknown results schema version {int(version)}", _OPEN_FIX)
            default = _text(_checked(f["default_settings"]).asstr()[()]) if "default_settings" in f else None
            recs_group = f["recordings"]
            recordings = [
                _read_recording(recs_group[name], folder, verify_sources, warnings)
                for name in sorted(recs_group, key=int)
            ]
    except ResultsFileError:
        raise
    except (OSError, KeyError, ValueError, TypeError, RuntimeError) as exc:
        raise ResultsFileError(
            text, f"is damaged and cannot be read ({type(exc).__name__}: {' '.join(str(exc).split())[:120]})",
            "restore it from a backup or analyse the recordings again",
        ) from None
    return ResultsFile(recordings, default, warnings, os.path.abspath(text))
