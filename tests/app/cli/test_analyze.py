"""``upstroke analyze``: the beats CSV, exit codes, atomic output, options; real files where present."""

from __future__ import annotations

import csv
import io
import os

import numpy as np
import pytest

from analysis import CSV_COLUMNS
from analysis.settings import Settings, save_settings
from app.cli import main
from tests import recording_files as files
from tests.analysis.beat_traces import gaussian_train

FS = 10_000.0


def _analyze(capsys, *args):
    code = main(["analyze", *map(str, args)])
    out, err = capsys.readouterr()
    return code, out, err


def _cell(tmp_path, name="cell.abf", duration_s=3.0, units="mV", sweeps=1):
    v, centres = gaussian_train(FS, duration_s, cl_s=0.5)
    return files.write_abf1(tmp_path / name, np.tile(v, (sweeps, 1)), FS, units=units), centres  # pyabf's writer


def _rows(path):
    with open(path, newline="") as fh:
        return list(csv.DictReader(fh))


def test_writes_the_beats_csv_and_a_summary(tmp_path, capsys):
    path, centres = _cell(tmp_path)
    out_csv = tmp_path / "beats.csv"
    code, out, err = _analyze(capsys, path, "--csv", out_csv)
    assert code == 0, err
    with open(out_csv, newline="") as fh:
        header = next(csv.reader(fh))
    # CONTRACT.md's header, in order, then the review's columns (docs/measurements.md).
    assert header == [*CSV_COLUMNS, "verdict", "reject_reason", "decided_by", "recording_id"]
    rows = _rows(out_csv)
    assert len(rows) == len(centres)  # one row per beat built in
    assert rows[0]["file"] == str(path) and rows[0]["beat"] == "0" and rows[0]["accepted"] == "1"
    assert rows[0]["mdp_mV"] == "" and rows[0]["cl_ms"] == ""  # first beat: empty, never 0 (CONTRACT.md)
    assert float(rows[1]["cl_ms"]) == pytest.approx(500.0, abs=0.05)  # construction (int16 steps of the ABF)
    n = len(centres)
    assert f"{path}: {n} beats ({n} used, 0 rejected, 0 waiting for review)" in out
    assert "mean CL 500.0 ms (120.0 bpm)" in out  # 60000 / 500 ms: the rate agrees with the CL printed
    from analysis.recording import file_sha256

    digest = file_sha256(path)
    assert digest == __import__("hashlib").sha256(path.read_bytes()).hexdigest()  # hashlib reference
    assert {r["recording_id"] for r in rows} == {digest[:16]}
    assert {(r["verdict"], r["decided_by"], r["reject_reason"]) for r in rows} == {("accepted", "auto", "")}
    assert f"wrote {out_csv}" in out


def test_each_output_has_one_temporary_file_beside_it(tmp_path, capsys, monkeypatch):
    """All three outputs are written straight into the temporary files the command moves into
    place: none is wrapped in a second temporary file, which a kill between the two moves would
    strand under a name the next run does not clean up (common practice, no source)."""
    import tempfile

    import analysis.results._atomic

    path, _ = _cell(tmp_path)
    made = []
    real_mkstemp = tempfile.mkstemp

    def recording_mkstemp(*a, **kw):
        fd, name = real_mkstemp(*a, **kw)
        made.append(name)
        return fd, name

    monkeypatch.setattr(analysis.results._atomic.tempfile, "mkstemp", recording_mkstemp)
    targets = [tmp_path / "beats.csv", tmp_path / "summary.csv", tmp_path / "results.h5"]
    code, _, err = _analyze(capsys, path, "--csv", targets[0], "--summary-csv", targets[1], "--out", targets[2])
    assert code == 0, err
    prefixes = sorted(f".{t.name}.tmp-{os.getpid()}-" for t in targets)
    assert sorted(os.path.basename(m)[: len(p)] for m, p in zip(sorted(made), prefixes)) == prefixes
    assert not [m for m in made if os.path.exists(m)]
    assert sorted(p.name for p in tmp_path.iterdir() if p.name.startswith(".")) == []


