"""Write a recording to ABF or NWB, for demos and benchmarks made from synthetic cells.

ABF files are written as pyabf's ABF1 writer (:func:`pyabf.abfWriter.writeABF1`) writes them,
byte for byte, but with the samples scaled in one numpy pass: pyabf packs one sample per Python
call, which takes minutes for a 30-minute recording. NWB files hold one ``CurrentClampSeries`` per
sweep, written with pynwb.
"""

from __future__ import annotations

import datetime as _dt
import os
import struct
import tempfile

import numpy as np

from analysis.recording import Recording
from analysis.results import output_mode

__all__ = ["write_abf", "write_nwb"]

_ABF_BLOCK = 512
_ABF_HEADER_BLOCKS = 4


def _abf_value_scale(max_abs: float) -> float:
    """The int16 counts per unit that pyabf's ABF1 writer picks for data of this size."""
    factor = 100.0
    for _ in range(10):
        factor /= 10
        scale = 2**15 / 10 * factor
        if 32767 / scale >= max_abs:
            break
    return scale


def write_abf(recording: Recording, path: str | os.PathLike, *, channel: int | str = 0) -> None:
    """Write one channel of a recording as an ABF1 file (pyabf's writer's layout).

    Parameters
    ----------
    recording : Recording
    path : str or os.PathLike
        Written atomically: a temporary file beside it, then renamed.
    channel : int or str

    Notes
    -----
    The header comes from :func:`pyabf.abfWriter.writeABF1` itself (called on a one-sample stand-in
    with the same range, so it picks the same scale), with the sample counts set to the real ones.
    Samples are truncated toward zero to int16 as pyabf does; at +-100 mV the step is 1/327.68 mV.
    Sweeps must be of equal length, as ABF1 episodes are.
    """
    import pyabf.abfWriter  # only writing an ABF file needs it

    index = recording.channel_index(channel)
    lengths = {recording.n_samples(i) for i in range(recording.n_sweeps)}
    if len(lengths) != 1:
        raise ValueError("ABF1 sweeps must all have the same length")
    n_sweeps, n_points = recording.n_sweeps, lengths.pop()
    data = np.stack([recording.sweep(i, index) for i in range(n_sweeps)])
    max_abs = float(np.max(np.abs(data)))
    scale = _abf_value_scale(max_abs)
    if max_abs * scale > 32767:
        raise ValueError(f"samples of {max_abs:g} {recording.units(index)} are beyond an ABF1 file's range")
    path = os.fspath(path)
    folder = os.path.dirname(os.path.abspath(path))
    fd, tmp = tempfile.mkstemp(prefix=".upstroke-", suffix=".abf", dir=folder)
    os.close(fd)
    try:
        stand_in = np.full((n_sweeps, 1), max_abs)
        pyabf.abfWriter.writeABF1(stand_in, tmp, recording.sampling_rate_hz, units=recording.units(index))
        with open(tmp, "rb") as fh:
            header = bytearray(fh.read(_ABF_BLOCK * _ABF_HEADER_BLOCKS))
        total = n_points * n_sweeps
        struct.pack_into("i", header, 10, total)  # lActualAcqLength
        struct.pack_into("i", header, 138, n_points)  # lNumSamplesPerEpisode
        counts = np.trunc(data * scale).astype("<i2").reshape(-1)
        data_blocks = int(total * 2 / _ABF_BLOCK) + 1
        padding = data_blocks * _ABF_BLOCK - total * 2
        with open(tmp, "wb") as fh:
            fh.write(header)
            fh.write(counts.tobytes())
            fh.write(b"\0" * padding)
        os.chmod(tmp, output_mode(path))  # as any other output: the umask's permissions, not 0600
        os.replace(tmp, path)
    except BaseException:
        if os.path.exists(tmp):
            os.unlink(tmp)
        raise


def write_nwb(
    recording: Recording,
    path: str | os.PathLike,
    *,
    channel: int | str = 0,
    identifier: str = "upstroke-synthetic",
    session_description: str = "synthetic current-clamp recording",
    session_start_time: _dt.datetime = _dt.datetime(2024, 1, 1, tzinfo=_dt.timezone.utc),
    cell_id: str = "cell",
) -> None:
    """Write one channel of a recording as NWB: one ``CurrentClampSeries`` per sweep.

    Parameters
    ----------
    recording : Recording
        A membrane potential in mV (stored in volts through NWB's ``conversion``).
    path : str or os.PathLike
        Written atomically.
    channel : int or str
    identifier, session_description, session_start_time, cell_id
        NWB file metadata; fixed defaults keep the file's contents the same on every run.
    """
    from pynwb import NWBHDF5IO, NWBFile  # heavy; only writing an NWB file needs it
    from pynwb.icephys import CurrentClampSeries  # heavy; only writing an NWB file needs it

    index = recording.channel_index(channel)
    if recording.units(index) != "mV":
        raise ValueError("write_nwb writes membrane potentials in mV")
    nwb = NWBFile(
        session_description=session_description, identifier=identifier,
        session_start_time=session_start_time, file_create_date=session_start_time,
    )
    device = nwb.create_device(name="amplifier")
    electrode = nwb.create_icephys_electrode(name=cell_id, description="whole-cell patch electrode", device=device)
    for i in range(recording.n_sweeps):
        nwb.add_acquisition(
            CurrentClampSeries(
                name=f"Vm_{i:03d}", data=recording.sweep(i, index).astype(np.float32), electrode=electrode,
                gain=1.0, conversion=1e-3, rate=float(recording.sampling_rate_hz),
                starting_time=float(recording.sweep_starts_s[i]), sweep_number=np.uint32(i),
            )
        )
    path = os.fspath(path)
    fd, tmp = tempfile.mkstemp(prefix=".upstroke-", suffix=".nwb", dir=os.path.dirname(os.path.abspath(path)))
    os.close(fd)
    try:
        with NWBHDF5IO(tmp, "w") as io:
            io.write(nwb)
        os.chmod(tmp, output_mode(path))  # as any other output: the umask's permissions, not 0600
        os.replace(tmp, path)
    except BaseException:
        if os.path.exists(tmp):
            os.unlink(tmp)
        raise
