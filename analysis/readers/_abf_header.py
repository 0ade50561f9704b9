"""Checks of an ABF file's raw header against the file's size, made before pyabf parses it.

pyabf trusts the header: it sizes lists by the entry counts it finds there and reads the data
block as long as the header says. A truncated or damaged file can therefore make it allocate
gigabytes or fail deep inside with a bare ``struct.error``. These checks read the few fixed
fields that size anything (layouts as pyabf reads them: ``pyabf/abf1/headerV1.py`` and the
section map of ``pyabf/abf2/*``) and refuse, with a clear message, any size that the file
cannot hold.
"""

from __future__ import annotations

import math
import struct

from analysis.errors import RecordingError
from analysis.readers._timebase import check_rate

__all__ = ["ABF1_SIGNATURE", "ABF2_SIGNATURE", "check_layout"]

ABF1_SIGNATURE = b"ABF "
ABF2_SIGNATURE = b"ABF2"

#: pyabf reads ABF 1 header fields up to this byte (nCreatorBuildVersion at 5804, 2 bytes).
ABF1_HEADER_BYTES = 5806
ABF2_HEADER_BYTES = 512
BLOCK_BYTES = 512

# ABF 2 section map: where each section's (block, bytes per entry, entry count) sits in the
# header, for the sections pyabf reads.
_ABF2_SECTIONS = {
    "protocol": 76, "ADC": 92, "DAC": 108, "epoch": 124, "epoch-per-DAC": 156,
    "user list": 172, "strings": 220, "data": 236, "tag": 252, "synch array": 316,
}

_TRUNCATED_FIX = "the file was cut short; copy it again from the acquisition computer"
_CORRUPT_FIX = "the file is damaged or not an ABF file; open the original recording"


def check_layout(head: bytes, size_bytes: int, origin: str) -> None:
    """Refuse an ABF file whose header is cut short or sizes more than the file holds.

    Parameters
    ----------
    head : bytes
        The file's first bytes (at least :data:`ABF1_HEADER_BYTES` when the file has them).
    size_bytes : int
        The file's size.
    origin : str
        The file, for messages.

    Raises
    ------
    RecordingError
        For a header cut short, no channels, a non-positive sample interval, an unknown sample
        format, or any section (the data above all) that reaches past the end of the file.
    """
    signature = head[:4]
    if signature == ABF1_SIGNATURE:
        _check_abf1(head, size_bytes, origin)
    elif signature == ABF2_SIGNATURE:
        _check_abf2(head, size_bytes, origin)
    else:
        raise RecordingError(
            origin, f"is not an ABF file (it starts with {signature!r}, not 'ABF ' or 'ABF2')",
            "check the file's format; Upstroke reads ABF, NWB and delimited text",
        )


