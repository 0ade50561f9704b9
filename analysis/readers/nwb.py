"""Neurodata Without Borders (NWB 2) files: current-clamp series read with pynwb.

Every ``CurrentClampSeries`` and ``IZeroClampSeries`` in the file's acquisition group is one
sweep, in the order of their ``starting_time``. Series recorded through different intracellular
electrodes become different channels, when the electrodes' series line up sweep for sweep.
Samples are scaled as the NWB standard defines, ``data * conversion + offset`` (volts for these
series), and shown in mV. Samples stay in the file: each read slices the HDF5 dataset through
h5py.
"""

from __future__ import annotations

import atexit
import os
import shutil
import sys
import tempfile
import warnings
from collections import defaultdict
from dataclasses import dataclass
from typing import Any

import numpy as np

from analysis.errors import RecordingError
from analysis.recording import CURRENT_CLAMP, MIN_SAMPLES_PER_SWEEP, Channel, Recording, clamp_mode_from_units
from analysis.readers._timebase import check_rate, rate_from_times

__all__ = ["EXTENSIONS", "SNIFF_BY_SIGNATURE", "import_pynwb", "read", "sniff"]

EXTENSIONS = (".nwb",)
SNIFF_BY_SIGNATURE = True
HDF5_SIGNATURE = b"\x89HDF\r\n\x1a\n"
#: NWB neurodata types read, all of them current clamp.
SERIES_TYPES = ("CurrentClampSeries", "IZeroClampSeries")

# Units of the scaled data -> (units shown, factor): volts are shown as mV.
_UNIT_SCALE = {"volts": ("mV", 1e3), "volt": ("mV", 1e3), "v": ("mV", 1e3), "mv": ("mV", 1.0),
               "millivolts": ("mV", 1.0)}
_CORRUPT_FIX = "the file is damaged or incomplete; export it again from the original"
#: What h5py and libhdf5 raise on damaged metadata or chunks while samples are read (a broken
#: B-tree is a KeyError or OSError, a bad filter message a ValueError or RuntimeError, a bad
#: datatype a TypeError).
_H5_READ_ERRORS = (OSError, KeyError, RuntimeError, ValueError, TypeError, IndexError, AttributeError)


def sniff(head: bytes) -> bool:
    """True when the bytes hold an HDF5 signature (NWB 2 files are HDF5) at a superblock offset."""
    return any(head[off:off + 8] == HDF5_SIGNATURE for off in (0, 512, 1024, 2048))


@dataclass(frozen=True)
class _Series:
    name: str
    kind: str
    electrode: str
    start_s: float
    sweep_number: int | None
    rate_hz: float
    n_samples: int
    filename: str
    dataset: str
    conversion: float
    offset: float
    units: str
    factor: float
    stimulus: str


def read(path: str | os.PathLike) -> Recording:
    """Open an NWB file's current-clamp series as the sweeps of one recording.

    Parameters
    ----------
    path : str or os.PathLike

    Returns
    -------
    Recording
        One channel per intracellular electrode (named after it), in mV, clamp mode current
        clamp; one sweep per series, ordered by starting time (then sweep number, then name),
        each starting at its ``starting_time``. ``format`` is ``"nwb"``.

    Raises
    ------
    RecordingError
        For a file that is not HDF5 or not NWB, a truncated or corrupt file, no current-clamp
        series, series at different rates or with uneven ``timestamps``, electrodes whose series
        do not line up, or sweeps shorter than
        :data:`analysis.recording.MIN_SAMPLES_PER_SWEEP`.
    """
    origin = os.fspath(path)
    nwb_version = _check_hdf5(origin)
    series, file_meta = _collect(origin)
    groups: dict[str, list[_Series]] = defaultdict(list)
    for s in series:
        groups[s.electrode].append(s)
    for members in groups.values():
        members.sort(key=lambda s: (s.start_s, s.sweep_number if s.sweep_number is not None else -1, s.name))
    columns = list(groups.values())
    _check_aligned(origin, groups)
    rates = sorted({round(s.rate_hz, 6) for s in series})
    if len(rates) > 1:
        raise RecordingError(
            origin, f"its current-clamp series are sampled at different rates "
            f"({', '.join(f'{r:g}' for r in rates)} Hz)",
            "export series of one sampling rate per file",
        )
    lengths = [s.n_samples for s in columns[0]]
    if max(lengths) < MIN_SAMPLES_PER_SWEEP:
        raise RecordingError(
            origin, f"only {max(lengths)} samples per sweep",
            f"an analysis needs at least {MIN_SAMPLES_PER_SWEEP}; export longer series",
        )
    channels = [
        Channel(name, members[0].units, clamp_mode_from_units(members[0].units, CURRENT_CLAMP))
        for name, members in groups.items()
    ]
    meta = dict(file_meta)
    meta["nwb_version"] = nwb_version
    meta["sweep_series"] = [s.name for s in columns[0]]
    meta["sweep_types"] = [s.kind for s in columns[0]]
    stimuli = [s.stimulus for s in columns[0]]
    if any(st and st != "N/A" for st in stimuli):
        meta["sweep_stimuli"] = stimuli
    loader = _NwbSamples(origin, columns)
    loader.probe()  # `info` refuses what `analyze` could not read
    return Recording(
        channels=channels,
        sampling_rate_hz=series[0].rate_hz,
        sweep_lengths=lengths,
        sweep_starts_s=[s.start_s for s in columns[0]],
        loader=loader,
        source_path=origin,
        format="nwb",
        metadata=meta,
    )


