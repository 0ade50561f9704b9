"""Recording files for reader tests, written by outside writers, and damaged copies of them.

Writers: pyabf's ABF 1 writer (``pyabf.abfWriter.writeABF1``), pynwb, numpy's ``savetxt``.
Byte offsets patched in damaged ABF files are those pyabf reads (``pyabf/abf1/headerV1.py``,
``pyabf/abf2/section.py``): the file format's own layout.
"""

from __future__ import annotations

import datetime
import shutil
import struct
from pathlib import Path

import numpy as np

# ABF 1 header fields (pyabf/abf1/headerV1.py) and ABF 2 section map entries (pyabf/abf2/*).
ABF1_ACQ_LENGTH = 10
ABF1_N_CHANNELS = 120
ABF1_INSTRUMENT_SCALE = 922
ABF1_ADC_RANGE = 244
ABF1_ADC_RESOLUTION = 252
ABF2_ADC_SECTION = 92
ABF2_DATA_SECTION = 236
ABF2_TAG_SECTION = 252


def write_abf1(path: Path, sweeps_mV: np.ndarray, rate_hz: float, units: str = "mV") -> Path:
    """An ABF 1 file written by pyabf's own writer (episodic, one row per sweep)."""
    from pyabf.abfWriter import writeABF1

    writeABF1(np.atleast_2d(np.asarray(sweeps_mV, dtype=float)), str(path), rate_hz, units=units)
    return path


def abf1_step(path: Path) -> float:
    """One int16 step of an ABF 1 file from pyabf's writer, from its header fields.

    The writer stores ``int(value * resolution / range * scale)`` (pyabf/abfWriter.py), so one
    step is ``range / (resolution * scale)``.
    """
    head = path.read_bytes()[:2048]
    (scale,) = struct.unpack_from("<f", head, ABF1_INSTRUMENT_SCALE)
    (adc_range,) = struct.unpack_from("<f", head, ABF1_ADC_RANGE)
    (resolution,) = struct.unpack_from("<i", head, ABF1_ADC_RESOLUTION)
    return adc_range / (resolution * scale)


def patch(path: Path, offset: int, fmt: str, value) -> Path:
    """Overwrite one little-endian header field in place."""
    data = bytearray(path.read_bytes())
    struct.pack_into("<" + fmt, data, offset, value)
    path.write_bytes(bytes(data))
    return path


def truncated_copy(source: Path, dest: Path, keep_bytes: int) -> Path:
    """The first ``keep_bytes`` of ``source``: a file cut short in a copy."""
    dest.write_bytes(source.read_bytes()[:keep_bytes])
    return dest


def copy(source: Path, dest: Path) -> Path:
    shutil.copyfile(source, dest)
    return dest


def write_nwb(
    path: Path,
    series: list[dict],
    *,
    electrodes: tuple[str, ...] = ("electrode0",),
) -> Path:
    """An NWB file written by pynwb with the given acquisition series.

    Each dict holds ``data`` and either ``rate`` (with optional ``starting_time``) or
    ``timestamps``, plus optional ``kind`` ("CurrentClampSeries", "IZeroClampSeries",
    "VoltageClampSeries"), ``conversion``, ``offset``, ``electrode`` (index) and ``name``.
    """
    import warnings

    from pynwb import NWBHDF5IO, NWBFile
    from pynwb import icephys

    nwbfile = NWBFile(
        session_description="reader test", identifier="reader-test",
        session_start_time=datetime.datetime(2024, 5, 6, 9, 30, tzinfo=datetime.timezone.utc),
    )
    device = nwbfile.create_device(name="amplifier")
    made = [
        nwbfile.create_icephys_electrode(name=name, description="patch pipette", device=device)
        for name in electrodes
    ]
    for k, spec in enumerate(series):
        kind = spec.get("kind", "CurrentClampSeries")
        kwargs = dict(
            name=spec.get("name", f"series{k}"), data=spec["data"],
            electrode=made[spec.get("electrode", 0)], conversion=spec.get("conversion", 1.0),
            offset=spec.get("offset", 0.0), sweep_number=spec.get("sweep_number", k),
        )
        if "timestamps" in spec:
            kwargs["timestamps"] = spec["timestamps"]
        else:
            kwargs["rate"] = spec["rate"]
            kwargs["starting_time"] = spec.get("starting_time", 0.0)
        kwargs["gain"] = 1.0
        nwbfile.add_acquisition(getattr(icephys, kind)(**kwargs))
    with warnings.catch_warnings():
        warnings.simplefilter("ignore")  # pynwb's dtype notes on sweep_number
        with NWBHDF5IO(str(path), "w") as io:
            io.write(nwbfile)
    return path


def write_text(path: Path, header: str, rows, *, delimiter: str = ",", fmt: str = "%.6f") -> Path:
    """A delimited text file: a header line, then one line per row."""
    rows = np.asarray(rows, dtype=float)
    np.savetxt(path, rows, delimiter=delimiter, header=header, comments="", fmt=fmt)
    return path


def regular_rows(n: int = 2000, rate_hz: float = 10_000.0) -> np.ndarray:
    """Rows of (time in s, a slow membrane-potential-like wave in mV)."""
    t = np.arange(n) / rate_hz
    return np.c_[t, -60.0 + 20.0 * np.sin(2 * np.pi * 2.0 * t)]
