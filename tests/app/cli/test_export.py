"""``upstroke analyze --out/--summary-csv/--condition`` and ``upstroke export`` (CONTRACT.md)."""

from __future__ import annotations

import csv
import hashlib
import os
import xml.etree.ElementTree as ET

import h5py
import numpy as np
import pytest

from analysis.session import Session
from analysis.synthetic import EAD, Stretch, preset, synthesize
from analysis.synthetic import write_abf
from app.cli import main


@pytest.fixture(scope="module")
def recordings(tmp_path_factory):
    folder = tmp_path_factory.mktemp("recs")
    a = synthesize(preset("nodal-like"), duration_s=20.0, fs_hz=5_000.0, seed=3, noise_mV=0.2,
                   eads=[EAD(4, amplitude_mV=8.0)], stretches=[Stretch(12.0, 40.0, phase4_factor=0.75, ramp_s=4.0)])
    b = synthesize(preset("atrial-like"), duration_s=12.0, fs_hz=5_000.0, seed=4, noise_mV=0.2)
    write_abf(a.recording, folder / "cell07.abf")
    write_abf(b.recording, folder / "cell08.abf")
    return folder


def _run(argv, capsys):
    code = main([str(a) for a in argv])
    out = capsys.readouterr()
    return code, out.out, out.err


def _sha(path):
    return hashlib.sha256(open(path, "rb").read()).hexdigest()


def test_export_reproduces_analyze_byte_for_byte(recordings, tmp_path, capsys, monkeypatch):
    # CONTRACT.md: export of a results file reproduces the CSV that analyze wrote, byte for byte.
    monkeypatch.chdir(recordings)
    code, out, err = _run(
        ["analyze", "cell07.abf", "cell08.abf", "--condition", "baseline=0-8s",
         "--condition", "drug=8s-end,steady=last5s", "--csv", tmp_path / "beats.csv",
         "--summary-csv", tmp_path / "summary.csv", "--out", tmp_path / "results.h5"], capsys)
    assert code == 0, err
    assert "wrote" in out
    code, out, err = _run(["export", tmp_path / "results.h5", "--csv", tmp_path / "b2.csv",
                           "--summary-csv", tmp_path / "s2.csv", "--figures", tmp_path / "figs"], capsys)
    assert code == 0, err
    assert (tmp_path / "beats.csv").read_bytes() == (tmp_path / "b2.csv").read_bytes()
    assert (tmp_path / "summary.csv").read_bytes() == (tmp_path / "s2.csv").read_bytes()
    rows = list(csv.DictReader(open(tmp_path / "beats.csv")))
    assert {r["file"] for r in rows} == {"cell07.abf", "cell08.abf"}  # as given on the command line
    t = np.array([float(r["t_upstroke_s"]) for r in rows if r["file"] == "cell07.abf"])
    conds = [r["condition"] for r in rows if r["file"] == "cell07.abf"]
    assert all(c == ("baseline" if x < 8 else "drug") for x, c in zip(t, conds))
    summary = list(csv.DictReader(open(tmp_path / "summary.csv")))
    assert [(r["file"], r["condition"]) for r in summary] == [
        ("cell07.abf", "baseline"), ("cell07.abf", "drug"), ("cell08.abf", "baseline"), ("cell08.abf", "drug")]
    assert summary[1]["window"] == "last5s"
    assert len({r["settings_hash"] for r in summary}) == 1 and summary[0]["settings_hash"]


def test_figures_are_valid_svg_with_one_dot_per_beat_and_panel(recordings, tmp_path, capsys, monkeypatch):
    monkeypatch.chdir(recordings)
    assert _run(["analyze", "cell07.abf", "--out", tmp_path / "r.h5"], capsys)[0] == 0
    s = Session.open(tmp_path / "r.h5")
    key = s.recordings[0]
    s.reject(key, [2, 3], "bump")
    s.save(tmp_path / "r.h5")
    assert _run(["export", tmp_path / "r.h5", "--figures", tmp_path / "figs"], capsys)[0] == 0
    names = sorted(os.listdir(tmp_path / "figs"))
    assert names == ["01-cell07-time-course.svg"]
    root = ET.parse(tmp_path / "figs" / names[0]).getroot()  # XML parser of the standard library
    ns = "{http://www.w3.org/2000/svg}"
    circles = root.findall(f"{ns}circle")
    b = s.beats(key)
    expected = sum(int(np.isfinite(b[c]).sum()) for c in ("rate_bpm", "apd90_ms", "ddr_mV_per_s", "mdp_mV"))
    assert len(circles) == expected
    assert sum(c.get("fill") == "none" for c in circles) == sum(
        int(np.isfinite(b[c][[2, 3]]).sum()) for c in ("rate_bpm", "apd90_ms", "ddr_mV_per_s", "mdp_mV"))


