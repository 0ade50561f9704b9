"""The NWB reader against files written by pynwb, checked with pynwb's own scaling."""

from __future__ import annotations

import numpy as np
import pytest

from analysis import open_recording
from analysis.errors import RecordingError
from analysis.readers import nwb as nwb_reader
from tests import recording_files as files

pynwb = pytest.importorskip("pynwb")

RATE_HZ = 20_000.0


def _int16_wave(n=5000, shift=0):
    """An int16 trace that, at 2e-5 V per count and -0.07 V offset, spans about -90..+10 mV."""
    i = np.arange(n) + shift
    return (500 + 2500 * np.clip(np.sin(2 * np.pi * i / 2000), 0, None) ** 6 - 1500).astype(np.int16)


def _pynwb_mV(path, name):
    """pynwb's own reading of a series in mV: get_data_in_units() applies conversion and offset."""
    with pynwb.NWBHDF5IO(str(path), "r") as io:
        series = io.read().acquisition[name]
        return np.asarray(series.get_data_in_units(), dtype=np.float64) * 1e3


def test_int16_current_clamp_with_conversion_and_offset(tmp_path):
    raw = _int16_wave()
    path = files.write_nwb(tmp_path / "cc.nwb", [
        {"name": "sweep_a", "data": raw, "rate": RATE_HZ, "conversion": 2e-5, "offset": -0.07},
    ])
    rec = open_recording(path)
    assert rec.format == "nwb" and rec.n_sweeps == 1
    assert rec.sampling_rate_hz == RATE_HZ
    assert rec.units(0) == "mV" and rec.channels[0].clamp_mode == "current clamp"
    v = rec.sweep(0)
    # The NWB standard: value = data * conversion + offset, in volts (NWB TimeSeries spec).
    np.testing.assert_allclose(v, (raw * 2e-5 - 0.07) * 1e3, rtol=1e-12)
    np.testing.assert_allclose(v, _pynwb_mV(path, "sweep_a"), rtol=1e-9)  # pynwb get_data_in_units
    np.testing.assert_allclose(rec.sweep(0, start=1234, stop=1300), v[1234:1300], rtol=0)


def test_several_series_become_sweeps_in_time_order(tmp_path):
    specs = [
        {"name": f"cc{k}", "data": _int16_wave(shift=100 * k), "rate": RATE_HZ,
         "starting_time": start, "conversion": 1e-4}
        for k, start in enumerate([30.0, 10.0, 20.0])
    ]
    path = files.write_nwb(tmp_path / "sweeps.nwb", specs)
    rec = open_recording(path)
    assert rec.n_sweeps == 3
    assert rec.sweep_starts_s == (10.0, 20.0, 30.0)  # ordered by starting_time
    assert rec.metadata["sweep_series"] == ["cc1", "cc2", "cc0"]
    for i, name in enumerate(["cc1", "cc2", "cc0"]):
        np.testing.assert_allclose(rec.sweep(i), _pynwb_mV(path, name), rtol=1e-9)  # pynwb


def test_izero_clamp_series_reads_as_current_clamp(tmp_path):
    data = np.linspace(-0.08, -0.05, 3000)  # float volts
    path = files.write_nwb(tmp_path / "izero.nwb", [
        {"kind": "IZeroClampSeries", "name": "rest", "data": data, "rate": 10_000.0},
    ])
    rec = open_recording(path)
    assert rec.channels[0].clamp_mode == "current clamp"  # I=0 is current clamp without injection (NWB)
    assert rec.metadata["sweep_types"] == ["IZeroClampSeries"]
    np.testing.assert_allclose(rec.sweep(0), data * 1e3, rtol=1e-12)  # volts shown as mV


def test_two_electrodes_become_two_channels(tmp_path):
    specs = [
        {"name": f"e{e}s{k}", "data": _int16_wave(shift=e), "rate": RATE_HZ, "electrode": e,
         "starting_time": float(k), "conversion": 1e-4}
        for e in (0, 1) for k in (0, 1)
    ]
    path = files.write_nwb(tmp_path / "pair.nwb", specs, electrodes=("cellA", "cellB"))
    rec = open_recording(path)
    assert [c.name for c in rec.channels] == ["cellA", "cellB"] and rec.n_sweeps == 2
    np.testing.assert_allclose(rec.sweep(1, "cellB"), _pynwb_mV(path, "e1s1"), rtol=1e-9)  # pynwb


def test_regular_timestamps_give_the_rate(tmp_path):
    t = 5.0 + np.arange(4000) / 8000.0
    path = files.write_nwb(tmp_path / "stamped.nwb", [
        {"name": "cc", "data": np.full(4000, -0.06), "timestamps": t},
    ])
    rec = open_recording(path)
    assert rec.sampling_rate_hz == pytest.approx(8000.0, rel=1e-12)
    assert rec.sweep_starts_s == (5.0,)


def test_irregular_timestamps_are_refused(tmp_path):
    t = np.arange(4000) / 8000.0
    t[2000:] += 0.5e-3  # four samples' worth of gap
    path = files.write_nwb(tmp_path / "gappy.nwb", [
        {"name": "cc", "data": np.full(4000, -0.06), "timestamps": t},
    ])
    with pytest.raises(RecordingError, match=r"sampling is irregular.*timestamps of series 'cc'.*sample \d+"):
        open_recording(path)


