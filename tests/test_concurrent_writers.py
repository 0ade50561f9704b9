"""Several processes writing one results file at once: every recording is kept.

Four ``upstroke analyze cellN.abf --out shared.h5`` run together, then a ``batch --out`` into the
same file while another ``analyze`` writes it. Each writer reads, adds and replaces the file under
the file's write lock (``analysis.results.results_lock``), so none replaces what another added.
"""

from __future__ import annotations

import os
import subprocess
import sys
from pathlib import Path

import pytest

from analysis.results import load_results

REPO = Path(__file__).resolve().parents[1]
pytestmark = pytest.mark.slow


def _cells(folder: Path, n: int) -> list[Path]:
    from analysis.synthetic import preset, synthesize, write_abf

    paths = []
    for i in range(n):
        path = folder / f"cell{i}.abf"
        write_abf(synthesize(preset("nodal-like"), duration_s=2.0, fs_hz=10_000.0, seed=30 + i).recording, path)
        paths.append(path)
    return paths


def _start(argv: list[str], cwd: Path) -> subprocess.Popen:
    env = dict(os.environ, PYTHONPATH=str(REPO))
    return subprocess.Popen([sys.executable, "-m", "app.cli", *argv], cwd=cwd, env=env,
                            stdout=subprocess.PIPE, stderr=subprocess.PIPE, text=True)


def _finish(procs: list[subprocess.Popen]) -> list[tuple[int, str, str]]:
    return [(p.wait(timeout=600), p.stdout.read(), p.stderr.read()) for p in procs]


def test_four_concurrent_analyze_keep_all_four_recordings(tmp_path):
    cells = _cells(tmp_path, 4)
    out = tmp_path / "shared.h5"
    done = _finish([_start(["analyze", str(c), "--out", str(out)], tmp_path) for c in cells])
    for status, stdout, stderr in done:
        assert status == 0, stderr
        assert f"wrote {out}" in stdout
    kept = sorted(os.path.basename(r.source_path) for r in load_results(out, verify_sources=False).recordings)
    assert kept == [f"cell{i}.abf" for i in range(4)]
    assert sorted(os.listdir(tmp_path)) == sorted([*(c.name for c in cells), "shared.h5"])  # no lock or temp left


def test_batch_and_analyze_into_one_file_keep_both(tmp_path):
    cells = _cells(tmp_path, 3)
    folder = tmp_path / "batch"
    folder.mkdir()
    for c in cells[:2]:
        c.rename(folder / c.name)
    out = tmp_path / "shared.h5"
    done = _finish([
        _start(["batch", str(folder), "--out", str(out), "--workers", "1", "--quiet"], tmp_path),
        _start(["analyze", str(cells[2]), "--out", str(out)], tmp_path),
    ])
    for status, _, stderr in done:
        assert status == 0, stderr
    kept = sorted(os.path.basename(r.source_path) for r in load_results(out, verify_sources=False).recordings)
    assert kept == ["cell0.abf", "cell1.abf", "cell2.abf"]


def test_the_app_saving_keeps_what_the_command_line_added_meanwhile(tmp_path):
    # The app's session holds cell0; while it is open, `upstroke analyze cell1 --out` adds cell1
    # to the same file. Saving the session keeps cell1 (issue: "nothing is ever lost"), and a
    # recording the user removed in the app stays removed. The reference is load_results on the
    # saved file.
    from analysis.session import Session

    cells = _cells(tmp_path, 3)
    out = tmp_path / "shared.h5"
    assert _finish([_start(["analyze", str(cells[0]), str(cells[2]), "--out", str(out)], tmp_path)])[0][0] == 0
    app = Session.open(out)
    assert _finish([_start(["analyze", str(cells[1]), "--out", str(out)], tmp_path)])[0][0] == 0
    first, third = app.recordings
    app.reject(first, [0], "noise")  # the app's own edit
    app.remove(third)  # the user takes cell2 out of the study
    app.save(out)
    kept = {os.path.basename(r.source_path): r for r in load_results(out, verify_sources=False).recordings}
    assert sorted(kept) == ["cell0.abf", "cell1.abf"]
    assert [d.reason for d in kept["cell0.abf"].decisions][-1:] == ["noise"]
    # Saved again (cell1 now counts as seen by the app), nothing comes back or goes.
    app.save(out)
    assert sorted(os.path.basename(r.source_path) for r in load_results(out, verify_sources=False).recordings) == ["cell0.abf", "cell1.abf"]