#: The environment pynwb reads where it keeps its cache of the NWB schema.
_CACHE_ENV = ("XDG_CACHE_HOME", "PYNWB_NO_CACHE_DIR")


def import_pynwb() -> Any:
    """pynwb, imported so that reading never depends on a writable cache folder.

    pynwb makes its cache folder (under ``$XDG_CACHE_HOME`` or ``~/.cache``) when it is first
    imported and fails with PermissionError where that folder cannot be made (a read-only home, a
    home under a world-writable folder without the sticky bit). The cache only saves a second
    of parsing the schema: on that failure pynwb is imported again with its cache in a temporary
    folder (removed at exit) and caching turned off.
    """
    try:
        import pynwb  # imported here: it takes most of a second, and ABF or text files never need it
    except OSError:
        for name in [m for m in sys.modules if m == "pynwb" or m.startswith("pynwb.")]:
            del sys.modules[name]  # the half-run import, so that it runs again whole
        saved = {key: os.environ.get(key) for key in _CACHE_ENV}
        scratch = tempfile.mkdtemp(prefix="upstroke-pynwb-cache-")
        atexit.register(shutil.rmtree, scratch, True)
        os.environ.update(XDG_CACHE_HOME=scratch, PYNWB_NO_CACHE_DIR="1")
        try:
            import pynwb  # imported here: it takes most of a second, and ABF or text files never need it
        finally:
            for key, value in saved.items():
                if value is None:
                    os.environ.pop(key, None)
                else:
                    os.environ[key] = value
    return pynwb


def _check_hdf5(origin: str) -> str:
    """The file's NWB version, after refusing files h5py cannot open or that are not NWB."""
    import h5py  # heavy; ABF and text files never need it

    try:
        with h5py.File(origin, "r") as fh:
            version = fh.attrs.get("nwb_version")
    except _H5_READ_ERRORS as exc:  # h5py's kinds of "corrupt"
        raise RecordingError(
            origin, f"the HDF5 file is truncated or corrupt (h5py: {_first_line(exc)})", _CORRUPT_FIX,
        ) from None
    if version is None:
        raise RecordingError(
            origin, "is an HDF5 file but not an NWB file (it has no nwb_version attribute)",
            "give an NWB recording; an Upstroke results file opens with `upstroke export` or the app",
        )
    return version.decode() if isinstance(version, bytes) else str(version)


