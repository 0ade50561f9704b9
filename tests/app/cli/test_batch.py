"""``upstroke batch``: the same results as ``upstroke analyze``, failures listed, Ctrl-C writes nothing."""

from __future__ import annotations

import os
import signal
import subprocess
import sys
import time
from pathlib import Path

import pytest

from app.cli import main
from tests.batch_recordings import beating_trace, write_abf1, write_long_abf1, write_text

FS_HZ = 10_000.0
REPO = Path(__file__).resolve().parents[3]


@pytest.fixture(scope="module")
def folder(tmp_path_factory):
    """Four recordings in two subfolders (ABF and text), and one broken file between them."""
    root = tmp_path_factory.mktemp("cells")
    (root / "day1").mkdir()
    (root / "day2").mkdir()
    for i, rel in enumerate(["day1/cell01.abf", "day1/cell02.csv", "day2/cell04.abf", "day2/cell05.abf"]):
        v, _ = beating_trace(4.0 + i, FS_HZ, cl_ms=400.0 + 40 * i, seed=10 + i)
        (write_abf1 if rel.endswith(".abf") else write_text)(root / rel, v, FS_HZ)
    (root / "day1" / "cell03.abf").write_bytes(b"")  # an empty file: the copy failed
    return root


def _good(folder):
    return [str(folder / r) for r in ["day1/cell01.abf", "day1/cell02.csv", "day2/cell04.abf", "day2/cell05.abf"]]


def test_batch_with_two_workers_writes_what_analyze_writes(folder, tmp_path, capsys):
    from analysis.results import load_results

    good = _good(folder)
    a, b = tmp_path / "analyze", tmp_path / "batch"
    a.mkdir()
    b.mkdir()
    assert main(["analyze", *good, "--out", str(a / "r.h5"), "--csv", str(a / "beats.csv"),
                 "--summary-csv", str(a / "summary.csv"), "--condition", "early=0-2s"]) == 0
    code = main(["batch", *good, "--workers", "2", "--out", str(b / "r.h5"), "--csv", str(b / "beats.csv"),
                 "--summary-csv", str(b / "summary.csv"), "--condition", "early=0-2s"])
    out, err = capsys.readouterr()
    assert code == 0, err
    # The one-line result counts what the beats CSV says of each beat.
    import csv

    with open(b / "beats.csv", newline="") as fh:
        rows = list(csv.DictReader(fh))
    n_used = sum(r["verdict"] == "accepted" for r in rows)
    assert n_used == sum(r["accepted"] == "1" for r in rows)
    n_rej, n_wait = (sum(r["verdict"] == v for r in rows) for v in ("rejected", "to_review"))
    assert f"{len(rows)} beats ({n_used} used, {n_rej} rejected, {n_wait} waiting for review) saved to" in out
    # Byte for byte the same tables (the reference is the sequential command itself).
    assert (b / "beats.csv").read_bytes() == (a / "beats.csv").read_bytes()
    assert (b / "summary.csv").read_bytes() == (a / "summary.csv").read_bytes()
    ra, rb = load_results(a / "r.h5").recordings, load_results(b / "r.h5").recordings
    assert [r.label for r in rb] == [r.label for r in ra] == good
    for x, y in zip(ra, rb):
        assert x.beats.equals(y.beats) and x.settings_json == y.settings_json and x.sha256 == y.sha256
        # The recording id: the first 16 hex digits of the file's SHA-256 (hashlib reference).
        digest = __import__("hashlib").sha256(Path(x.source_path).read_bytes()).hexdigest()
        assert {r["recording_id"] for r in rows if r["file"] == x.label} == {digest[:16]}
        assert [c.text() for c in x.conditions] == [c.text() for c in y.conditions] == ["early=0-2s"]


def test_a_failing_file_in_the_middle_is_listed_the_rest_saved_exit_2(folder, tmp_path, capsys):
    from analysis.results import load_results

    out = tmp_path / "r.h5"
    code = main(["batch", str(folder), "--workers", "2", "--out", str(out), "--quiet"])
    err = capsys.readouterr().err
    bad = str(folder / "day1" / "cell03.abf")
    assert code == 2  # CONTRACT.md: exit 2 when the input is wrong
    assert "1 of 5 file(s) failed" in err and f"  {bad}: the file is empty" in err
    assert "Traceback" not in err
    assert [r.label for r in load_results(out).recordings] == _good(folder)  # folder order, sorted


