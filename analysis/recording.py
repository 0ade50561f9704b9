"""The immutable in-memory description of one recording.

A :class:`Recording` knows its channels (name, units, clamp mode), its sweeps (gap-free files have
one sweep, episodic files many, each with its start time), the sampling rate, where it came from
and the SHA-256 of that source. Samples are read on demand through a loader, so opening an hour
of 50 kHz data costs a header parse, not a conversion of every sample to float.
"""

from __future__ import annotations

import hashlib
import os
from dataclasses import dataclass
from types import MappingProxyType
from typing import Any, Callable, Mapping, Sequence

import numpy as np

from analysis.errors import RecordingError

__all__ = [
    "Channel",
    "Recording",
    "RECORDING_ID_DIGITS",
    "clamp_mode_from_units",
    "recording_id",
    "CURRENT_CLAMP",
    "VOLTAGE_CLAMP",
    "UNKNOWN_CLAMP",
    "MIN_SAMPLES_PER_SWEEP",
    "RECORDING_ID_DIGITS",
    "recording_id",
]

CURRENT_CLAMP = "current clamp"
VOLTAGE_CLAMP = "voltage clamp"
UNKNOWN_CLAMP = "unknown"

#: The shortest sweep an analysis can use: 100 samples is 10 ms at 10 kHz, too short for any beat,
#: but long enough that the readers and `upstroke info` can still describe the file.
MIN_SAMPLES_PER_SWEEP = 100

_VOLTAGE_UNITS = {"mv": "mV", "v": "V", "uv": "uV", "µv": "uV"}
_CURRENT_UNITS = {"pa": "pA", "na": "nA", "ua": "uA", "a": "A", "fa": "fA", "pa/pf": "pA/pF", "a/f": "A/F"}

# Loader signature: (sweep, channel, start, stop) -> samples in the channel's units.
Loader = Callable[[int, int, int, int], np.ndarray]


def clamp_mode_from_units(units: str, hint: str | None = None) -> str:
    """The clamp mode a channel was most likely recorded in.

    Parameters
    ----------
    units : str
        The channel's units as the file states them.
    hint : str or None
        A clamp mode stated by the file's own metadata (for example an NWB series type); it wins
        over the units when given.

    Returns
    -------
    str
        ``"current clamp"`` for a membrane potential (mV, V), ``"voltage clamp"`` for a membrane
        current (pA, nA, ...), otherwise ``"unknown"``.
    """
    if hint in (CURRENT_CLAMP, VOLTAGE_CLAMP):
        return hint
    key = units.strip().lower()
    if key in _VOLTAGE_UNITS:
        return CURRENT_CLAMP
    if key in _CURRENT_UNITS:
        return VOLTAGE_CLAMP
    return UNKNOWN_CLAMP


@dataclass(frozen=True)
class Channel:
    """One recorded signal.

    Attributes
    ----------
    name : str
        The channel's name as the file gives it (or ``"ch0"``, ``"ch1"`` ... when it gives none).
    units : str
        The units that :meth:`Recording.sweep` returns for this channel.
    clamp_mode : str
        ``"current clamp"``, ``"voltage clamp"`` or ``"unknown"``.
    """

    name: str
    units: str
    clamp_mode: str