def test_several_files_go_into_one_table_labelled_as_given(tmp_path, capsys, monkeypatch):
    monkeypatch.chdir(tmp_path)
    _cell(tmp_path, "a.abf")
    _cell(tmp_path, "b.abf", duration_s=2.0)
    code, _, err = _analyze(capsys, "a.abf", "b.abf", "--csv", "all.csv")
    assert code == 0, err
    labels = [r["file"] for r in _rows(tmp_path / "all.csv")]
    assert labels[0] == "a.abf" and labels[-1] == "b.abf" and labels == sorted(labels)


def test_ljp_option_shifts_potentials_only(tmp_path, capsys):
    path, _ = _cell(tmp_path)
    _analyze(capsys, path, "--csv", tmp_path / "plain.csv")
    _analyze(capsys, path, "--ljp", "15", "--csv", tmp_path / "ljp.csv")
    plain, ljp = _rows(tmp_path / "plain.csv"), _rows(tmp_path / "ljp.csv")
    assert float(ljp[1]["mdp_mV"]) == pytest.approx(float(plain[1]["mdp_mV"]) - 15.0, abs=0.002)  # V_true = V - LJP
    assert ljp[1]["apd90_ms"] == plain[1]["apd90_ms"]


def test_settings_file_and_sweeps(tmp_path, capsys):
    path, centres = _cell(tmp_path, sweeps=4)
    toml = tmp_path / "s.toml"
    save_settings(Settings().replace("measurement.apd_reference", "peak"), toml)
    code, _, err = _analyze(capsys, path, "--settings", toml, "--sweeps", "1-2", "--csv", tmp_path / "o.csv")
    assert code == 0, err
    rows = _rows(tmp_path / "o.csv")
    assert sorted({r["sweep"] for r in rows}) == ["1", "2"] and len(rows) == 2 * len(centres)
    apd90_from_peak = 0.025 * np.sqrt(-np.log(0.1)) * 1e3  # Gaussian beat: w sqrt(-ln 0.1) after its peak
    assert float(rows[1]["apd90_ms"]) == pytest.approx(apd90_from_peak, abs=0.05)


@pytest.mark.parametrize(
    "args, words",
    [
        (["--sweeps", "3-1"], "--sweeps"),
        (["--units", "0:mV"], "CHANNEL=UNITS"),
        (["--ljp", "x"], "--ljp"),
        (["--workers", "0"], "at least 1 worker"),
        (["--workers", "two"], "not a whole number"),
    ],
)
def test_bad_command_lines_exit_2(tmp_path, capsys, args, words):
    path, _ = _cell(tmp_path)
    with pytest.raises(SystemExit) as exc:
        main(["analyze", str(path), *args, "--csv", str(tmp_path / "o.csv")])
    assert exc.value.code == 2
    assert words in capsys.readouterr().err
    assert not (tmp_path / "o.csv").exists()


def test_bad_inputs_exit_2_with_one_line_and_write_nothing(tmp_path, capsys):
    good, _ = _cell(tmp_path)
    out_csv = tmp_path / "beats.csv"
    assert _analyze(capsys, good, "--csv", out_csv)[0] == 0
    before = out_csv.read_bytes()
    for args in (
        [tmp_path / "missing.abf"],
        [good, tmp_path / "missing.abf"],  # a later file fails: the good CSV stays as it was
        [good, "--settings", tmp_path / "none.toml"],
        [good, "--channel", "7"],
        [good, "--sweeps", "9"],
    ):
        code, out, err = _analyze(capsys, *args, "--csv", out_csv)
        assert code == 2, args
        assert err.count("\n") == 1 and err.startswith("upstroke analyze: ") and "Traceback" not in err
        assert out_csv.read_bytes() == before
    assert [p.name for p in tmp_path.iterdir() if p.name.startswith(".beats.csv")] == []  # no temporary left


def test_voltage_clamp_channel_exit_2(tmp_path, capsys):
    path, _ = _cell(tmp_path, units="pA")
    code, _, err = _analyze(capsys, path, "--csv", tmp_path / "o.csv")
    assert code == 2 and "is in pA" in err and "--units 0=mV" in err
    assert not (tmp_path / "o.csv").exists()
    code, _, err = _analyze(capsys, path, "--units", "0=mV", "--csv", tmp_path / "o.csv")
    assert code == 0 and "overridden (pA -> mV)" in err
    assert len(_rows(tmp_path / "o.csv")) > 0


