"""``kill -9`` of ``upstroke batch``: none of its worker processes outlives it.

The workers run in a process pool started from a fork server (``analysis.batch._batch``). A
SIGKILL cannot be caught, so the batch process cannot stop them itself: each worker asks the
kernel for SIGKILL when its parent ends (Linux prctl(2), PR_SET_PDEATHSIG), and the fork server
ends as soon as the batch process is gone (Python's multiprocessing.forkserver: its loop exits
when the pipe from its starter closes).
"""

from __future__ import annotations

import os
import signal
import subprocess
import sys
import time
from pathlib import Path

import pytest

REPO = Path(__file__).resolve().parents[1]
pytestmark = [pytest.mark.slow, pytest.mark.skipif(not sys.platform.startswith("linux"), reason="reads /proc")]


def _children() -> dict[int, list[int]]:
    """Parent id -> child ids of every live (not zombie) process, from /proc (proc(5))."""
    out: dict[int, list[int]] = {}
    for name in os.listdir("/proc"):
        if not name.isdigit():
            continue
        try:
            with open(f"/proc/{name}/stat") as fh:
                stat = fh.read()
        except OSError:
            continue
        fields = stat[stat.rindex(")") + 2:].split()
        if fields[0] != "Z":
            out.setdefault(int(fields[1]), []).append(int(name))
    return out


def _descendants(pid: int) -> set[int]:
    tree, found, todo = _children(), set(), [pid]
    while todo:
        for child in tree.get(todo.pop(), []):
            if child not in found:
                found.add(child)
                todo.append(child)
    return found


def _alive(pid: int) -> bool:
    try:
        with open(f"/proc/{pid}/stat") as fh:
            stat = fh.read()
    except OSError:
        return False
    return stat[stat.rindex(")") + 2] != "Z"


@pytest.fixture(scope="module")
def folder(tmp_path_factory) -> Path:
    from analysis.synthetic import preset, synthesize, write_abf

    folder = tmp_path_factory.mktemp("cells")
    syn = synthesize(preset("nodal-like"), duration_s=240.0, fs_hz=10_000.0, seed=60)
    for i in range(6):  # long enough that every worker is busy when the batch is killed
        write_abf(syn.recording, folder / f"cell{i}.abf")
    return folder


@pytest.mark.parametrize("trial", range(3))
def test_sigkill_of_batch_leaves_no_worker_alive(tmp_path, folder, trial):
    workers: set[int] = set()
    env = dict(os.environ, PYTHONPATH=str(REPO))
    proc = subprocess.Popen(
        [sys.executable, "-m", "app.cli", "batch", str(folder), "--out", str(tmp_path / "out.h5"),
         "--workers", "2", "--quiet"],
        env=env, stdout=subprocess.DEVNULL, stderr=subprocess.DEVNULL,
    )
    try:
        deadline = time.monotonic() + 120
        while time.monotonic() < deadline and len(workers) < 3:  # the fork server and two workers
            time.sleep(0.2)
            workers = _descendants(proc.pid)
        assert len(workers) >= 3, f"the batch started only {len(workers)} processes"
        time.sleep(0.5 + 0.5 * trial)  # kill at a few moments of the work
        workers = _descendants(proc.pid)
        os.kill(proc.pid, signal.SIGKILL)
        proc.wait(timeout=10)
        time.sleep(2.0)  # the bound: nothing may be left a moment later
        left = sorted(p for p in workers if _alive(p))
        what = {p: Path(f"/proc/{p}/cmdline").read_bytes().replace(b"\0", b" ")[:150] for p in left}
        assert not left, f"processes still running 2 s after kill -9 of batch: {what}"
        assert not (tmp_path / "out.h5").exists()
    finally:
        for pid in workers | _descendants(proc.pid) | {proc.pid}:  # only this test's processes
            try:
                os.kill(pid, signal.SIGKILL)
            except OSError:
                pass
        proc.wait(timeout=10)
