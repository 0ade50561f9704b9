"""ABF (Axon Binary Format) versions 1 and 2: pyabf for the header, a memory map for the samples.

pyabf parses the header (channels, units, sweeps, scaling). Its own data path converts every
sample of the file to float32 at open; here the data block is instead mapped with
:class:`numpy.memmap` and each read converts only the samples asked for, with pyabf's
per-channel scale factor and offset. Opening a 30-minute 20 kHz gap-free file therefore costs a
header parse, and reading ten seconds of it costs ten seconds of samples.

Sweeps follow pyabf, including for the ABF 1 files (for example those saved by pyabf's own ABF 1
writer, version 1.3) that declare several episodes without a per-episode table: pyabf splits
their data into that many equal sweeps, whereas neo's AxonIO reads them as one gap-free
segment. Upstroke takes pyabf's split, which is what the header's episode count says.
"""

from __future__ import annotations

import datetime as _dt
import os
from dataclasses import dataclass
from typing import Any

import numpy as np

from analysis.errors import RecordingError
from analysis.recording import Channel, MIN_SAMPLES_PER_SWEEP, Recording, clamp_mode_from_units
from analysis.readers._abf_header import ABF1_SIGNATURE, ABF2_SIGNATURE, check_layout

__all__ = ["EXTENSIONS", "SNIFF_BY_SIGNATURE", "read", "sniff"]

EXTENSIONS = (".abf",)
SNIFF_BY_SIGNATURE = True
#: Bytes of the file read for the header checks (the ABF 1 header and the ABF 2 protocol block).
HEAD_BYTES = 8192

# Operation modes as the ABF header numbers them.
_MODES = {
    1: "event-driven, variable length",
    2: "event-driven, fixed length",
    3: "gap-free",
    4: "high-speed oscilloscope",
    5: "episodic",
}
# Recording dates outside these bounds are header garbage, not dates (ABF appeared in the 1990s).
_EARLIEST_DATE = _dt.datetime(1990, 1, 1)


def sniff(head: bytes) -> bool:
    """True when the bytes start with an ABF 1 or ABF 2 signature."""
    return head[:4] in (ABF1_SIGNATURE, ABF2_SIGNATURE)


def read(path: str | os.PathLike) -> Recording:
    """Open an ABF file; samples are read on demand.

    Parameters
    ----------
    path : str or os.PathLike

    Returns
    -------
    Recording
        Channels named and in the units the header gives, clamp mode from the units; one sweep
        for a gap-free file, otherwise pyabf's sweeps with their start times (pyabf's
        ``sweepTimesSec``, or for variable-length event-driven sweeps the synch-array start
        times, as pyabf's ``setSweep(absoluteTime=True)`` uses them). ``format`` is ``"abf"``.

    Raises
    ------
    RecordingError
        For a file cut short, a header sizing more data than the file holds (checked before
        anything is allocated), no channels, a header pyabf cannot parse, or sweeps shorter than
        :data:`analysis.recording.MIN_SAMPLES_PER_SWEEP`.

    Notes
    -----
    The sampling rate is the header's exact one, ``1e6 / interval_us``; pyabf rounds it down to
    an integer number of hertz (403 Hz for a 2480 us interval, really 403.226 Hz).
    """
    origin = os.fspath(path)
    size = os.path.getsize(origin)
    with open(origin, "rb") as fh:
        head = fh.read(HEAD_BYTES)
    check_layout(head, size, origin)
    abf = _parse_header(origin)
    layout = _Layout.from_abf(abf, origin)
    samples = _AbfSamples(origin, layout)
    names = _unique([_clean(n) or f"ch{i}" for i, n in enumerate(abf.adcNames)])
    channels = [
        Channel(name, _clean(units) or "?", clamp_mode_from_units(_clean(units)))
        for name, units in zip(names, abf.adcUnits)
    ]
    return Recording(
        channels=channels,
        sampling_rate_hz=layout.rate_hz,
        sweep_lengths=layout.lengths,
        sweep_starts_s=layout.starts_s,
        loader=samples,
        source_path=origin,
        format="abf",
        metadata=_metadata(abf, layout),
    )


def _parse_header(origin: str) -> Any:
    import pyabf  # imported here: opening a text or NWB file should not pay for it

    try:
        return pyabf.ABF(origin, loadData=False, cacheStimulusFiles=False)
    except Exception as exc:  # pyabf raises bare exceptions of many kinds on damaged headers
        raise RecordingError(
            origin, f"the ABF header could not be parsed (pyabf: {type(exc).__name__}: {exc})",
            "the file is damaged or was written by an unsupported program; open the original",
        ) from None


