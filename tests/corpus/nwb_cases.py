"""Damaged NWB files, and HDF5 files that are not recordings.

Seed: a synthetic current-clamp cell written with pynwb (:func:`analysis.synthetic.write_nwb`,
one ``CurrentClampSeries`` per sweep). Each case removes or rewrites one part with h5py at the
place the NWB 2 schema puts it (``/acquisition/NAME/data`` with attributes ``conversion``,
``offset``, ``unit``; ``starting_time`` with attribute ``rate``; the ``electrode`` link; the root
attribute ``nwb_version``).
"""

from __future__ import annotations

import shutil
from pathlib import Path
from typing import Callable

import numpy as np

from .make_corpus import Case

SERIES = "acquisition/Vm_000"
_PYNWB = r"could not read|damaged|incomplete|corrupt|missing"


def _seed(path: Path) -> Path:
    from analysis.synthetic import preset, synthesize
    from analysis.synthetic import write_nwb

    syn = synthesize(preset("nodal-like"), duration_s=1.0, fs_hz=10_000.0, seed=5)
    write_nwb(syn.recording, path)
    return path


def _variant(seed: Path, dest: Path, edit: Callable) -> Path:
    import h5py

    shutil.copyfile(seed, dest)
    with h5py.File(dest, "r+") as f:
        edit(f)
    return dest


def _replace_data(f, data=None, **create) -> None:
    """Put a new ``data`` dataset in the series, keeping the old one's attributes."""
    old = f[SERIES + "/data"]
    attrs = dict(old.attrs)
    del f[SERIES + "/data"]
    new = f[SERIES].create_dataset("data", data=data, **create)
    for key, value in attrs.items():
        new.attrs[key] = value


def _timestamps(f, times=None, **create) -> None:
    """Swap the series' ``starting_time`` and rate for per-sample ``timestamps``."""
    del f[SERIES + "/starting_time"]
    ts = f[SERIES].create_dataset("timestamps", data=times, **create)
    ts.attrs["interval"] = np.int32(1)
    ts.attrs["unit"] = "seconds"


def _delete(path: str) -> Callable:
    return lambda f: f.__delitem__(path)


def _set_attr(path: str, key: str, value) -> Callable:
    return lambda f: f[path].attrs.__setitem__(key, value)


