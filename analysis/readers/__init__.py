"""Opening recordings: one reader per format, chosen by the file's extension and its content.

Each reader module has ``EXTENSIONS``, ``sniff(head: bytes) -> bool`` and
``read(path) -> Recording``. :func:`open_recording` checks the path, reads the file's first bytes,
tries every reader whose format signature matches them (whatever the extension: a renamed file
still opens) and then every reader registered for the extension, and returns the first recording read. When all of them fail it says which were
tried and why, in one line.
"""

from __future__ import annotations

import os
from dataclasses import dataclass
from types import ModuleType
from typing import Callable, Mapping

from analysis.errors import RecordingError, missing
from analysis.recording import Recording, clamp_mode_from_units, UNKNOWN_CLAMP
from analysis.readers import abf, nwb, text

__all__ = ["Reader", "READERS", "open_recording", "supported_extensions", "reader_names"]

#: Bytes read from the start of a file for content sniffing.
SNIFF_BYTES = 8192


@dataclass(frozen=True)
class Reader:
    """A registered reader.

    Attributes
    ----------
    name : str
        Short name, also the ``format`` of the recordings it returns.
    description : str
        What it reads, for messages and help texts.
    extensions : tuple of str
        Lower-case file extensions with the dot (``".abf"``).
    sniff : callable
        ``sniff(head) -> bool``: whether the file's first bytes look like this format.
    read : callable
        ``read(path) -> Recording``.
    by_signature : bool
        True when ``sniff`` checks a format signature (magic bytes), so that a file is tried
        with this reader whatever its extension; False when it only guesses (text), so that it
        is tried only for its own extensions.
    """

    name: str
    description: str
    extensions: tuple[str, ...]
    sniff: Callable[[bytes], bool]
    read: Callable[[str], Recording]
    by_signature: bool

    @classmethod
    def from_module(cls, name: str, description: str, module: ModuleType) -> "Reader":
        return cls(
            name, description, tuple(module.EXTENSIONS), module.sniff, module.read,
            bool(module.SNIFF_BY_SIGNATURE),
        )


#: Every reader, in the order they are tried when several match.
READERS: tuple[Reader, ...] = (
    Reader.from_module("abf", "Axon Binary Format 1 and 2 (pyabf)", abf),
    Reader.from_module("nwb", "Neurodata Without Borders 2 (pynwb)", nwb),
    Reader.from_module("text", "delimited text: a time column and voltage columns", text),
)


def supported_extensions() -> tuple[str, ...]:
    """The file extensions :func:`open_recording` reads, e.g. ``('.abf', '.nwb', '.csv', ...)``."""
    return tuple(ext for reader in READERS for ext in reader.extensions)


def reader_names() -> tuple[str, ...]:
    """The names of the registered readers."""
    return tuple(reader.name for reader in READERS)


def open_recording(
    path: str | os.PathLike,
    *,
    units: Mapping[int | str, str] | None = None,
) -> Recording:
    """Open a recording file of any supported format.

    Parameters
    ----------
    path : str or os.PathLike
        An ABF, NWB or delimited-text file.
    units : mapping of channel (index or name) to units, or None
        Units to declare for channels that the file mislabels, e.g. ``{0: "mV"}`` for a membrane
        potential stored as pA. The samples are not changed; the clamp mode follows the new
        units. None keeps the file's units.

    Returns
    -------
    Recording
        Samples are read on demand where the format allows (ABF, NWB).

    Raises
    ------
    RecordingError
        One line naming the file, what is wrong and what to do: a missing file, a directory, an
        empty or unreadable file, an unsupported extension, a truncated or corrupt file, no
        channels, too few samples, NaN or Inf samples, non-numeric text, or an unknown channel
        or units in ``units``.

    Examples
    --------
    >>> import numpy as np, tempfile, pathlib
    >>> folder = pathlib.Path(tempfile.mkdtemp())
    >>> t = np.arange(2000) / 10_000.0
    >>> np.savetxt(folder / "cell.csv", np.c_[t, -60 + 0 * t], delimiter=",",
    ...            header="time_s,Vm_mV", comments="")
    >>> rec = open_recording(folder / "cell.csv")
    >>> rec.format, rec.sampling_rate_hz, rec.units(0), rec.channels[0].clamp_mode
    ('text', 10000.0, 'mV', 'current clamp')
    """
    origin = os.fspath(path)
    head = _check_path(origin)
    ext = os.path.splitext(origin)[1].lower()
    by_content = [r for r in READERS if r.by_signature and _sniffs(r, head)]
    by_name = [r for r in READERS if ext in r.extensions and r not in by_content]
    candidates = by_content + by_name
    if not candidates:
        listed = ", ".join(supported_extensions())
        shown = f"'{ext}'" if ext else "no extension"
        raise RecordingError(
            origin, f"unsupported file type ({shown}, and the content is not a known format)",
            f"Upstroke reads {listed}; export the recording as one of these",
        )
    failures: list[tuple[Reader, RecordingError]] = []
    for reader in candidates:
        try:
            rec = reader.read(origin)
            break
        except RecordingError as exc:
            failures.append((reader, exc))
    else:
        raise _all_failed(origin, failures)
    return _override_units(rec, units) if units else rec


def _check_path(origin: str) -> bytes:
    """The file's first bytes, after refusing paths that are not a readable, non-empty file."""
    if not os.path.exists(origin):
        raise RecordingError(origin, *missing(origin))
    if os.path.isdir(origin):
        raise RecordingError(origin, "is a folder, not a recording file", "give one file; "
                             "`upstroke batch` takes folders")
    if not os.path.isfile(origin):
        raise RecordingError(origin, "is not a regular file", "give a recording file")
    try:
        with open(origin, "rb") as fh:
            head = fh.read(SNIFF_BYTES)
    except OSError as exc:
        raise RecordingError(origin, f"cannot be read ({exc.strerror or exc})",
                             "check the file's permissions") from None
    if not head:
        raise RecordingError(origin, "the file is empty (0 bytes)",
                             "the recording was not saved; copy it again or pick another file")
    return head


def _sniffs(reader: Reader, head: bytes) -> bool:
    try:
        return bool(reader.sniff(head))
    except Exception:  # a sniffer that trips over odd bytes simply does not claim the file
        return False


def _all_failed(origin: str, failures: list[tuple[Reader, RecordingError]]) -> RecordingError:
    if len(failures) == 1:
        return failures[0][1]
    reasons = "; ".join(f"as {r.name}: {exc.problem}" for r, exc in failures)
    return RecordingError(
        origin, f"could not be read by any reader tried ({reasons})",
        "check that the file is a complete recording in one of the supported formats",
    )


def _override_units(rec: Recording, units: Mapping[int | str, str]) -> Recording:
    for channel, new_units in units.items():
        text_units = str(new_units).strip()
        if clamp_mode_from_units(text_units) == UNKNOWN_CLAMP:
            raise RecordingError(
                rec.source_path, f"units {new_units!r} given for channel {channel!r} are not a "
                "voltage or a current", "give mV, V, pA or nA",
            )
        rec = rec.with_units(channel, text_units)
    return rec