class Recording:
    """An immutable recording: channels, sweeps, sampling rate, source and metadata.

    Build one with a reader (:func:`analysis.open_recording`) or with :meth:`from_array`.

    Parameters
    ----------
    channels : sequence of Channel
    sampling_rate_hz : float
    sweep_lengths : sequence of int
        Samples in each sweep (the same for every channel).
    sweep_starts_s : sequence of float
        Start time of each sweep from the start of the recording, in seconds.
    loader : callable
        ``loader(sweep, channel, start, stop)`` returns that slice of a sweep as floats in the
        channel's units.
    source_path : str or None
        The file the recording was read from; None for data made in memory.
    format : str
        The reader's name (``"abf"``, ``"nwb"``, ``"text"``, ``"array"``).
    metadata : mapping
        Anything else the reader found worth keeping (JSON-compatible values).
    """

    __slots__ = (
        "_channels",
        "_rate",
        "_lengths",
        "_starts",
        "_loader",
        "_source",
        "_format",
        "_metadata",
        "_sha256",
    )

    def __init__(
        self,
        *,
        channels: Sequence[Channel],
        sampling_rate_hz: float,
        sweep_lengths: Sequence[int],
        sweep_starts_s: Sequence[float],
        loader: Loader,
        source_path: str | os.PathLike | None = None,
        format: str = "array",
        metadata: Mapping[str, Any] | None = None,
    ) -> None:
        if len(sweep_lengths) != len(sweep_starts_s):
            raise ValueError("sweep_lengths and sweep_starts_s differ in length")
        self._channels = tuple(channels)
        self._rate = float(sampling_rate_hz)
        self._lengths = tuple(int(n) for n in sweep_lengths)
        self._starts = tuple(float(t) for t in sweep_starts_s)
        self._loader = loader
        self._source = None if source_path is None else os.fspath(source_path)
        self._format = format
        self._metadata = MappingProxyType(dict(metadata or {}))
        self._sha256: str | None = None
        origin = self._source or "the data given"
        if not self._channels:
            raise RecordingError(origin, "the recording has no channels", "record or export at least one channel")
        if not self._lengths:
            raise RecordingError(origin, "the recording has no sweeps", "record or export at least one sweep")
        if not (np.isfinite(self._rate) and self._rate > 0):
            raise RecordingError(
                origin, f"the sampling rate ({sampling_rate_hz!r} Hz) is not a positive number",
                "check the file's header or give the rate explicitly",
            )

    # -- construction -----------------------------------------------------------------------
    @classmethod
    def from_array(
        cls,
        data: Any,
        sampling_rate_hz: float,
        *,
        units: str | Sequence[str] = "mV",
        channel_names: Sequence[str] | None = None,
        sweep_starts_s: Sequence[float] | None = None,
        source_path: str | os.PathLike | None = None,
        metadata: Mapping[str, Any] | None = None,
        format: str = "array",
    ) -> "Recording":
        """A recording of samples already in memory.

        Parameters
        ----------
        data : array_like
            Shape ``(n_samples,)`` for one sweep of one channel, ``(n_sweeps, n_samples)`` for one
            channel, or ``(n_channels, n_sweeps, n_samples)``. The values are copied.
        sampling_rate_hz : float
        units : str or sequence of str
            Units of each channel (one string for all).
        channel_names : sequence of str or None
            None names them ``ch0``, ``ch1`` ...
        sweep_starts_s : sequence of float or None
            None places sweeps back to back.

        Examples
        --------
        >>> import numpy as np
        >>> rec = Recording.from_array(np.zeros(1000), 10_000.0)
        >>> rec.n_sweeps, rec.units(0), rec.channels[0].clamp_mode
        (1, 'mV', 'current clamp')
        """
        origin = os.fspath(source_path) if source_path is not None else "the data given"
        try:
            arr = np.array(data, dtype=np.float64, copy=True)
        except (TypeError, ValueError) as exc:
            raise RecordingError(origin, f"the samples are not numbers ({exc})", "pass numeric samples") from None
        if arr.ndim == 1:
            arr = arr[np.newaxis, np.newaxis, :]
        elif arr.ndim == 2:
            arr = arr[np.newaxis, :, :]
        elif arr.ndim != 3:
            raise RecordingError(origin, f"samples of {arr.ndim} dimensions", "give 1, 2 or 3 dimensions")
        n_ch, n_sw, n_s = arr.shape
        check_finite(arr, origin)
        if n_s < MIN_SAMPLES_PER_SWEEP:
            raise RecordingError(
                origin, f"only {n_s} samples per sweep",
                f"an analysis needs at least {MIN_SAMPLES_PER_SWEEP}",
            )
        unit_list = [units] * n_ch if isinstance(units, str) else list(units)
        names = list(channel_names) if channel_names is not None else [f"ch{i}" for i in range(n_ch)]
        if len(unit_list) != n_ch or len(names) != n_ch:
            raise ValueError("units and channel_names must have one entry per channel")
        channels = [Channel(n, u, clamp_mode_from_units(u)) for n, u in zip(names, unit_list)]
        starts = (
            list(sweep_starts_s) if sweep_starts_s is not None
            else [i * n_s / float(sampling_rate_hz) for i in range(n_sw)]
        )
        arr.setflags(write=False)

        def loader(sweep: int, channel: int, start: int, stop: int) -> np.ndarray:
            return arr[channel, sweep, start:stop].copy()

        return cls(
            channels=channels, sampling_rate_hz=sampling_rate_hz, sweep_lengths=[n_s] * n_sw,
            sweep_starts_s=starts, loader=loader, source_path=source_path, format=format,
            metadata=metadata,
        )

    def with_units(self, channel: int | str, units: str) -> "Recording":
        """The same recording with one channel's units declared anew (samples unchanged).

        For files whose header mislabels a channel, for example a membrane potential stored as
        pA. The clamp mode follows the new units.
        """
        index = self.channel_index(channel)
        channels = list(self._channels)
        old = channels[index]
        channels[index] = Channel(old.name, units, clamp_mode_from_units(units))
        meta = dict(self._metadata)
        meta.setdefault("units_overridden", {})
        meta["units_overridden"] = {**meta["units_overridden"], old.name: f"{old.units} -> {units}"}
        new = Recording(
            channels=channels, sampling_rate_hz=self._rate, sweep_lengths=self._lengths,
            sweep_starts_s=self._starts, loader=self._loader, source_path=self._source,
            format=self._format, metadata=meta,
        )
        new._sha256 = self._sha256
        return new

    # -- description ------------------------------------------------------------------------
    @property
    def channels(self) -> tuple[Channel, ...]:
        return self._channels

    @property
    def n_channels(self) -> int:
        return len(self._channels)

    @property
    def n_sweeps(self) -> int:
        return len(self._lengths)

    @property
    def sampling_rate_hz(self) -> float:
        return self._rate

    @property
    def sweep_lengths(self) -> tuple[int, ...]:
        return self._lengths

    @property
    def sweep_starts_s(self) -> tuple[float, ...]:
        return self._starts

    @property
    def source_path(self) -> str | None:
        return self._source

    @property
    def format(self) -> str:
        return self._format

    @property
    def metadata(self) -> Mapping[str, Any]:
        return self._metadata

    @property
    def duration_s(self) -> float:
        """Total recorded time (the sum of the sweeps' durations), in seconds."""
        return sum(self._lengths) / self._rate

    @property
    def is_gap_free(self) -> bool:
        return self.n_sweeps == 1

    @property
    def recording_id(self) -> str:
        """The recording's stable identifier (:func:`recording_id`); "" for in-memory data.

        "" too when the source file cannot be read any more (the samples may be in memory).
        """
        try:
            return recording_id(self.sha256)
        except OSError:
            return ""

    @property
    def sha256(self) -> str | None:
        """SHA-256 of the source file (hex), computed on first use; None for in-memory data."""
        if self._sha256 is None and self._source is not None:
            self._sha256 = file_sha256(self._source)
        return self._sha256

    def units(self, channel: int | str = 0) -> str:
        return self._channels[self.channel_index(channel)].units

    def channel_index(self, channel: int | str) -> int:
        """The index of a channel given by index or by name (case-insensitive).

        Raises
        ------
        RecordingError
            When no channel has that index or name.
        """
        if isinstance(channel, (int, np.integer)) and not isinstance(channel, bool):
            if 0 <= int(channel) < len(self._channels):
                return int(channel)
        else:
            text = str(channel).strip()
            for i, ch in enumerate(self._channels):
                if ch.name.lower() == text.lower():
                    return i
            if text.isdigit() and int(text) < len(self._channels):
                return int(text)
        names = ", ".join(f"{i}={c.name}" for i, c in enumerate(self._channels))
        raise RecordingError(
            self._source, f"no channel {channel!r}", f"choose one of: {names}",
        )

    def current_clamp_channels(self) -> list[int]:
        """Indices of the channels holding a membrane potential (mV or V)."""
        return [i for i, c in enumerate(self._channels) if c.clamp_mode == CURRENT_CLAMP]

    # -- samples ----------------------------------------------------------------------------
    def n_samples(self, sweep: int) -> int:
        return self._lengths[self._check_sweep(sweep)]

    def sweep(self, index: int, channel: int | str = 0, start: int = 0, stop: int | None = None) -> np.ndarray:
        """Samples of one sweep as float64 in the channel's units.

        Parameters
        ----------
        index : int
            Sweep number, from 0.
        channel : int or str
            Channel index or name.
        start, stop : int
            A slice of the sweep, in samples (default: all of it); for working long sweeps in
            chunks without reading the whole sweep.
        """
        i = self._check_sweep(index)
        c = self.channel_index(channel)
        n = self._lengths[i]
        stop = n if stop is None else min(int(stop), n)
        start = max(0, int(start))
        if stop <= start:
            return np.empty(0, dtype=np.float64)
        return np.asarray(self._loader(i, c, start, stop), dtype=np.float64)

    def time(self, index: int, start: int = 0, stop: int | None = None) -> np.ndarray:
        """Sample times of a sweep (or a slice of it) from the start of that sweep, in seconds."""
        n = self.n_samples(index)
        stop = n if stop is None else min(int(stop), n)
        return np.arange(max(0, int(start)), stop, dtype=np.float64) / self._rate

    def _check_sweep(self, index: int) -> int:
        if not (0 <= int(index) < len(self._lengths)):
            raise RecordingError(
                self._source, f"no sweep {index}",
                f"sweeps are numbered 0 to {len(self._lengths) - 1}",
            )
        return int(index)

    def __repr__(self) -> str:
        chans = ", ".join(f"{c.name} [{c.units}]" for c in self._channels)
        return (
            f"Recording({self._format}, {self.n_sweeps} sweep(s), {self._rate:g} Hz, "
            f"{self.duration_s:.3f} s, channels: {chans}, source={self._source!r})"
        )


