"""``upstroke info``: real and written recordings described, every bad input refused plainly."""

from __future__ import annotations

import csv
import json
import subprocess
import sys

import numpy as np
import pytest

from app.cli import main
from tests import recording_files as files


def _info(capsys, *args):
    code = main(["info", *map(str, args)])
    out, err = capsys.readouterr()
    return code, out, err


def _abf(tmp_path, name="cell.abf", n=4000):
    t = np.arange(n) / 10_000.0
    return files.write_abf1(tmp_path / name, [-60 + 10 * np.sin(2 * np.pi * 5 * t)], 10_000.0)


@pytest.mark.parametrize("version, sweeps, rate", [("v1", 9, 10_000.0), ("v2", 37, 20_000.0)])
def test_myokit_voltage_clamp_files(capsys, myokit_data_dir, version, sweeps, rate):
    path = myokit_data_dir / "formats" / f"abf-{version}.abf"
    code, out, err = _info(capsys, path)
    assert code == 0
    assert "voltage clamp" in out and "pA" in out  # pA channels: voltage clamp (myokit's files)
    assert "no channel is in current clamp" in err and "mV" in err
    code, out, _ = _info(capsys, path, "--json")
    info = json.loads(out)
    # Sweeps and rate as neo's AxonIO reads these files (see tests/analysis/readers/test_abf.py).
    assert (info["n_sweeps"], info["sampling_rate_hz"]) == (sweeps, rate)
    assert info["channels"] == [{"index": 0, "name": "IN 0", "units": "pA", "clamp_mode": "voltage clamp"}]
    assert info["format"] == "abf" and info["gap_free"] is False


def test_current_clamp_text_and_nwb(capsys, tmp_path):
    csv_path = files.write_text(tmp_path / "cell.csv", "t (ms),Vm (mV)",
                                np.c_[np.arange(3000) * 0.1, np.full(3000, -60.0)], fmt="%.1f")
    code, out, err = _info(capsys, csv_path)
    assert code == 0 and err == ""
    assert "current clamp" in out and "10000 Hz" in out and "3000" in out and "0.3 s" in out
    nwb = files.write_nwb(tmp_path / "cell.nwb", [
        {"name": f"s{k}", "data": np.full(2000, -0.06), "rate": 10_000.0, "starting_time": 2.0 * k}
        for k in range(3)
    ])
    code, out, err = _info(capsys, nwb, "--json")
    info = json.loads(out)
    assert code == 0 and err == ""
    assert info["n_sweeps"] == 3 and info["sweep_starts_s"] == [0.0, 2.0, 4.0]
    assert info["samples_per_sweep"] == [2000] * 3 and info["duration_s"] == pytest.approx(0.6)
    assert info["channels"][0]["units"] == "mV" and info["warnings"] == []