def test_output_folder_must_exist(tmp_path, capsys):
    path, _ = _cell(tmp_path)
    code, _, err = _analyze(capsys, path, "--csv", tmp_path / "nowhere" / "o.csv")
    assert code == 2 and "output folder does not exist" in err


# -- real recordings (../shared/real-abf) ---------------------------------------------------------
@pytest.mark.realdata
def test_real_multichannel_file_says_which_channel(real_abf_dir, tmp_path, capsys):
    code, out, err = _analyze(capsys, real_abf_dir / "16d22006_kim_gapfree.abf", "--csv", tmp_path / "o.csv")
    assert code == 0 and "analysed channel 1 (IN 3, mV)" in err  # dB | mV channels (MANIFEST.csv)


@pytest.mark.realdata
def test_real_mislabelled_units_exit_2_then_analyse_with_override(real_abf_dir, tmp_path, capsys):
    path = real_abf_dir / "opto_aps_bad_units.abf"  # APs stored as pA (README.md there)
    code, _, err = _analyze(capsys, path, "--csv", tmp_path / "o.csv")
    assert code == 2 and "--units 0=mV" in err and not (tmp_path / "o.csv").exists()
    code, out, err = _analyze(capsys, path, "--units", "0=mV", "--csv", tmp_path / "o.csv")
    # Its 1-2 ms events are bridged as spikes or rejected as narrow (test_pipeline.py checks them).
    assert code == 0 and (tmp_path / "o.csv").exists() and "overridden (pA -> mV)" in err


@pytest.mark.realdata
def test_real_1_khz_file_gets_the_dvdt_warning(real_abf_dir, tmp_path, capsys):
    code, out, err = _analyze(capsys, real_abf_dir / "File_axon_2.abf", "--csv", tmp_path / "o.csv")
    assert code == 0 and "dV/dt max cannot be trusted" in err and "1 kHz" in err  # 1 kHz (MANIFEST.csv)
    assert len(list(csv.reader(io.StringIO((tmp_path / "o.csv").read_text())))) > 1


class _Terminal(io.StringIO):
    def isatty(self) -> bool:
        return True


def test_a_progress_bar_on_a_terminal_only(tmp_path):
    """tqdm draws on a terminal and stays silent on a pipe or file (tqdm's disable=None)."""
    import argparse

    from app.cli.analyze import analyse_files

    path, centres = _cell(tmp_path)
    args = argparse.Namespace(files=[str(path)], units=[], channel=None, sweeps=None, workers=1)
    terminal, pipe = _Terminal(), io.StringIO()
    (on_terminal,) = analyse_files(args, Settings(), stream=terminal)
    (on_pipe,) = analyse_files(args, Settings(), stream=pipe)
    drawn = terminal.getvalue()
    assert drawn.startswith(f"\r{path.name}:") and "%|" in drawn and pipe.getvalue() == ""
    assert drawn.endswith("\r") and drawn.rsplit("\r", 2)[-2].strip() == ""  # cleared when the file is done
    assert len(on_terminal.beats) == len(on_pipe.beats) == len(centres)  # one row per beat built in


# -- the review's view: beats held for review, conditions that must make sense -------------------
def _noisy_cell(tmp_path):
    """A 6 s train whose last 2 s carry 3 mV rms of noise: the quality rules flag those beats noisy
    (quality.noise_max_mV_rms, 1 mV by default) and hold them for review."""
    v, centres = gaussian_train(FS, 6.0, cl_s=0.5)
    rng = np.random.default_rng(5)
    noisy = np.arange(v.size) >= int(4.0 * FS)
    v = v + np.where(noisy, rng.normal(0.0, 3.0, v.size), 0.0)
    return files.write_abf1(tmp_path / "noisy.abf", v[None, :], FS), centres


