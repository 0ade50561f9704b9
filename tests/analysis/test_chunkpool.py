"""Chunks worked on forked processes give the same results as one process (analysis.chunkpool).

The reference is the same computation in one process: the pool may change only where the work
runs, never a byte of what comes out (common practice, no source).
"""

from __future__ import annotations

import io
import os
import sys
from pathlib import Path

import pytest

from analysis import chunkpool, open_recording
from analysis.chunkpool import run_ordered, use_workers
from analysis.errors import InputError, SettingsError
from analysis.pipeline import analyze
from analysis.settings import Settings

linux_only = pytest.mark.skipif(not sys.platform.startswith("linux"), reason="chunks are forked on Linux only")
SAMPLE = Path(__file__).resolve().parents[2] / "sample_data" / "NL-0417_gapfree.abf"


def _where(i: int) -> tuple[int, int]:
    return i, os.getpid()


@linux_only
def test_results_come_back_in_order_and_some_from_other_processes():
    order = []
    with use_workers(2):
        out = run_ordered(_where, 12, on_result=lambda i, r: order.append(i))
    assert [i for i, _ in out] == list(range(12)) and order == list(range(12))
    pids = {pid for _, pid in out}
    assert os.getpid() in pids and len(pids) == 2  # this process took the first share, a child the rest


def test_one_worker_or_few_chunks_stay_in_this_process():
    with use_workers(1):
        assert {pid for _, pid in run_ordered(_where, 8)} == {os.getpid()}
    with use_workers(4):  # 3 chunks cannot give 2 to each of 2 workers
        assert {pid for _, pid in run_ordered(_where, 3)} == {os.getpid()}
    assert chunkpool.workers() == 1  # the context is back to its default


def _fails(i: int):
    if i == 9:
        raise SettingsError("cell.abf", "low-pass corner above the Nyquist frequency", "lower it")
    return i


@linux_only
def test_an_input_error_in_a_worker_reaches_the_caller_whole():
    with use_workers(2), pytest.raises(SettingsError) as err:
        run_ordered(_fails, 12)
    assert err.value.path == "cell.abf" and err.value.fix == "lower it"
    assert str(err.value) == "cell.abf: low-pass corner above the Nyquist frequency; lower it"


def test_input_errors_rebuild_from_their_three_parts():
    # copy.deepcopy rebuilds through __reduce__, as the process pool's transfer does.
    import copy

    e = copy.deepcopy(InputError("a.abf", "is empty", "record again"))
    assert (type(e), e.path, e.problem, e.fix, str(e)) == (InputError, "a.abf", "is empty", "record again",
                                                         "a.abf: is empty; record again")


def _both_ways(rec, settings):
    out = []
    for n in (1, 2):
        result = analyze(rec, settings, workers=n)
        buf = io.StringIO()
        result.beats.to_csv(buf)
        out.append((buf.getvalue(), result.warnings, result.spikes[0].tolist(), result.artefacts[0][0].tolist(),
                    list(result.beats["reject_reason"])))
    return out


@linux_only
@pytest.mark.slow
@pytest.mark.parametrize("suffix", [".abf", ".nwb"])  # a memory map; an HDF5 file opened before the fork
def test_analysis_on_two_processes_is_byte_identical(suffix):
    """The demo recording (hum, drift, electrical spikes, a DAD, a pause, seal trouble) in 10 s
    chunks, so that detection (with its spike spans), measurement and the events all go to the pool."""
    one, two = _both_ways(open_recording(SAMPLE.with_suffix(suffix)), Settings().replace("detection.chunk_s", 10.0))
    assert one == two
    flags = {f for row in one[0].splitlines()[1:] for f in row.split(",")[5].split(";")}
    assert {"dad", "pause", "noisy"} <= flags and len(one[2]) == 3  # the review's catches (sample_data/README.md)