#: Hex digits of the SHA-256 that make a recording's identifier.
RECORDING_ID_DIGITS = 16


def recording_id(sha256: str | None) -> str:
    """A recording's stable identifier: the first 16 hex digits of its file's SHA-256.

    The same whichever front end wrote it and wherever the file lies (the beats CSV's
    ``recording_id`` column); "" when there is no file (in-memory data).

    Examples
    --------
    >>> recording_id("9f86d081884c7d659a2feaa0c55ad015a3bf4f1b2b0b822cd15d6c15b0f00a08")
    '9f86d081884c7d65'
    >>> recording_id(None)
    ''
    """
    return (sha256 or "")[:RECORDING_ID_DIGITS].lower()


def file_sha256(path: str | os.PathLike, chunk_bytes: int = 1 << 20) -> str:
    """SHA-256 of a file, read in chunks of ``chunk_bytes``."""
    digest = hashlib.sha256()
    with open(path, "rb") as fh:
        while block := fh.read(chunk_bytes):
            digest.update(block)
    return digest.hexdigest()


#: Hex digits of the SHA-256 that make a recording's identifier.
RECORDING_ID_DIGITS = 16


def recording_id(sha256_hex: str | None) -> str:
    """The stable identifier of a recording: the first 16 hex digits of its file's SHA-256.

    The same file gives the same identifier from the command line, a batch and the app, wherever
    the file lies; the results file's index and the tables carry it. In-memory data (no file,
    no SHA-256) has none: "".

    Examples
    --------
    >>> recording_id("9f86d081884c7d659a2feaa0c55ad015a3bf4f1b2b0b822cd15d6c15b0f00a08")
    '9f86d081884c7d65'
    """
    return (sha256_hex or "")[:RECORDING_ID_DIGITS].lower()


def check_finite(samples: np.ndarray, origin: str | None, where: str = "") -> None:
    """Raise :class:`RecordingError` when samples hold NaN or Inf, saying how many and where.

    Parameters
    ----------
    samples : ndarray
        Any shape; the position reported is the flat index of the first bad sample in the last
        axis, i.e. a sample number within its sweep.
    origin : str or None
        The file, for the message.
    where : str
        Extra context for the message (for example ``"sweep 3, channel Vm"``).
    """
    bad = ~np.isfinite(samples)
    n_bad = int(np.count_nonzero(bad))
    if n_bad:
        first = np.unravel_index(int(np.argmax(bad)), samples.shape)
        pos = f"first at sample {int(first[-1])}"
        if samples.ndim == 3:
            pos += f" of sweep {int(first[1])}, channel {int(first[0])}"
        elif samples.ndim == 2:
            pos += f" of column {int(first[0])}"
        context = f" in {where}" if where else ""
        raise RecordingError(
            origin, f"{n_bad} NaN or Inf sample(s){context}, {pos}",
            "remove or interpolate them before analysis",
        )