def test_nothing_found_is_one_line_and_exit_2(tmp_path, capsys):
    (tmp_path / "notes.txt").write_text("not a recording\n")
    (tmp_path / "empty").mkdir()
    assert main(["batch", str(tmp_path / "empty"), "--out", str(tmp_path / "r.h5")]) == 2
    err = capsys.readouterr().err.strip()
    assert err.startswith("upstroke batch: no recordings found in ") and len(err.splitlines()) == 1
    assert not (tmp_path / "r.h5").exists()


def test_scheduler_without_the_cluster_extra_says_what_to_install(folder, tmp_path, capsys, monkeypatch):
    monkeypatch.setitem(sys.modules, "dask.distributed", None)  # as if dask were not installed
    assert main(["batch", str(folder), "--out", str(tmp_path / "r.h5"), "--scheduler", "tcp://127.0.0.1:8786"]) == 2
    assert 'pip install "upstroke[cluster]"' in capsys.readouterr().err
    assert not (tmp_path / "r.h5").exists()


def test_a_reviewed_recording_is_not_replaced_by_a_batch(folder, tmp_path, capsys):
    from analysis.session import Session

    out = tmp_path / "r.h5"
    first = _good(folder)[0]
    assert main(["analyze", first, "--out", str(out)]) == 0
    session = Session.open(out)
    session.reject(session.recordings[0], [1], "electrode bump")
    session.save(out)
    before = out.read_bytes()
    assert main(["batch", str(folder), "--out", str(out), "--quiet"]) == 2
    assert "review decision(s)" in capsys.readouterr().err
    assert out.read_bytes() == before  # CONTRACT.md: a failed command never overwrites a good file


@pytest.mark.slow
def test_ctrl_c_mid_batch_leaves_no_results_file(tmp_path):
    # Files long enough (2 min each) that a batch on a quick machine is still running when the
    # first one is done.
    for i in range(12):
        write_long_abf1(tmp_path / f"cell{i:02d}.abf", 120.0, 10_000.0, seed=i)
    out = tmp_path / "r.h5"
    env = dict(os.environ, PYTHONPATH=str(REPO))
    proc = subprocess.Popen(
        [sys.executable, "-m", "app", "batch", str(tmp_path), "--workers", "2", "--out", str(out),
         "--csv", str(tmp_path / "b.csv")],
        stderr=subprocess.PIPE, stdout=subprocess.PIPE, env=env, cwd=tmp_path,
    )
    seen = b""
    deadline = time.monotonic() + 240
    while b"1/12" not in seen and proc.poll() is None and time.monotonic() < deadline:
        seen += os.read(proc.stderr.fileno(), 4096)  # the progress bar: at least one file done
    assert b"1/12" in seen and b"12/12" not in seen, seen.decode(errors="replace")
    proc.send_signal(signal.SIGINT)
    _, rest = proc.communicate(timeout=120)
    assert proc.returncode == 130, (seen + rest).decode(errors="replace")
    assert b"interrupted; no output was written" in rest
    leftovers = sorted(p.name for p in tmp_path.iterdir() if not p.name.endswith(".abf"))
    assert leftovers == []  # neither r.h5, b.csv nor a temporary file


@pytest.mark.slow
def test_batch_on_a_local_dask_cluster_writes_what_analyze_writes(folder, tmp_path, capsys):
    distributed = pytest.importorskip("dask.distributed")
    good = _good(folder)
    assert main(["analyze", *good, "--csv", str(tmp_path / "a.csv")]) == 0
    with distributed.LocalCluster(
        n_workers=2, threads_per_worker=1, processes=True, host="127.0.0.1", dashboard_address=None,
    ) as cluster:
        code = main(["batch", *good, "--scheduler", cluster.scheduler_address, "--out", str(tmp_path / "r.h5"),
                     "--csv", str(tmp_path / "b.csv"), "--quiet"])
    assert code == 0, capsys.readouterr().err
    assert (tmp_path / "b.csv").read_bytes() == (tmp_path / "a.csv").read_bytes()


@pytest.mark.parametrize("extra, words", [
    (["--workers", "0"], "give at least 1 worker"),
    (["--workers", "2", "--scheduler", "tcp://127.0.0.1:8786"], "not allowed with argument"),
])
def test_wrong_worker_options_are_command_line_errors(folder, tmp_path, capsys, extra, words):
    with pytest.raises(SystemExit) as info:
        main(["batch", str(folder), "--out", str(tmp_path / "r.h5"), *extra])
    assert info.value.code == 2 and words in capsys.readouterr().err
    assert not (tmp_path / "r.h5").exists()
