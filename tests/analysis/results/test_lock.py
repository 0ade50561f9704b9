"""The results file's write lock: one writer at a time, a waiting writer says so, and gives up in time.

The lock is the kernel's advisory ``flock`` (POSIX; Linux man page flock(2): locks belong to the
open file description, so two opens of one file exclude each other, even in one process, and the
kernel drops a lock when its holder's descriptor closes or the process dies).
"""

from __future__ import annotations

import os
import re
import subprocess
import sys
import threading
import time
from pathlib import Path

import pytest

from analysis.results import ResultsBusyError, holder_of, lock_path, results_lock

REPO = Path(__file__).resolve().parents[3]


def test_a_second_writer_waits_for_the_first_and_says_so_once(tmp_path):
    target = tmp_path / "shared.h5"
    said: list[str] = []
    order: list[str] = []
    with results_lock(target):
        assert holder_of(target).startswith(f"pid {os.getpid()}")

        def second() -> None:
            with results_lock(target, wait_s=30, notify=said.append):
                order.append("second")

        t = threading.Thread(target=second)
        t.start()
        time.sleep(0.5)
        order.append("first done")  # the second writer is still waiting here
    t.join(timeout=10)
    assert order == ["first done", "second"]
    assert len(said) == 1 and f"pid {os.getpid()}" in said[0] and "waiting up to 30 s" in said[0]
    assert not os.path.exists(lock_path(target))  # nothing is left beside the results file


def test_a_writer_that_waits_too_long_gives_up_naming_the_holder(tmp_path):
    target = tmp_path / "shared.h5"
    with results_lock(target):
        errors: list[BaseException] = []

        def second() -> None:
            started = time.monotonic()
            try:
                with results_lock(target, wait_s=0.3):
                    pass
            except ResultsBusyError as exc:
                errors.append(exc)
                errors.append(time.monotonic() - started)

        t = threading.Thread(target=second)
        t.start()
        t.join(timeout=10)
    exc, waited = errors
    line = exc.one_line()
    assert f"pid {os.getpid()}" in line and "after 0.3 s" in line and "--lock-wait" in line
    assert 0.3 <= waited < 5


def test_the_holder_takes_its_own_lock_again_without_waiting(tmp_path):
    target = tmp_path / "shared.h5"
    with results_lock(target):
        with results_lock(target, wait_s=0):  # the save inside a command that read the file
            pass
        assert os.path.exists(lock_path(target))  # still held by the outer block
    assert not os.path.exists(lock_path(target))


def test_a_killed_holder_leaves_the_file_free(tmp_path):
    # flock(2): the kernel releases the lock when the holder dies, however it dies.
    target = tmp_path / "shared.h5"
    code = (f"import sys, time; sys.path.insert(0, {str(REPO)!r})\n"
            "from analysis.results import results_lock\n"
            f"with results_lock({str(target)!r}):\n    print('held', flush=True); time.sleep(60)\n")
    child = subprocess.Popen([sys.executable, "-c", code], stdout=subprocess.PIPE, text=True)
    try:
        assert child.stdout.readline().strip() == "held"
        with pytest.raises(ResultsBusyError), results_lock(target, wait_s=0.2):
            pass
        child.kill()
        child.wait(timeout=10)
        with results_lock(target, wait_s=5):
            pass
    finally:
        child.kill()
        child.wait(timeout=10)


@pytest.mark.slow
def test_analyze_exits_2_in_one_line_when_the_file_stays_locked(tmp_path):
    from analysis.synthetic import preset, synthesize, write_abf

    rec = tmp_path / "cell.abf"
    write_abf(synthesize(preset("nodal-like"), duration_s=2.0, fs_hz=10_000.0, seed=4).recording, rec)
    out = tmp_path / "shared.h5"
    env = dict(os.environ, PYTHONPATH=str(REPO))
    with results_lock(out):
        proc = subprocess.run(check=False, args=[sys.executable, "-m", "app.cli", "analyze", str(rec), "--out", str(out),
                               "--lock-wait", "1"], capture_output=True, text=True, env=env, timeout=300)
    assert proc.returncode == 2, proc.stderr
    lines = proc.stderr.strip().splitlines()
    # One notice while waiting, then the contract's one error line (CONTRACT.md, "Exit status").
    assert len(lines) == 2 and "waiting up to 1 s" in lines[0]
    assert re.match(rf"upstroke analyze: {re.escape(str(out))}: is still being written by another process "
                    rf"\(pid {os.getpid()}: .*\) after 1 s; ", lines[1]), lines[1]
    assert not out.exists()