def test_same_source_is_replaced_and_keeps_its_review(recordings, tmp_path, capsys, monkeypatch):
    monkeypatch.chdir(recordings)
    out = tmp_path / "r.h5"
    assert _run(["analyze", "cell07.abf", "--out", out, "--condition", "baseline=0-12s"], capsys)[0] == 0
    s = Session.open(out)
    s.reject(s.recordings[0], [5], "seal leak")
    s.save(out)
    code, stdout, err = _run(["analyze", "cell07.abf", "--ljp", "-10", "--out", out, "--csv", tmp_path / "b.csv"], capsys)
    assert code == 0, err
    code, stdout, err = _run(["analyze", "cell08.abf", "--out", out], capsys)
    assert code == 0, err
    s = Session.open(out)
    assert [s.label(k) for k in s.recordings] == ["cell07.abf", "cell08.abf"]  # replaced, then added
    key = s.recordings[0]
    assert s.info(key).ljp_mV == -10.0
    assert s.beats(key)["reject_reason"][5] == "seal leak" and s.beats(key)["accepted"][5] == 0
    assert [c.name for c in s.conditions(key)] == ["baseline"]
    rows = list(csv.DictReader(open(tmp_path / "b.csv")))
    assert rows[5]["accepted"] == "0" and rows[6]["condition"] == "baseline"


@pytest.fixture(scope="module")
def good_results(recordings, tmp_path_factory):
    """One results file written by analyze, for the tests that damage a copy of it."""
    path = tmp_path_factory.mktemp("good") / "good.h5"
    cwd = os.getcwd()
    os.chdir(recordings)
    try:
        assert main(["analyze", "cell08.abf", "--out", str(path)]) == 0
    finally:
        os.chdir(cwd)
    return path.read_bytes()


@pytest.mark.parametrize("kind", ["truncated", "corrupt", "foreign", "text"])
def test_bad_results_files_exit_2_and_leave_nothing(recordings, good_results, tmp_path, capsys, monkeypatch, kind):
    monkeypatch.chdir(recordings)
    data = good_results
    bad = tmp_path / "bad.h5"
    if kind == "truncated":
        bad.write_bytes(data[: len(data) // 3])
    elif kind == "corrupt":
        bad.write_bytes(data[:512] + b"\x00" * 4096 + data[512 + 4096:])
    elif kind == "foreign":
        with h5py.File(bad, "w") as f:
            f["some/data"] = np.arange(10)
    else:
        bad.write_text("time,Vm\n0,1\n")
    capsys.readouterr()
    before = _sha(bad)
    outputs = tmp_path / "out"
    outputs.mkdir()
    code, out, err = _run(["export", bad, "--csv", outputs / "b.csv", "--summary-csv", outputs / "s.csv",
                           "--figures", outputs / "figs"], capsys)
    assert code == 2  # CONTRACT.md: wrong input exits 2
    lines = err.strip().splitlines()
    assert len(lines) == 1 and lines[0].startswith(f"upstroke export: {bad}: ") and "Traceback" not in err
    assert os.listdir(outputs) == []
    # analyze --out never replaces a file it cannot read as results, and stops before analysing.
    code, out, err = _run(["analyze", "cell08.abf", "--out", bad, "--csv", outputs / "b.csv"], capsys)
    assert code == 2 and len(err.strip().splitlines()) == 1 and out == ""
    assert _sha(bad) == before and os.listdir(outputs) == []


def test_bad_conditions_and_outputs_are_command_line_errors(recordings, tmp_path, capsys, monkeypatch):
    monkeypatch.chdir(recordings)
    with pytest.raises(SystemExit) as exit_info:
        main(["analyze", "cell08.abf", "--condition", "drug=60-20s", "--out", str(tmp_path / "r.h5")])
    assert exit_info.value.code == 2
    assert "ends" in capsys.readouterr().err
    code, out, err = _run(["analyze", "cell08.abf", "--condition", "a=0-10s", "--condition", "b=5-11s",
                           "--out", tmp_path / "r.h5"], capsys)
    assert code == 2 and "overlap" in err and not (tmp_path / "r.h5").exists()
    code, out, err = _run(["export", tmp_path / "none.h5", "--csv", tmp_path / "b.csv"], capsys)
    assert code == 2 and "no such file" in err and not (tmp_path / "b.csv").exists()
    assert _run(["analyze", "cell08.abf", "--out", tmp_path / "r.h5"], capsys)[0] == 0
    code, out, err = _run(["export", tmp_path / "r.h5", "--csv", tmp_path / "missing" / "b.csv"], capsys)
    assert code == 2 and "folder does not exist" in err
    code, out, err = _run(["export", tmp_path / "r.h5", "--csv", tmp_path / "r.h5"], capsys)
    assert code == 2 and "results file itself" in err


def test_export_without_outputs_lists_the_file(recordings, tmp_path, capsys, monkeypatch):
    monkeypatch.chdir(recordings)
    assert _run(["analyze", "cell07.abf", "cell08.abf", "--out", tmp_path / "r.h5"], capsys)[0] == 0
    code, out, err = _run(["export", tmp_path / "r.h5"], capsys)
    assert code == 0
    assert "2 recording(s)" in out and "cell07.abf:" in out and "cell08.abf:" in out


def test_moved_source_warns_and_still_exports(recordings, tmp_path, capsys, monkeypatch):
    work = tmp_path / "work"
    work.mkdir()
    (work / "cell08.abf").write_bytes((recordings / "cell08.abf").read_bytes())
    monkeypatch.chdir(work)
    assert _run(["analyze", "cell08.abf", "--out", "r.h5", "--csv", "a.csv"], capsys)[0] == 0
    os.remove(work / "cell08.abf")
    code, out, err = _run(["export", "r.h5", "--csv", "b.csv"], capsys)
    assert code == 0
    assert "source recording is missing" in err
    assert (work / "a.csv").read_bytes() == (work / "b.csv").read_bytes()
