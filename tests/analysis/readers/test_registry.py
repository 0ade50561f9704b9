"""open_recording: the path checks, the choice of reader, and the units override."""

from __future__ import annotations

import numpy as np
import pytest

import analysis
from analysis import open_recording, supported_extensions
from analysis.errors import InputError, RecordingError
from analysis.readers import READERS
from tests import recording_files as files


def _abf(tmp_path, name="cell.abf"):
    t = np.arange(4000) / 10_000.0
    return files.write_abf1(tmp_path / name, [-60 + 10 * np.sin(2 * np.pi * 5 * t)], 10_000.0)


def test_public_api():
    assert analysis.open_recording is open_recording  # CONTRACT.md: from analysis import open_recording
    assert set(supported_extensions()) == {".abf", ".nwb", ".csv", ".tsv", ".txt"}
    assert [r.name for r in READERS] == ["abf", "nwb", "text"]
    assert issubclass(RecordingError, InputError)


@pytest.mark.parametrize(
    "make, message",
    [
        (lambda p: p / "absent.abf", "no such file"),
        (lambda p: (p / "folder.abf").mkdir() or p / "folder.abf", "is a folder"),
        (lambda p: (p / "empty.abf").write_bytes(b"") or p / "empty.abf", r"empty \(0 bytes\)"),
    ],
)
def test_paths_that_are_not_recordings(tmp_path, make, message):
    path = make(tmp_path)
    with pytest.raises(RecordingError, match=message) as info:
        open_recording(path)
    assert info.value.path == str(path) and info.value.fix


def test_unknown_extension_lists_the_supported_ones(tmp_path):
    path = tmp_path / "cell.xyz"
    path.write_text("time_s,Vm_mV\n0,1\n")  # text content does not make an unknown type readable
    with pytest.raises(RecordingError, match=r"unsupported file type \('.xyz'.*\.abf, \.nwb, \.csv, \.tsv, \.txt"):
        open_recording(path)


def test_signature_wins_over_the_extension(tmp_path):
    abf = _abf(tmp_path)
    renamed = files.copy(abf, tmp_path / "exported.dat")
    rec = open_recording(renamed)
    assert rec.format == "abf"  # ABF signature 'ABF ' (pyabf)
    np.testing.assert_array_equal(rec.sweep(0), open_recording(abf).sweep(0))


def test_every_candidate_failing_says_which_were_tried(tmp_path):
    import h5py

    path = tmp_path / "results.abf"
    with h5py.File(path, "w") as fh:  # an HDF5 file under an ABF name
        fh["x"] = np.zeros(3)
    with pytest.raises(RecordingError) as info:
        open_recording(path)
    text = str(info.value)
    assert "as nwb: is an HDF5 file but not an NWB file" in text
    assert "as abf: is not an ABF file" in text and "\n" not in text


def test_a_wrong_file_with_one_candidate_gets_that_readers_reason(tmp_path):
    path = tmp_path / "notes.abf"
    path.write_text("these are my notes\n")
    with pytest.raises(RecordingError, match=r"is not an ABF file \(it starts with b'thes'"):
        open_recording(path)


def test_units_override_by_index_and_name(tmp_path):
    path = files.write_text(tmp_path / "mislabelled.csv", "time_s,Vm_pA", files.regular_rows(500))
    assert open_recording(path).channels[0].clamp_mode == "voltage clamp"
    for key in (0, "Vm"):
        rec = open_recording(path, units={key: "mV"})
        assert rec.units(0) == "mV" and rec.channels[0].clamp_mode == "current clamp"
        assert rec.current_clamp_channels() == [0]


def test_units_override_errors(tmp_path):
    path = files.write_text(tmp_path / "cell.csv", "time_s,Vm_mV", files.regular_rows(500))
    with pytest.raises(RecordingError, match="no channel 3; choose one of: 0=Vm"):
        open_recording(path, units={3: "mV"})
    with pytest.raises(RecordingError, match="'furlongs' .* not a voltage or a current"):
        open_recording(path, units={0: "furlongs"})