@linux_only
def test_remeasuring_around_an_artefact_on_two_processes_is_byte_identical():
    """Wide electrical artefacts (6 ms, 80 mV) detected as beats and rejected, so that their
    neighbours are measured again (a second pool) with the real beats around them."""
    from analysis.synthetic import Artefact, preset, synthesize

    syn = synthesize(preset("nodal-like"), duration_s=60.0, fs_hz=10_000.0, seed=5, noise_mV=0.3,
                     artefacts=[Artefact(t, 80.0, 60) for t in (12.3, 33.1, 47.6)])
    one, two = _both_ways(syn.recording, Settings().replace("detection.chunk_s", 10.0))
    assert one == two
    assert sum(r.startswith("auto: artefact") for r in one[4]) >= 1


_ORPHAN_SCRIPT = """
import os, sys, time
from analysis.chunkpool import run_ordered, use_workers

def task(i):
    with open(os.path.join(sys.argv[1], f"{os.getpid()}.pid"), "w"):
        pass
    time.sleep(0.5)
    return i

with use_workers(2):
    run_ordered(task, 40)
"""


@linux_only
def test_workers_die_with_their_parent(tmp_path):
    """kill -9 of the parent takes its workers with it (Linux's parent-death signal, prctl(2))."""
    import signal
    import subprocess
    import time

    repo = Path(__file__).resolve().parents[2]
    proc = subprocess.Popen([sys.executable, "-c", _ORPHAN_SCRIPT, str(tmp_path)], cwd=repo,
                            env=dict(os.environ, PYTHONPATH=str(repo)))
    deadline = time.monotonic() + 30
    while len(list(tmp_path.glob("*.pid"))) < 2 and time.monotonic() < deadline:
        time.sleep(0.05)
    pids = {int(p.stem) for p in tmp_path.glob("*.pid")} - {proc.pid}
    assert pids, "no worker started"
    proc.send_signal(signal.SIGKILL)
    proc.wait(timeout=30)

    def alive(pid: int) -> bool:
        try:
            with open(f"/proc/{pid}/stat") as fh:
                return fh.read().split(") ")[-1][0] != "Z"  # a zombie has exited
        except FileNotFoundError:
            return False

    while any(alive(p) for p in pids) and time.monotonic() < deadline:
        time.sleep(0.05)
    assert not any(alive(p) for p in pids)


@linux_only
@pytest.mark.slow
@pytest.mark.parametrize("name", ["File_axon_2.abf", "171116sh_0019.abf", "opto_aps_good_units.abf"])
def test_real_recordings_on_two_processes_are_byte_identical(real_abf_dir, name):
    """Recordings from working labs (../shared/real-abf: a gap-free file, 22 sweeps, 3 sweeps),
    in 2 s chunks so that every stage goes to the pool; the reference is one process."""
    one, two = _both_ways(open_recording(real_abf_dir / name), Settings().replace("detection.chunk_s", 2.0))
    assert one == two
    assert one[0].count("\n") > 20  # beats were found, so the comparison covers measured rows


def _dies_in_a_worker(i: int):
    if chunkpool._IN_WORKER:
        os._exit(3)  # as the kernel's out-of-memory killer would end it
    return i, os.getpid()


@linux_only
def test_chunks_of_a_worker_that_died_are_worked_here():
    with use_workers(2):
        out = run_ordered(_dies_in_a_worker, 12)
    assert out == [(i, os.getpid()) for i in range(12)]


@linux_only
def test_no_process_to_be_had_works_every_chunk_here(monkeypatch):
    """fork(2) failing with EAGAIN (a process limit reached): the chunks are worked in this process."""
    import concurrent.futures
    import errno

    class NoProcesses(concurrent.futures.ProcessPoolExecutor):
        def submit(self, *args, **kwargs):
            raise OSError(errno.EAGAIN, "Resource temporarily unavailable")

    monkeypatch.setattr(concurrent.futures, "ProcessPoolExecutor", NoProcesses)
    order = []
    with use_workers(2):
        out = run_ordered(_where, 10, on_result=lambda i, r: order.append(i))
    assert out == [(i, os.getpid()) for i in range(10)] and order == list(range(10))


def test_the_default_is_every_core_up_to_four(monkeypatch):
    """A chunk's arrays per worker (50-100 MB) bound how many the command line starts by itself."""
    for cores, expected in ((1, 1), (2, 2), (4, 4), (64, 4)):
        monkeypatch.setattr(chunkpool, "available_cores", lambda c=cores: c)
        assert chunkpool.default_workers() == expected