def _check_abf1(head: bytes, size: int, origin: str) -> None:
    if size < ABF1_HEADER_BYTES:
        raise RecordingError(
            origin, f"the file ends inside its ABF 1 header ({size} bytes; the header needs "
            f"{ABF1_HEADER_BYTES})", _TRUNCATED_FIX,
        )
    (acq_length,) = struct.unpack_from("<i", head, 10)
    (points_ignored,) = struct.unpack_from("<h", head, 14)
    (episodes,) = struct.unpack_from("<i", head, 16)
    data_block, tag_block, n_tags = struct.unpack_from("<iii", head, 40)
    (data_format,) = struct.unpack_from("<h", head, 100)
    (n_channels,) = struct.unpack_from("<h", head, 120)
    (interval_us,) = struct.unpack_from("<f", head, 122)
    _check_channels(n_channels, origin, limit=16)
    _check_interval(interval_us, origin, n_channels=n_channels)
    if data_format == 1:
        raise RecordingError(
            origin, "holds ABF 1 floating-point samples, which pyabf cannot read",
            "save the recording again as ABF 2 (or export it as text)",
        )
    if data_format != 0:
        raise RecordingError(origin, f"declares an unknown sample format ({data_format})", _CORRUPT_FIX)
    if acq_length < 0 or episodes < 0 or data_block < 0 or points_ignored < 0:
        # (a negative count of points ignored would start the data before the file's first byte)
        raise RecordingError(
            origin, f"the ABF 1 header is corrupt (samples {acq_length}, sweeps {episodes}, "
            f"data block {data_block}, points ignored {points_ignored})", _CORRUPT_FIX,
        )
    _check_data(data_block * BLOCK_BYTES + points_ignored, acq_length, 2, size, origin)
    _check_sweeps(episodes, acq_length // n_channels, origin)
    if n_tags > 0 and tag_block * BLOCK_BYTES + 64 * n_tags > size:
        raise RecordingError(
            origin, f"the ABF 1 header declares {n_tags} tags past the end of the file", _CORRUPT_FIX,
        )


def _check_abf2(head: bytes, size: int, origin: str) -> None:
    if size < ABF2_HEADER_BYTES or len(head) < ABF2_HEADER_BYTES:
        raise RecordingError(
            origin, f"the file ends inside its ABF 2 header ({size} bytes; the header needs "
            f"{ABF2_HEADER_BYTES})", _TRUNCATED_FIX,
        )
    (data_format,) = struct.unpack_from("<H", head, 30)
    sections = {
        name: struct.unpack_from("<IIq", head, offset) for name, offset in _ABF2_SECTIONS.items()
    }
    for name, (block, entry_bytes, count) in sections.items():
        if name == "data" or count <= 0:
            continue
        end = block * BLOCK_BYTES + max(entry_bytes, 1) * count
        if end > size:
            raise RecordingError(
                origin, f"the ABF 2 header is corrupt: its {name} section ({count} entries) "
                f"reaches past the end of the {size}-byte file", _CORRUPT_FIX,
            )
    _check_channels(sections["ADC"][2], origin, limit=None)
    block, _, count = sections["protocol"]
    start = block * BLOCK_BYTES
    if count <= 0 or start + 6 > size:
        raise RecordingError(origin, "the ABF 2 header has no protocol section", _CORRUPT_FIX)
    if start + 6 <= len(head):
        (interval_us,) = struct.unpack_from("<f", head, start + 2)
        _check_interval(interval_us, origin)
    if data_format not in (0, 1):
        raise RecordingError(origin, f"declares an unknown sample format ({data_format})", _CORRUPT_FIX)
    block, entry_bytes, count = sections["data"]
    expected = 2 if data_format == 0 else 4
    if count > 0 and entry_bytes != expected:
        raise RecordingError(
            origin, f"the ABF 2 header is corrupt: {entry_bytes}-byte samples for sample format "
            f"{data_format}", _CORRUPT_FIX,
        )
    _check_data(block * BLOCK_BYTES, count, expected, size, origin)
    (episodes,) = struct.unpack_from("<I", head, 12)
    _check_sweeps(episodes, max(count, 0) // sections["ADC"][2], origin)
    for name, offset in _ABF2_SECTIONS.items():
        # pyabf reads only the low half of each 64-bit count, as an int32 (pyabf/abf2/section.py),
        # so a count whose halves disagree would size pyabf's lists by a number never checked.
        (low,) = struct.unpack_from("<i", head, offset + 8)
        if low != sections[name][2]:
            raise RecordingError(
                origin, f"the ABF 2 header is corrupt: its {name} section's entry count "
                f"({sections[name][2]}) is beyond 32 bits", _CORRUPT_FIX,
            )


def _check_sweeps(n_sweeps: int, n_frames: int, origin: str) -> None:
    # pyabf lists and times every sweep the header counts before it reads any data; a sweep holds
    # at least one sample per channel, so more sweeps than that is header garbage.
    if n_sweeps > max(n_frames, 1):
        raise RecordingError(
            origin, f"the ABF header is corrupt: it declares {n_sweeps} sweeps for {n_frames} "
            "samples per channel", _CORRUPT_FIX,
        )


def _check_channels(n_channels: int, origin: str, *, limit: int | None) -> None:
    if n_channels <= 0:
        raise RecordingError(
            origin, "the recording has no channels (the ABF header lists none)",
            "record or export at least one input channel",
        )
    if limit is not None and n_channels > limit:
        raise RecordingError(
            origin, f"the ABF header is corrupt: it lists {n_channels} channels (at most {limit})",
            _CORRUPT_FIX,
        )


def _check_interval(interval_us: float, origin: str, *, n_channels: int = 1) -> None:
    if not (math.isfinite(interval_us) and interval_us > 0):
        raise RecordingError(
            origin, f"the ABF header is corrupt: its sample interval is {interval_us!r} us",
            _CORRUPT_FIX,
        )
    # ABF 1 gives the interval between samples of all channels, ABF 2 per channel (as pyabf reads them).
    check_rate(1e6 / (interval_us * n_channels), origin,
               what="the ABF header is corrupt: its sampling rate", fix=_CORRUPT_FIX)


def _check_data(start: int, n_samples: int, sample_bytes: int, size: int, origin: str) -> None:
    need = start + n_samples * sample_bytes
    if need > size:
        raise RecordingError(
            origin, f"the header declares {n_samples} samples ({n_samples * sample_bytes} bytes "
            f"from byte {start}) but the file holds only {size} bytes, "
            f"{need - size} too few", "the file was cut short or its header is damaged; copy it "
            "again from the acquisition computer",
        )