def _collect(origin: str) -> tuple[list[_Series], dict[str, Any]]:
    """The file's current-clamp series and its session metadata, read with pynwb."""
    pynwb = import_pynwb()

    try:
        with warnings.catch_warnings(), pynwb.NWBHDF5IO(origin, "r", load_namespaces=True) as io:
            # pynwb warns on stderr about what it repairs while reading (units it resets, a rate of
            # 0 Hz); what matters is refused below in one line, and the rest is not the user's to fix.
            warnings.simplefilter("ignore")
            nwbfile = io.read()
            found = list(nwbfile.acquisition.values())
            series = [_describe(s, origin) for s in found if type(s).__name__ in SERIES_TYPES]
            meta = _session_metadata(nwbfile)
    except RecordingError:
        raise
    except Exception as exc:  # pynwb and hdmf raise many kinds of errors on malformed files
        raise RecordingError(
            origin, f"pynwb could not read the file ({type(exc).__name__}: {_first_line(exc)})",
            _CORRUPT_FIX,
        ) from None
    if not series:
        kinds = sorted({type(s).__name__ for s in found})
        holds = f"its acquisition holds {', '.join(kinds)}" if kinds else "its acquisition is empty"
        raise RecordingError(
            origin, f"the recording has no channels Upstroke reads: no CurrentClampSeries or "
            f"IZeroClampSeries ({holds})",
            "store the membrane potential as a CurrentClampSeries in the file's acquisition",
        )
    return series, meta


def _describe(s: Any, origin: str) -> _Series:
    data = s.data
    _check_stored(data, origin, f"series {s.name!r}")
    shape = tuple(getattr(data, "shape", ()))
    if len(shape) == 2 and shape[1] == 1:
        shape = shape[:1]
    if len(shape) != 1:
        raise RecordingError(
            origin, f"series {s.name!r} holds data of shape {shape}, not one sample per time",
            "store one channel per series",
        )
    n = int(shape[0])
    if s.rate is not None:
        rate = float(s.rate)
        start = float(s.starting_time or 0.0)
    else:
        n_times = int(np.shape(s.timestamps)[0]) if np.ndim(s.timestamps) else 0
        if n_times != n:
            raise RecordingError(
                origin, f"series {s.name!r} has {n_times} timestamps for {n} samples", _CORRUPT_FIX,
            )
        _check_stored(s.timestamps, origin, f"the timestamps of series {s.name!r}")
        times = np.asarray(s.timestamps[:], dtype=np.float64)
        rate = rate_from_times(times, origin, what=f"the timestamps of series {s.name!r}")
        start = float(times[0])
    if not (np.isfinite(rate) and rate > 0):
        raise RecordingError(origin, f"series {s.name!r} has a sampling rate of {rate!r} Hz", _CORRUPT_FIX)
    check_rate(rate, origin, what=f"the sampling rate of series {s.name!r}", fix=_CORRUPT_FIX)
    shown, factor = _UNIT_SCALE.get(str(s.unit).strip().lower(), (str(s.unit), 1.0))
    electrode = getattr(s, "electrode", None)
    return _Series(
        name=str(s.name), kind=type(s).__name__,
        electrode=str(electrode.name) if electrode is not None else "electrode",
        start_s=start, sweep_number=None if s.sweep_number is None else int(s.sweep_number),
        rate_hz=rate, n_samples=n, filename=str(data.file.filename), dataset=str(data.name),
        conversion=float(s.conversion), offset=float(getattr(s, "offset", 0.0) or 0.0),
        units=shown, factor=factor, stimulus=str(getattr(s, "stimulus_description", "") or ""),
    )


def _check_aligned(origin: str, groups: dict[str, list[_Series]]) -> None:
    """Refuse electrodes whose series cannot be read as the same sweeps."""
    counts = {name: [s.n_samples for s in members] for name, members in groups.items()}
    if len({tuple(c) for c in counts.values()}) > 1:
        listed = ", ".join(f"{name}: {len(c)} series" for name, c in counts.items())
        raise RecordingError(
            origin, f"the electrodes' current-clamp series do not line up as sweeps ({listed})",
            "export each electrode's series to its own file",
        )


#: The most that deflate (gzip, HDF5's usual filter) can compress: about 1032 to 1 (RFC 1951, a
#: 258-byte match per code of at least 2 bits); any filter claiming more is hiding a missing block.
_MAX_COMPRESSION = 1100