def _bad_inputs(tmp_path):
    """(path, expected message) for each way a file can be wrong."""
    cases = []
    cases.append((tmp_path / "absent.abf", "no such file"))
    (tmp_path / "folder").mkdir()
    cases.append((tmp_path / "folder", "is a folder"))
    (tmp_path / "empty.abf").write_bytes(b"")
    cases.append((tmp_path / "empty.abf", "the file is empty"))
    (tmp_path / "cell.xyz").write_bytes(b"\x01\x02\x03")
    cases.append((tmp_path / "cell.xyz", r"unsupported file type .*\.abf, \.nwb, \.csv"))
    good = _abf(tmp_path, "good.abf")
    cases.append((files.truncated_copy(good, tmp_path / "cut_data.abf", 6144),
                  "declares 4000 samples .* holds only 6144 bytes"))
    cases.append((files.truncated_copy(good, tmp_path / "cut_header.abf", 1000),
                  "ends inside its ABF 1 header"))
    huge = files.patch(files.copy(good, tmp_path / "huge.abf"), files.ABF1_ACQ_LENGTH, "i", 2**31 - 1)
    cases.append((huge, "declares 2147483647 samples"))
    nochan = files.patch(files.copy(good, tmp_path / "nochan.abf"), files.ABF1_N_CHANNELS, "h", 0)
    cases.append((nochan, "no channels"))
    noise = tmp_path / "noise.abf"
    noise.write_bytes(b"ABF2" + np.random.default_rng(3).integers(0, 256, 2000, dtype=np.uint8).tobytes())
    cases.append((noise, "ABF 2 header is corrupt"))
    rows = files.regular_rows(1000, 10_000.0)
    lines = ["time_s,Vm_mV"] + [f"{t:.4f},{v:.3f}" for t, v in rows]

    def text(name, edit):
        edited = list(lines)
        edit(edited)
        path = tmp_path / name
        path.write_text("\n".join(edited) + "\n")
        return path

    cases.append((text("junk.csv", lambda x: x.__setitem__(20, "0.0019,n/a")), "line 21, column 2 holds 'n/a'"))
    cases.append((text("nan.csv", lambda x: x.__setitem__(33, "0.0032,NaN")), "1 NaN or Inf value.*line 34"))
    cases.append((text("inf.csv", lambda x: x.__setitem__(44, "0.0043,-inf")), "NaN or Inf value.*line 45"))
    cases.append((text("gap.csv", lambda x: x.__delitem__(slice(600, 650))), "sampling is irregular.*line 601"))
    cases.append((text("noheader.csv", lambda x: x.__delitem__(0)), "no header line"))
    cases.append((text("nounits.csv", lambda x: x.__setitem__(0, "time_s,Vm")), "column 'Vm' has no units"))
    cases.append((text("timeonly.csv", lambda x: x.__setitem__(0, "time_s")), "no channels"))
    cases.append((text("short.csv", lambda x: x.__delitem__(slice(50, None))), "only 49 samples"))
    (tmp_path / "binary.csv").write_bytes(b"\x00\xff" * 100)
    cases.append((tmp_path / "binary.csv", "not a text file"))
    nwb = files.write_nwb(tmp_path / "full.nwb", [{"name": "cc", "data": np.zeros(5000), "rate": 1e4}])
    cases.append((files.truncated_copy(nwb, tmp_path / "cut.nwb", nwb.stat().st_size // 2), "truncated or corrupt"))
    return cases


def test_every_bad_input_exits_2_with_one_line(capsys, tmp_path):
    import re

    for path, message in _bad_inputs(tmp_path):
        code, out, err = _info(capsys, path)
        assert code == 2, (path, err)
        assert out == ""
        line = err.rstrip("\n")
        assert "\n" not in line and "Traceback" not in line, err  # CONTRACT.md: one line, no traceback
        assert line.startswith(f"upstroke info: {path}: "), line
        assert re.search(message, line), (message, line)
        assert "; " in line  # the fix follows the problem (DEVELOPERS.md: FILE: PROBLEM; FIX)


def test_bad_input_in_a_real_process(tmp_path):
    path = tmp_path / "cut.abf"
    files.truncated_copy(_abf(tmp_path), path, 6144)
    done = subprocess.run([sys.executable, "-m", "app", "info", str(path)], capture_output=True, text=True)
    assert done.returncode == 2 and done.stdout == ""
    assert done.stderr.count("\n") == 1 and "Traceback" not in done.stderr
    assert "declares 4000 samples" in done.stderr


@pytest.mark.realdata
def test_every_real_file(capsys, real_abf_dir):
    with open(real_abf_dir / "MANIFEST.csv", newline="") as fh:
        rows = list(csv.DictReader(fh))
    for row in rows:
        code, out, err = _info(capsys, real_abf_dir / row["file"], "--json")
        assert code == 0, (row["file"], err)
        info = json.loads(out)
        # MANIFEST.csv (pyabf): sweeps and units of every file.
        assert info["n_sweeps"] == int(row["sweeps"]), row["file"]
        assert [c["units"] for c in info["channels"]] == row["units"].split("|"), row["file"]
        has_mV = any(u in ("mV", "V") for u in row["units"].split("|"))
        assert ("no channel is in current clamp" in err) == (not has_mV), row["file"]


@pytest.mark.realdata
def test_real_files_in_real_processes(real_abf_dir):
    for name, expect in (("File_axon_2.abf", "gap-free"), ("sine sweep magnitude 20.abf", "unknown")):
        done = subprocess.run(["upstroke", "info", str(real_abf_dir / name)], capture_output=True, text=True)
        assert done.returncode == 0, done.stderr
        assert expect in done.stdout and "Traceback" not in done.stderr
    done = subprocess.run([sys.executable, "-m", "app", "info", "--json", str(real_abf_dir / "File_axon_2.abf")],
                          capture_output=True, text=True)
    info = json.loads(done.stdout)
    # MANIFEST.csv: 1 sweep of 1 200 000 points at 1000 Hz, i.e. 20 minutes.
    assert info["samples_per_sweep"] == [1_200_000] and info["duration_s"] == pytest.approx(1200.0)


def test_header_text_is_cut_at_its_first_nul_and_stripped_of_control_characters():
    from app.cli.info import clean_text

    # fixed-size ABF header fields are NUL-padded (ABF 1 header layout as pyabf reads it)
    assert clean_text("recorder 10.7\x00\x00\x9a\x01garbage") == "recorder 10.7"
    assert clean_text("  note\x07 \n") == "note"


def test_a_gap_free_abf_reads_as_gap_free_and_its_current_channel_as_injected_current(capsys):
    from pathlib import Path

    from app.cli import main
    from app.cli.info import INJECTED_CURRENT

    path = Path("/work/shared/real-abf/18425108_abf1.abf")
    if not path.is_file():
        pytest.skip("the real ABF corpus is not here")
    # real ABF 1.8 current-clamp recording (read by pyabf): one continuous sweep, an nA channel
    # beside the mV channel
    assert main(["info", str(path)]) == 0
    out = capsys.readouterr().out
    fmt = next(line for line in out.splitlines() if line.startswith("format"))
    assert "read as gap-free" in fmt and "1 (gap-free)" in out
    assert main(["info", "--json", str(path)]) == 0
    info = json.loads(capsys.readouterr().out)
    modes = {c["units"]: c["clamp_mode"] for c in info["channels"]}
    assert modes == {"nA": INJECTED_CURRENT, "mV": "current clamp"}
    assert all(ch.isprintable() for ch in str(info["metadata"].get("creator", "")))