@dataclass(frozen=True)
class _Layout:
    """Where each sweep's samples sit in the data block, and how to scale them."""

    n_channels: int
    n_frames: int  # samples per channel in the data block
    dtype: np.dtype
    byte_offset: int
    rate_hz: float
    lengths: list[int]
    frame_starts: np.ndarray  # first frame of each sweep
    starts_s: list[float]
    variable: bool
    gains: list[float]
    offsets: list[float]
    major: int
    mode: int

    @classmethod
    def from_abf(cls, abf: Any, origin: str) -> "_Layout":
        n_channels = int(abf.channelCount)
        n_frames = int(abf.dataPointCount) // n_channels
        dtype = np.dtype(abf._dtype).newbyteorder("<")
        major = int(abf.abfVersion["major"])
        if major == 1:
            interval_us = float(abf._headerV1.fADCSampleInterval) * n_channels
        else:
            interval_us = float(abf._protocolSection.fADCSequenceInterval)
        rate_hz = 1e6 / interval_us
        synch = getattr(abf, "_synchArraySection", None)
        variable = (
            abf.sweepCount > 1 and synch is not None and len(set(synch.lLength)) > 1
        )
        if variable:
            # pyabf's setSweep: lengths in multiplexed samples, starts in synch time units.
            lengths = [int(n) // n_channels for n in synch.lLength]
            if min(lengths) < 0:
                raise RecordingError(
                    origin, "the ABF header is corrupt: its synch array gives sweep "
                    f"{int(np.argmin(lengths))} a negative length ({min(lengths)} samples)",
                    "the file is damaged; open the original recording",
                )
            frame_starts = np.concatenate([[0], np.cumsum(lengths)[:-1]]).astype(np.int64)
            unit_us = float(abf._protocolSection.fSynchTimeUnit)
            starts_s = [
                float(s) * unit_us * 1e-6 if unit_us else float(s) / rate_hz for s in synch.lStart
            ]
        else:
            lengths = [int(abf.sweepPointCount)] * int(abf.sweepCount)
            frame_starts = np.arange(int(abf.sweepCount), dtype=np.int64) * int(abf.sweepPointCount)
            starts_s = [float(t) for t in abf.sweepTimesSec]
        if sum(lengths) > n_frames:
            raise RecordingError(
                origin, f"the ABF header's sweeps hold {sum(lengths)} samples per channel but its "
                f"data block only {n_frames}",
                "the file is damaged; open the original recording",
            )
        if max(lengths) < MIN_SAMPLES_PER_SWEEP:
            raise RecordingError(
                origin, f"only {max(lengths)} samples per sweep",
                f"an analysis needs at least {MIN_SAMPLES_PER_SWEEP}; record longer sweeps",
            )
        is_int = dtype.kind == "i"
        for i, (g, o) in enumerate(zip(abf._dataGain, abf._dataOffset)):
            if is_int and not (np.isfinite(g) and g != 0 and np.isfinite(o)):
                # A zero or garbage range or gain in the header: every sample would be NaN or Inf.
                raise RecordingError(
                    origin, f"the ABF header is corrupt: channel {i}'s scaling (gain {float(g):g}, "
                    f"offset {float(o):g}) turns every sample into NaN, Inf or 0",
                    "the file is damaged; open the original recording",
                )
        return cls(
            n_channels=n_channels, n_frames=n_frames, dtype=dtype,
            byte_offset=int(abf.dataByteStart), rate_hz=rate_hz, lengths=lengths,
            frame_starts=frame_starts, starts_s=starts_s, variable=variable,
            # pyabf's own per-channel scaling (it has no public name for it); float data unscaled.
            gains=[float(g) if is_int else 1.0 for g in abf._dataGain],
            offsets=[float(o) if is_int else 0.0 for o in abf._dataOffset],
            major=major, mode=int(abf.nOperationMode),
        )


class _AbfSamples:
    """The loader of an ABF recording: a lazily opened memory map of the data block."""

    def __init__(self, origin: str, layout: _Layout) -> None:
        self._origin = origin
        self._layout = layout
        self._map: np.memmap | None = None

    def __call__(self, sweep: int, channel: int, start: int, stop: int) -> np.ndarray:
        lay = self._layout
        if self._map is None:
            # Opened on first read so that describing a file never maps it.
            self._map = np.memmap(
                self._origin, dtype=lay.dtype, mode="r", offset=lay.byte_offset,
                shape=(lay.n_frames, lay.n_channels),
            )
        first = int(lay.frame_starts[sweep])
        raw = self._map[first + start:first + stop, channel]
        if lay.dtype.kind == "i":
            # Converted and scaled in one pass (the integers are exact in float64, so the
            # products are those of converting first); a zero offset adds nothing (but the
            # +0.0 that adding it makes of a -0.0 where the gain is negative).
            out = np.multiply(raw, lay.gains[channel], dtype=np.float64)
            if lay.offsets[channel] != 0.0 or lay.gains[channel] < 0:
                out += lay.offsets[channel]
        else:
            out = raw.astype(np.float64)
            _check_finite_slice(out, self._origin, sweep, channel, start)
        return out


def _check_finite_slice(values: np.ndarray, origin: str, sweep: int, channel: int, start: int) -> None:
    bad = ~np.isfinite(values)
    if bad.any():
        raise RecordingError(
            origin, f"{int(bad.sum())} NaN or Inf sample(s) in sweep {sweep}, channel {channel}, "
            f"first at sample {start + int(np.argmax(bad))}",
            "the recording is damaged there; exclude that sweep or repair the file",
        )


def _metadata(abf: Any, layout: _Layout) -> dict[str, Any]:
    meta: dict[str, Any] = {
        "abf_version": str(abf.abfVersionString),
        "operation_mode": _MODES.get(layout.mode, f"unknown ({layout.mode})"),
        "sample_format": "int16" if layout.dtype.kind == "i" else "float32",
        "reader": "pyabf header, memory-mapped samples",
    }
    if layout.variable:
        meta["variable_length_sweeps"] = True
    adc = _adc_range(abf, layout)
    if adc is not None:
        meta["adc_range"] = adc
    protocol = str(getattr(abf, "protocol", "") or "")
    if protocol and protocol != "None":
        meta["protocol"] = protocol
    creator = " ".join(str(getattr(abf, "creator", "")).split())
    if creator:
        meta["creator"] = creator
    comment = " ".join(str(getattr(abf, "abfFileComment", "") or "").split())
    if comment and _comment_is_in_header(abf):
        meta["comment"] = comment
    tags = [
        {"time_s": round(float(t), 6), "comment": " ".join(str(c).split())}
        for t, c in zip(abf.tagTimesSec or [], abf.tagComments or [])
    ]
    if tags:
        meta["tags"] = tags
    date = _recording_date(abf, layout)
    if date is not None:
        meta["recorded_at"] = date
    return meta


def _adc_range(abf: Any, layout: _Layout) -> list[list[float]] | None:
    """Per channel, the lowest and highest value the converter can give, in the channel's units.

    The converter's codes run from -lADCResolution to lADCResolution - 1; each is scaled as the
    samples are (gain and offset). None for float data or a header without a resolution.
    """
    if layout.dtype.kind != "i":
        return None
    header = abf._headerV1 if layout.major == 1 else getattr(abf, "_protocolSection", None)
    res = int(getattr(header, "lADCResolution", 0) or 0)
    if res <= 0:
        return None
    out = []
    for g, o in zip(layout.gains, layout.offsets):
        lo, hi = float(np.float64(-res) * g + o), float(np.float64(res - 1) * g + o)
        out.append([min(lo, hi), max(lo, hi)])
    return out


def _recording_date(abf: Any, layout: _Layout) -> str | None:
    """The header's recording date and time (ISO 8601), or None when it holds none or garbage."""
    if layout.major == 1 and int(getattr(abf._headerV1, "lFileStartDate", 0)) == 0:
        return None  # pyabf then reports the file system's date, which is not the recording's
    when = getattr(abf, "abfDateTime", None)
    if not isinstance(when, _dt.datetime):
        return None
    if not (_EARLIEST_DATE <= when <= _dt.datetime.now() + _dt.timedelta(days=1)):
        return None
    return when.isoformat(timespec="milliseconds")


def _clean(text: object) -> str:
    """A header string without NUL padding (pyabf keeps it where a writer left names blank)."""
    return str(text).replace("\x00", " ").strip()


def _unique(names: list[str]) -> list[str]:
    """Channel names made unique (``IN 0``, ``IN 0 (2)``) so that a name picks one channel."""
    seen: dict[str, int] = {}
    out = []
    for name in names:
        key = name.lower()
        seen[key] = seen.get(key, 0) + 1
        out.append(name if seen[key] == 1 else f"{name} ({seen[key]})")
    return out


#: Where ABF 1 keeps its file comment (byte offset and length, from the ABF 1 header layout).
_ABF1_COMMENT_END = 5154 + 56


def _comment_is_in_header(abf) -> bool:
    """False when pyabf read an ABF 1 comment from beyond a short header, i.e. from the samples.

    Writers of short ABF 1 headers (2048 bytes) have no comment field; pyabf still reads the
    comment's offset, which then lies in the data block and decodes as noise.
    """
    if int(abf.abfVersion["major"]) != 1:
        return True
    return int(getattr(abf, "dataByteStart", 0)) >= _ABF1_COMMENT_END

