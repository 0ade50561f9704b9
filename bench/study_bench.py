"""Study benchmark: a batch of N short recordings, its results file reopened in the app's session
and in ``upstroke export``, for N = 10, 100 and 1,000.

Prints figures, asserts nothing. Every run measures its own baseline, N = 10, and prints each
figure's ratio to it. For each N:

1. ``upstroke batch`` of the N recordings with 2 local workers: whole-process wall time, peak
   memory of the process tree (sampled every 50 ms), and the CPU time of the batch process itself
   (the parent, which only collects and writes; sampled, so it misses at most the last 50 ms).
   Its CPU per recording is given as the marginal cost, (CPU at N - CPU at 10) / (N - 10), and
   as the raw CPU / N; the target is under 10 ms at N = 1,000.
2. Reopening the results file in the session, as the desktop app does (``Session.open`` and the
   first recording's beats), in a fresh process: whole-process wall time and peak RSS (from the
   kernel), and the time of the open itself, measured inside the process.
3. ``upstroke export RESULTS.h5 --summary-csv`` and ``upstroke export RESULTS.h5 --csv``: whole
   process wall time and peak RSS. These write every recording's rows, so they grow with N.

The recordings (5 s at 10 kHz each, about 11 beats, ABF 1) are generated in a temporary folder
and deleted afterwards. Usage::

    python bench/study_bench.py               # N = 10, 100, 1000
    python bench/study_bench.py --sizes 10 50 # a smoke run
"""

from __future__ import annotations

import argparse
import os
import shutil
import subprocess
import sys
import tempfile
import threading
import time
from pathlib import Path

REPO = Path(__file__).resolve().parents[1]
sys.path.insert(0, str(REPO))

from tests.batch_recordings import beating_trace, write_abf1  # noqa: E402

DURATION_S = 5.0
FS_HZ = 10_000.0
_OPEN_SCRIPT = """
import sys, time
t0 = time.perf_counter()
from analysis.session import Session
t1 = time.perf_counter()
s = Session.open(sys.argv[1])
keys = s.recordings
labels = [s.label(k) for k in keys]
t2 = time.perf_counter()
n = len(s.beats(keys[0]))
t3 = time.perf_counter()
print(f"{len(keys)} {t2 - t1:.4f} {t3 - t2:.4f} {t1 - t0:.4f}")
"""


def _sample_tree(pid: int, peak: list[int], cpu_root: list[float], stop: threading.Event) -> None:
    import psutil

    while not stop.is_set():
        try:
            root = psutil.Process(pid)
            procs = [root, *root.children(recursive=True)]
            t = root.cpu_times()
            cpu_root[0] = max(cpu_root[0], t.user + t.system)
        except psutil.NoSuchProcess:
            break
        total = 0
        for p in procs:
            try:
                total += p.memory_info().rss
            except psutil.NoSuchProcess:
                pass
        peak[0] = max(peak[0], total)
        stop.wait(0.05)


def run(args: list[str], *, sample: bool = False) -> dict:
    """Run ``python ARGS`` in a fresh process: wall time, exit, stdout, kernel peak RSS (MB), and
    with ``sample`` the sampled tree peak (MB) and the root process's own CPU time (s)."""
    env = dict(os.environ, PYTHONPATH=str(REPO))
    start = time.perf_counter()
    proc = subprocess.Popen([sys.executable, *args], env=env, stdout=subprocess.PIPE, stderr=subprocess.PIPE, text=True)
    peak, cpu_root, stop = [0], [0.0], threading.Event()
    sampler = threading.Thread(target=_sample_tree, args=(proc.pid, peak, cpu_root, stop), daemon=True)
    if sample:
        sampler.start()
    out, err = proc.communicate()
    wall = time.perf_counter() - start
    stop.set()
    if sample:
        sampler.join()
    if proc.returncode != 0:
        sys.stderr.write(err[-2000:])
    import resource

    return {"wall": wall, "code": proc.returncode, "out": out, "tree_mb": peak[0] / 2**20, "cpu_root": cpu_root[0],
            "maxrss_mb": resource.getrusage(resource.RUSAGE_CHILDREN).ru_maxrss / 1024.0}


def run_rss(args: list[str]) -> dict:
    """Like :func:`run`, with the process's own peak RSS from the kernel (``wait4``)."""
    env = dict(os.environ, PYTHONPATH=str(REPO))
    start = time.perf_counter()
    proc = subprocess.Popen([sys.executable, *args], env=env, stdout=subprocess.PIPE, stderr=subprocess.DEVNULL, text=True)
    out = proc.stdout.read()
    _, status, usage = os.wait4(proc.pid, 0)
    proc.returncode = os.waitstatus_to_exitcode(status)
    proc.stdout.close()
    return {"wall": time.perf_counter() - start, "code": proc.returncode, "out": out, "rss_mb": usage.ru_maxrss / 1024.0}