def test_no_current_clamp_series_is_refused(tmp_path):
    path = files.write_nwb(tmp_path / "vc.nwb", [
        {"kind": "VoltageClampSeries", "name": "im", "data": np.zeros(3000), "rate": RATE_HZ},
    ])
    with pytest.raises(RecordingError, match="no CurrentClampSeries .*VoltageClampSeries"):
        open_recording(path)


def test_nan_samples_are_reported_on_read(tmp_path):
    data = np.full(3000, -0.06)
    data[[100, 200]] = np.nan
    path = files.write_nwb(tmp_path / "nan.nwb", [{"name": "cc", "data": data, "rate": RATE_HZ}])
    rec = open_recording(path)  # samples stay in the file until read
    with pytest.raises(RecordingError, match="2 NaN or Inf sample.*first at sample 100"):
        rec.sweep(0)


def test_too_few_samples(tmp_path):
    path = files.write_nwb(tmp_path / "short.nwb", [{"name": "cc", "data": np.zeros(50), "rate": RATE_HZ}])
    with pytest.raises(RecordingError, match="only 50 samples per sweep"):
        open_recording(path)


def test_truncated_and_foreign_hdf5(tmp_path):
    import h5py

    good = files.write_nwb(tmp_path / "good.nwb", [{"name": "cc", "data": _int16_wave(), "rate": RATE_HZ}])
    cut = files.truncated_copy(good, tmp_path / "cut.nwb", good.stat().st_size // 2)
    with pytest.raises(RecordingError, match="truncated or corrupt"):
        open_recording(cut)
    with h5py.File(tmp_path / "plain.nwb", "w") as fh:
        fh["x"] = np.zeros(10)
    with pytest.raises(RecordingError, match="not an NWB file"):
        open_recording(tmp_path / "plain.nwb")


def test_sniff_finds_the_hdf5_signature():
    assert nwb_reader.sniff(b"\x89HDF\r\n\x1a\n" + b"\x00" * 8)  # HDF5 format signature
    assert nwb_reader.sniff(b"\x00" * 512 + b"\x89HDF\r\n\x1a\n")  # after a 512-byte user block
    assert not nwb_reader.sniff(b"ABF2" + b"\x00" * 600)


def test_reading_needs_no_writable_cache_folder(tmp_path):
    """pynwb makes a cache folder when imported; where it cannot, the file still reads (compared
    with h5py's own reading of the stored data, scaled as the NWB standard says)."""
    import subprocess
    import sys
    from pathlib import Path

    import h5py

    path = files.write_nwb(tmp_path / "cell.nwb", [
        {"name": f"sweep_{i}", "data": _int16_wave(shift=i), "rate": RATE_HZ, "starting_time": float(i),
         "conversion": 2e-5, "offset": -0.07} for i in range(2)
    ])
    blocker = tmp_path / "a-file"
    blocker.write_text("not a folder\n")
    code = ("import sys; from analysis import open_recording\n"
            f"rec = open_recording({str(path)!r}); v = rec.sweep(0, 0)\n"
            "print(rec.n_sweeps, len(v), repr(float(v[123])))\n")
    repo = str(Path(__file__).resolve().parents[3])
    proc = subprocess.run([sys.executable, "-c", code], capture_output=True, text=True, timeout=300,
                          env={"PATH": "/usr/bin:/bin", "PYTHONPATH": repo, "HOME": str(blocker / "home"),
                               "XDG_CACHE_HOME": str(blocker / "cache")})
    assert proc.returncode == 0, proc.stderr
    with h5py.File(path, "r") as f:  # h5py, independent of pynwb: the first series' samples
        name = sorted(f["acquisition"])[0]
        raw = f["acquisition"][name]["data"]
        # The NWB standard: value = data * conversion + offset, in volts (NWB TimeSeries spec).
        expected = (float(raw[123]) * float(raw.attrs["conversion"]) + float(raw.attrs["offset"])) * 1e3
        n_stored = raw.shape[0]
    n_sweeps, n, value = proc.stdout.split()
    assert int(n_sweeps) == 2 and int(n) == n_stored
    assert float(value) == pytest.approx(expected, rel=1e-12)


def test_damaged_metadata_met_when_reading_samples_is_refused(tmp_path, monkeypatch):
    """An h5py error while the samples are read (here a KeyError, as a damaged heap gives) is the
    reader's one-line error, both when the file is opened and later."""
    path = files.write_nwb(tmp_path / "cell.nwb", [{"name": "sweep_a", "data": _int16_wave(), "rate": RATE_HZ}])

    import h5py

    real = h5py.File.__getitem__

    def broken(self, name):
        if str(name).endswith("/data"):
            raise KeyError("Unable to synchronously open object (bad heap free list)")
        return real(self, name)

    monkeypatch.setattr(h5py.File, "__getitem__", broken)
    with pytest.raises(RecordingError) as err:
        open_recording(path)
    line = err.value.one_line()
    assert "\n" not in line and str(path) in line and "bad heap free list" in line