def build(folder: Path) -> list[Case]:
    """The NWB and foreign-HDF5 cases, written into ``folder``."""
    seed = _seed(folder / "seed.nwb")
    n = 10_000
    irregular = np.arange(n) / 10_000.0
    irregular[5000:] += 0.0123  # a 12.3 ms gap in the middle
    edits: list[tuple[str, Callable, str, str, bool]] = [
        ("nwb-no-data", _delete(SERIES + "/data"), _PYNWB + r"|no data", "the series' data dataset removed", False),
        ("nwb-no-rate", _delete(SERIES + "/starting_time"), _PYNWB + r"|rate", "starting_time (with the rate) removed", False),
        ("nwb-no-electrode", _delete(SERIES + "/electrode"), _PYNWB + r"|electrode", "the electrode link removed", False),
        ("nwb-no-version", lambda f: f.attrs.__delitem__("nwb_version"), r"not an NWB file",
         "the root nwb_version attribute removed: plain HDF5", False),
        ("nwb-no-type", _set_attr(SERIES, "neurodata_type", "TimeSeries"), r"no CurrentClampSeries",
         "the series retyped as a plain TimeSeries: nothing in current clamp", False),
        ("nwb-rate-zero", _set_attr(SERIES + "/starting_time", "rate", 0.0), r"sampling rate", "rate = 0 Hz", False),
        ("nwb-rate-negative", _set_attr(SERIES + "/starting_time", "rate", -5.0), r"sampling rate", "rate = -5 Hz", False),
        ("nwb-rate-absurd", _set_attr(SERIES + "/starting_time", "rate", 1e15), r"sampling rate",
         "rate = 10^15 Hz, beyond any digitiser", False),
        ("nwb-text-data", lambda f: _replace_data(f, np.array(["-60"] * n, dtype=object),
                                                  dtype=__import__("h5py").string_dtype()),
         r"not numbers|numeric|text|strings|dtype", "the samples stored as text", False),
        ("nwb-2d-data", lambda f: _replace_data(f, np.zeros((n // 4, 4), dtype=np.float32)),
         _PYNWB + r"|shape", "the samples stored as a 4-column table", False),
        ("nwb-too-short", lambda f: _replace_data(f, np.zeros(10, dtype=np.float32)), r"only 10 samples",
         "a series of 10 samples", False),
        ("nwb-irregular-timestamps", lambda f: _timestamps(f, irregular), r"irregular",
         "per-sample timestamps with a 12.3 ms gap", False),
        ("nwb-timestamps-count", lambda f: _timestamps(f, np.arange(n // 2) / 10_000.0),
         r"timestamps for \d+ samples|timestamps", "half as many timestamps as samples", False),
        ("nwb-huge-unstored-data", lambda f: _replace_data(f, None, shape=(10**12,), dtype="f4", chunks=(4096,)),
         r"declares|stores|holds", "a data dataset declaring 10^12 samples with no sample stored", True),
        ("nwb-huge-unstored-timestamps", lambda f: _timestamps(f, None, shape=(10**12,), dtype="f8", chunks=(4096,)),
         r"10+ timestamps for 10000 samples", "10^12 timestamps declared, none stored, for 10^4 samples", True),
    ]
    cases = []
    for name, edit, expect, why, huge in edits:
        path = _variant(seed, folder / f"{name}.nwb", edit)
        cases.append(Case(name, (path,), ("info", str(path)), path, expect, why, huge=huge))
    cases += _damaged_bytes(seed, folder) + _foreign(folder) + _samples(seed, folder) + _found_by_fuzzing(seed, folder)
    return cases


def _found_by_fuzzing(seed: Path, folder: Path) -> list[Case]:
    """Damage that reached the samples' reading as a bare h5py error (bench/fuzz_readers.py)."""
    data = bytearray(seed.read_bytes())
    # Four bytes of the local heap of the series' group overwritten (offsets in the seed as
    # pynwb writes it): h5py's KeyError "bad heap free list" once the data is looked up.
    for at, value in ((1057, 115), (1058, 151), (1059, 28), (2432, 100)):
        data[at] = value
    path = folder / "nwb-heap-free-list-damaged.nwb"
    path.write_bytes(bytes(data))
    outputs = (folder / "nwb-heap-free-list-damaged.h5", folder / "nwb-heap-free-list-damaged.csv")
    argv = ("analyze", str(path), "--out", str(outputs[0]), "--csv", str(outputs[1]))
    why = "a damaged heap in the series' group, met when the samples are read"
    # pynwb makes its cache folder when it is imported; here that folder cannot be made (its
    # parent is a file), and the damaged file must still be refused in one line.
    blocker = folder / "cache-parent-is-a-file"
    blocker.write_text("not a folder\n", encoding="utf-8")
    return [
        Case("nwb-heap-free-list-damaged", (path,), argv, path, r"samples of series .* cannot be read", why,
             outputs=outputs),
        Case("nwb-cache-folder-cannot-be-made", (path,), ("info", str(path)), path,
             r"samples of series .* cannot be read", why + ", with pynwb's cache folder impossible to make",
             tags=("subprocess",), env=(("XDG_CACHE_HOME", str(blocker / "cache")),)),
    ]


def _samples(seed: Path, folder: Path) -> list[Case]:
    """Damage in the samples themselves, found only when the analysis reads them."""
    out = []
    for name, edit, expect, why in [
        ("nwb-nan-samples", lambda f: f[SERIES + "/data"].__setitem__(slice(4000, 4010), np.nan),
         r"10 NaN or Inf.*first at sample 4000", "ten NaN samples in the series"),
        ("nwb-inf-conversion", _set_attr(SERIES + "/data", "conversion", np.inf), r"NaN or Inf",
         "a conversion factor of Inf"),
    ]:
        path = _variant(seed, folder / f"{name}.nwb", edit)
        outputs = (folder / f"{name}.h5", folder / f"{name}.csv")
        argv = ("analyze", str(path), "--out", str(outputs[0]), "--csv", str(outputs[1]))
        out.append(Case(name, (path,), argv, path, expect, why, outputs=outputs))
    return out


def _damaged_bytes(seed: Path, folder: Path) -> list[Case]:
    data = seed.read_bytes()
    out = []
    for name, content, why in [
        ("nwb-cut-in-half", data[: len(data) // 2], "the NWB file cut in half in a copy"),
        ("nwb-cut-after-superblock", data[:96], "only the HDF5 superblock left"),
        ("nwb-superblock-flipped", data[:8] + bytes(b ^ 0xFF for b in data[8:40]) + data[40:],
         "the HDF5 superblock's sizes and addresses inverted"),
        # Found by bench/fuzz_readers.py: h5py raised a bare KeyError ("ring type mismatch").
        ("nwb-bytes-inserted-after-superblock", data[:64] + bytes(44) + data[64:],
         "44 zero bytes inserted after the superblock, shifting every address"),
    ]:
        path = folder / f"{name}.nwb"
        path.write_bytes(content)
        out.append(Case(name, (path,), ("info", str(path)), path, r"truncated|corrupt|damaged", why))
    return out


def _foreign(folder: Path) -> list[Case]:
    import h5py

    path = folder / "foreign.h5"
    with h5py.File(path, "w") as f:
        f.create_dataset("images", data=np.zeros((4, 8, 8), dtype=np.uint8))
        f.attrs["instrument"] = "plate reader"
    return [Case("hdf5-foreign-to-info", (path,), ("info", str(path)), path, r"not an NWB file",
                 "an HDF5 file from another program given as a recording")]