def _check_stored(ds: Any, origin: str, what: str) -> None:
    """Refuse a dataset that is not numbers, or that declares more samples than the file stores.

    Checked before anything is read: an HDF5 dataset's shape is only a declaration (a dataset
    of 10^12 samples with no chunk written takes a few bytes), and reading it whole would
    allocate what the declaration says.
    """
    import h5py  # heavy; ABF and text files never need it

    if not isinstance(ds, h5py.Dataset):
        raise RecordingError(origin, f"{what} stores no samples in the file", _CORRUPT_FIX)
    if ds.dtype.kind not in "iuf":
        raise RecordingError(
            origin, f"{what} holds values of type {ds.dtype}, not numbers",
            "store the samples as integers or floating-point numbers",
        )
    declared = ds.size * ds.dtype.itemsize
    if declared == 0 or ds.external or ds.is_virtual:
        return  # samples kept in other files are checked by HDF5 as they are read
    stored = ds.id.get_storage_size()
    filtered = ds.id.get_create_plist().get_nfilters() > 0
    if stored * (_MAX_COMPRESSION if filtered else 1) < declared:
        raise RecordingError(
            origin, f"{what} declares {ds.size} samples but the file stores only {stored} bytes of them",
            "the file is incomplete (its writer stopped early); export it again from the original",
        )


class _NwbSamples:
    """The loader of an NWB recording: slices of the HDF5 datasets, scaled to the shown units."""

    def __init__(self, origin: str, columns: list[list[_Series]]) -> None:
        self._origin = origin
        self._columns = columns
        self._files: dict[str, Any] = {}

    def probe(self) -> None:
        """Read the first and last sample of every series: a dataset whose metadata is damaged
        is refused when the file is opened, not halfway through an analysis."""
        for channel, members in enumerate(self._columns):
            for sweep, s in enumerate(members):
                self(sweep, channel, 0, 1)
                if s.n_samples > 1:
                    self(sweep, channel, s.n_samples - 1, s.n_samples)

    def __call__(self, sweep: int, channel: int, start: int, stop: int) -> np.ndarray:
        import h5py  # heavy; ABF and text files never need it

        s = self._columns[channel][sweep]
        try:
            fh = self._files.get(s.filename)
            if fh is None:
                fh = self._files[s.filename] = h5py.File(s.filename, "r")
            raw = fh[s.dataset][start:stop]
            values = np.asarray(raw, dtype=np.float64).reshape(-1)
        except _H5_READ_ERRORS as exc:  # damage that only reading the samples meets
            raise RecordingError(
                self._origin, f"the samples of series {s.name!r} (sweep {sweep}) cannot be read "
                f"(h5py: {type(exc).__name__}: {_first_line(exc)})", _CORRUPT_FIX,
            ) from None
        if values.shape != (stop - start,):
            raise RecordingError(
                self._origin, f"series {s.name!r} (sweep {sweep}) gave {values.size} samples where "
                f"{stop - start} were asked", _CORRUPT_FIX,
            )
        values *= s.conversion
        values += s.offset
        values *= s.factor
        bad = ~np.isfinite(values)
        if bad.any():
            raise RecordingError(
                self._origin, f"{int(bad.sum())} NaN or Inf sample(s) in series {s.name!r} "
                f"(sweep {sweep}), first at sample {start + int(np.argmax(bad))}",
                "remove or interpolate them before analysis",
            )
        return values


def _session_metadata(nwbfile: Any) -> dict[str, Any]:
    meta: dict[str, Any] = {}
    for key in ("identifier", "session_description"):
        value = getattr(nwbfile, key, None)
        if value:
            meta[key] = str(value)
    start = getattr(nwbfile, "session_start_time", None)
    if start is not None:
        meta["recorded_at"] = start.isoformat()
    return meta


def _first_line(exc: BaseException, limit: int = 160) -> str:
    text = str(exc).strip().splitlines()
    line = text[0] if text else type(exc).__name__
    # hdmf's construct errors quote the whole object tree, then ("Could not construct X due to:
    # REASON"); keep the reason, without the closing quote and brackets of that tuple.
    head, _, reason = line.rpartition(" due to: ")
    if head and "Could not construct" in head:
        quote = head[head.rfind("Could not construct") - 1]
        reason = reason.rstrip(")")
        reason = reason[:-1] if quote in "'\"" and reason.endswith(quote) else reason
    else:
        reason = line
    return reason if len(reason) <= limit else reason[: limit - 3] + "..."