def test_beats_waiting_for_review_are_counted_and_left_out_of_the_summary(tmp_path, capsys):
    path, _ = _noisy_cell(tmp_path)
    beats, summary = tmp_path / "beats.csv", tmp_path / "summary.csv"
    code, out, err = _analyze(capsys, path, "--condition", "all=0s-end,steady=all", "--csv", beats,
                              "--summary-csv", summary)
    assert code == 0, err
    rows = _rows(beats)
    waiting = [r for r in rows if r["verdict"] == "to_review"]
    assert waiting and all("noisy" in r["flags"].split(";") for r in waiting)
    assert all(r["accepted"] == "0" and r["decided_by"] == "auto" and r["reject_reason"] == "" for r in waiting)
    assert all(float(r["t_upstroke_s"]) > 3.9 for r in waiting)  # only the noisy stretch (construction)
    used = [r for r in rows if r["verdict"] == "accepted"]
    assert f"{len(rows)} beats ({len(used)} used, 0 rejected, {len(waiting)} waiting for review)" in out
    assert f"{len(waiting)} beat(s) wait for review, flagged noisy" in err
    (s,) = _rows(summary)
    clean = [r for r in used if "no_diastole" not in r["flags"] and "truncated" not in r["flags"]]
    assert int(s["n_beats"]) == len(rows) and int(s["n_to_review"]) == len(waiting)
    assert int(s["n_used"]) == len(clean) and int(s["n_rejected"]) == 0
    # The mean is that of the beats used, computed here with numpy from the CSV (numpy reference).
    assert float(s["mdp_mean_mV"]) == pytest.approx(np.mean([float(r["mdp_mV"]) for r in clean]), abs=1e-3)


@pytest.mark.parametrize("condition, words", [
    ("drug=0-60", "has no unit; write drug=0s-60s"),
    ("washout=2-end", "has no unit; write washout=2s-end"),
])
def test_a_condition_without_a_unit_is_refused_with_the_right_form(tmp_path, capsys, condition, words):
    path, _ = _cell(tmp_path)
    out_csv = tmp_path / "beats.csv"
    with pytest.raises(SystemExit) as stop:  # a command-line error: argparse's exit
        _analyze(capsys, path, "--condition", condition, "--csv", out_csv)
    err = capsys.readouterr().err
    assert stop.value.code == 2 and words in err
    assert not out_csv.exists()


@pytest.mark.parametrize("condition, words", [
    ("washout=5s-end", "condition 'washout' starts at 5 s, when the recording has ended (3 s)"),
    ("drug=1-10s", "condition 'drug' ends at 10 s, after the recording ends (3 s); end it by 3 s, or write drug=1s-end"),
    ("late=sweeps:2-3", "names sweep 2, but the recording has sweeps 0-0"),
])
def test_a_condition_outside_the_recording_exits_2_and_writes_nothing(tmp_path, capsys, condition, words):
    path, _ = _cell(tmp_path)  # 3 s, one sweep
    out_csv, out_h5 = tmp_path / "beats.csv", tmp_path / "results.h5"
    code, _, err = _analyze(capsys, path, "--condition", condition, "--csv", out_csv, "--out", out_h5)
    assert code == 2, err
    assert words in err and str(path) in err and len(err.strip().splitlines()) == 1
    assert not out_csv.exists() and not out_h5.exists() and os.listdir(tmp_path) == [path.name]


def test_every_front_end_writes_the_same_review_columns(tmp_path, capsys):
    # The beats CSV straight from the analysis, through a results file, from export, and as the app
    # writes it (the session's table, File > Export beats CSV): the same bytes, the same recording id.
    from analysis.session import Session

    path, _ = _noisy_cell(tmp_path)
    plain, via, exported = tmp_path / "plain.csv", tmp_path / "via.csv", tmp_path / "export.csv"
    assert _analyze(capsys, path, "--csv", plain)[0] == 0
    assert _analyze(capsys, path, "--csv", via, "--out", tmp_path / "r.h5")[0] == 0
    assert main(["export", str(tmp_path / "r.h5"), "--csv", str(exported)]) == 0
    session = Session.open(tmp_path / "r.h5")
    app_text = session.beats(session.recordings[0]).to_csv()
    assert plain.read_text() == via.read_text() == exported.read_text() == app_text
    assert "to_review" in app_text
