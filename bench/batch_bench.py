"""Batch benchmark: speed-up of local workers, and peak memory on long recordings.

Prints figures, asserts nothing. Every run measures its own baseline:

1. wall time of ``upstroke batch`` over 24 generated recordings with 1 worker (the baseline) and
   with 2 workers, and the speed-up (time with 1 / time with 2);
2. peak memory while ``upstroke batch`` analyses one long gap-free recording (60 min at 50 kHz by
   default, and 30 min at 20 kHz), against the bounds of 1 GB and 600 MB. Two figures: the
   largest single process (``ru_maxrss`` of the children, from the kernel) and the whole process
   tree (the batch process plus its workers, sampled every 50 ms).

The recordings are generated in a temporary folder (ABF 1, written block by block) and deleted
afterwards. Usage::

    python bench/batch_bench.py              # 24 x 60 s at 20 kHz, then 30 min @ 20 kHz, 60 min @ 50 kHz
    python bench/batch_bench.py --quick      # smaller files, for a smoke run
    python bench/batch_bench.py --skip-long  # the speed-up only
"""

from __future__ import annotations

import argparse
import os
import resource
import shutil
import subprocess
import sys
import tempfile
import threading
import time
from pathlib import Path

REPO = Path(__file__).resolve().parents[1]
sys.path.insert(0, str(REPO))

from tests.batch_recordings import write_long_abf1  # noqa: E402


def _tree_sample(pid: int, cpu_s: dict[int, float]) -> int:
    """The tree's resident memory now (bytes); records each process's CPU seconds in ``cpu_s``."""
    import psutil

    try:
        root = psutil.Process(pid)
        procs = [root, *root.children(recursive=True)]
    except psutil.NoSuchProcess:
        return 0
    total = 0
    for p in procs:
        try:
            total += p.memory_info().rss
            t = p.cpu_times()
            cpu_s[p.pid] = max(cpu_s.get(p.pid, 0.0), t.user + t.system)
        except psutil.NoSuchProcess:
            pass
    return total


def run_measured(args: list[str]) -> tuple[float, int, float, float]:
    """Run ``python -m app ARGS``.

    Returns wall time (s), exit status, peak tree RSS (MB) and the tree's CPU time (s), both
    sampled every 50 ms (so the CPU time misses at most the last 50 ms of each process).
    """
    env = dict(os.environ, PYTHONPATH=str(REPO))
    start = time.perf_counter()
    proc = subprocess.Popen([sys.executable, "-m", "app", *args], env=env,
                            stdout=subprocess.DEVNULL, stderr=subprocess.PIPE)
    peak = [0]
    cpu_s: dict[int, float] = {}
    stop = threading.Event()

    def sample() -> None:
        while not stop.is_set():
            peak[0] = max(peak[0], _tree_sample(proc.pid, cpu_s))
            stop.wait(0.05)

    sampler = threading.Thread(target=sample, daemon=True)
    sampler.start()
    _, err = proc.communicate()
    wall = time.perf_counter() - start
    stop.set()
    sampler.join()
    if proc.returncode != 0:
        sys.stderr.write(err.decode(errors="replace")[-2000:])
    return wall, proc.returncode, peak[0] / 2**20, sum(cpu_s.values())


def children_maxrss_mb() -> float:
    """The largest resident set of any child process waited for so far (Linux reports KiB)."""
    return resource.getrusage(resource.RUSAGE_CHILDREN).ru_maxrss / 1024.0


def speedup(folder: Path, n_files: int, duration_s: float, fs_hz: float) -> None:
    rec_dir = folder / "study"
    rec_dir.mkdir()
    for i in range(n_files):
        write_long_abf1(rec_dir / f"cell{i:02d}.abf", duration_s, fs_hz, seed=i)
    print(f"speed-up: {n_files} recordings of {duration_s:g} s at {fs_hz / 1e3:g} kHz, cpu_count={os.cpu_count()}, "
          f"load average before {os.getloadavg()[0]:.1f}")
    times = {}
    for workers in (1, 2):
        out = folder / f"w{workers}.h5"
        wall, code, tree_mb, cpu = run_measured(["batch", str(rec_dir), "--workers", str(workers), "--out", str(out), "--quiet"])
        times[workers] = wall
        print(f"  --workers {workers}: {wall:7.1f} s wall, {cpu:7.1f} s CPU ({cpu / wall:.2f} cores busy), exit {code}, "
              f"peak tree RSS {tree_mb:6.0f} MB")
    print(f"  speed-up 2 workers vs 1: {times[1] / times[2]:.2f}x (load average after {os.getloadavg()[0]:.1f}; "
          "other programs on the machine take cores from the workers)")
    shutil.rmtree(rec_dir)


def long_file(folder: Path, duration_min: float, fs_hz: float, bound_mb: float) -> None:
    path = folder / f"long-{duration_min:g}min-{fs_hz / 1e3:g}kHz.abf"
    t0 = time.perf_counter()
    write_long_abf1(path, duration_min * 60.0, fs_hz, seed=7)
    size_mb = path.stat().st_size / 2**20
    print(f"long recording: {duration_min:g} min at {fs_hz / 1e3:g} kHz "
          f"({duration_min * 60 * fs_hz / 1e6:.0f} M samples, {size_mb:.0f} MB on disk, written in "
          f"{time.perf_counter() - t0:.0f} s)")
    before = children_maxrss_mb()
    wall, code, tree_mb, cpu = run_measured(["batch", str(path), "--workers", "1", "--out", str(folder / "long.h5"), "--quiet"])
    single = children_maxrss_mb()
    note = "" if single > before else " (no larger than an earlier child's)"
    print(f"  analysed in {wall:.0f} s wall ({cpu:.0f} s CPU), exit {code}")
    print(f"  peak RSS, largest process: {single:6.0f} MB{note}; whole tree (sampled): {tree_mb:6.0f} MB; "
          f"bound {bound_mb:.0f} MB: {'within' if max(single, tree_mb) <= bound_mb else 'OVER'}")
    # upstroke analyze shares the sweep's chunks between every core (forked workers): the whole
    # tree counts, each worker's pages shared with the parent included.
    wall, code, tree_mb, cpu = run_measured(["analyze", str(path), "--csv", str(folder / "long.csv")])
    print(f"  upstroke analyze on every core: {wall:.0f} s wall ({cpu:.0f} s CPU), exit {code}; whole tree "
          f"(sampled): {tree_mb:6.0f} MB; bound {bound_mb:.0f} MB: {'within' if tree_mb <= bound_mb else 'OVER'}")
    path.unlink()


def main() -> None:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--quick", action="store_true", help="small files: a smoke run of the benchmark")
    parser.add_argument("--skip-long", action="store_true", help="measure the speed-up only")
    parser.add_argument("--skip-speedup", action="store_true", help="measure the long recordings only")
    args = parser.parse_args()
    with tempfile.TemporaryDirectory(prefix="upstroke-batch-bench-") as tmp:
        folder = Path(tmp)
        if not args.skip_speedup:
            speedup(folder, 24, 10.0 if args.quick else 60.0, 20_000.0)
        if not args.skip_long:
            if args.quick:
                long_file(folder, 2.0, 20_000.0, 600.0)
            else:
                long_file(folder, 30.0, 20_000.0, 600.0)
                long_file(folder, 60.0, 50_000.0, 1000.0)


if __name__ == "__main__":
    main()