def make_recordings(folder: Path, n: int) -> None:
    folder.mkdir()
    for i in range(n):
        v, _ = beating_trace(DURATION_S, FS_HZ, cl_ms=430.0 + (i % 40), seed=i)
        write_abf1(folder / f"NL-{i:04d}.abf", v, FS_HZ)


def measure(folder: Path, n: int) -> dict:
    rec = folder / f"study-{n}"
    t0 = time.perf_counter()
    make_recordings(rec, n)
    made = time.perf_counter() - t0
    out = folder / f"study-{n}.h5"
    batch = run(["-m", "app", "batch", str(rec), "--out", str(out), "--workers", "2", "--quiet"], sample=True)
    opened = run_rss(["-c", _OPEN_SCRIPT, str(out)])
    n_open, t_open, t_first, t_import = (float(x) for x in opened["out"].split())
    summary = run_rss(["-m", "app", "export", str(out), "--summary-csv", str(folder / f"s{n}.csv")])
    beats = run_rss(["-m", "app", "export", str(out), "--csv", str(folder / f"b{n}.csv")])
    size_mb = out.stat().st_size / 2**20
    shutil.rmtree(rec)  # after the reopen, which checks each source's SHA-256 as the app does
    print(f"N = {n}: recordings made in {made:.0f} s; results file {size_mb:.2f} MB; exits "
          f"{batch['code']}/{opened['code']}/{summary['code']}/{beats['code']}", flush=True)
    return {
        "batch_wall": batch["wall"], "batch_tree_mb": batch["tree_mb"], "parent_cpu": batch["cpu_root"],
        "open_wall": opened["wall"], "open_rss": opened["rss_mb"], "open_s": t_open, "first_s": t_first,
        "n_open": n_open, "summary_wall": summary["wall"], "summary_rss": summary["rss_mb"],
        "csv_wall": beats["wall"], "csv_rss": beats["rss_mb"], "size_mb": size_mb,
    }


def main() -> None:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--sizes", type=int, nargs="+", default=[10, 100, 1000], help="the N to measure; the first is the baseline")
    args = parser.parse_args()
    print(f"study benchmark: recordings of {DURATION_S:g} s at {FS_HZ / 1e3:g} kHz, cpu_count={os.cpu_count()}, "
          f"load average before {os.getloadavg()[0]:.1f}", flush=True)
    folder = Path(tempfile.mkdtemp(prefix="upstroke-study-bench-"))
    try:
        results = {n: measure(folder, n) for n in args.sizes}
    finally:
        shutil.rmtree(folder, ignore_errors=True)
    base_n = args.sizes[0]
    base = results[base_n]

    def row(label: str, key: str, unit: str, fmt: str = "{:8.2f}") -> None:
        cells = "  ".join(f"N={n}: {fmt.format(r[key])} {unit} ({r[key] / base[key]:.2f}x)" for n, r in results.items())
        print(f"  {label:<34} {cells}")

    print(f"figures (ratio to N = {base_n} in brackets); load average after {os.getloadavg()[0]:.1f}")
    row("batch, whole process, wall", "batch_wall", "s")
    row("batch, process tree peak memory", "batch_tree_mb", "MB", "{:8.0f}")
    row("batch, parent process CPU", "parent_cpu", "s")
    row("reopen in session, whole process", "open_wall", "s")
    row("reopen in session, peak RSS", "open_rss", "MB", "{:8.0f}")
    row("reopen in session, Session.open", "open_s", "s", "{:8.3f}")
    row("reopen in session, first beats", "first_s", "s", "{:8.3f}")
    row("export --summary-csv, wall", "summary_wall", "s")
    row("export --summary-csv, peak RSS", "summary_rss", "MB", "{:8.0f}")
    row("export --csv, wall", "csv_wall", "s")
    row("export --csv, peak RSS", "csv_rss", "MB", "{:8.0f}")
    row("results file size", "size_mb", "MB", "{:8.2f}")
    for n, r in results.items():
        if n == base_n:
            continue
        marginal = (r["parent_cpu"] - base["parent_cpu"]) / (n - base_n) * 1000.0
        print(f"  batch parent CPU per recording at N={n}: {marginal:.1f} ms marginal "
              f"(({r['parent_cpu']:.2f} s - {base['parent_cpu']:.2f} s) / {n - base_n}), "
              f"{r['parent_cpu'] / n * 1000.0:.1f} ms raw (CPU / N); target < 10 ms")


if __name__ == "__main__":
    main()
