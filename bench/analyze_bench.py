"""Benchmark of ``upstroke analyze`` on 30-minute gap-free 20 kHz recordings of three kinds of cell.

Generates (``bench/cells.py``) a nodal-like, a Purkinje-like (the DiFrancesco-Noble 1985 model,
tiled) and a ventricular-like recording (ABF 1, written by pyabf's writer), then for each runs
three things, each in its own process, and prints whole-process wall time, CPU time (user + system of
that child alone: steadier than wall time on a machine shared with other work) and peak memory
(the child's own high-water mark, ``VmHWM``) with ratios measured in the same run:

* ``upstroke analyze FILE --csv OUT``;
* a floor: a process that reads the samples and makes one numpy pass over them;
* a straightforward script: pyabf load, ``scipy.signal.find_peaks``, then per-beat Python loops
  for the same parameters (MDP, TOP, DDR, dV/dt max, peak, APA, APD20/50/90, CL).

Targets: analyze <= 8x the floor, >= 10x faster than the straightforward script, <= 600 MB peak,
and the right beat count, for every kind of cell. Usage: ``python bench/analyze_bench.py
[--minutes 30] [--repeat N] [--cells nodal,purkinje,ventricular] [--keep DIR]``; ``--repeat``
runs each process N times in turn and prints the best and the median of each figure; with
``--keep`` recordings generated earlier in DIR are used again. The project's modules are
byte-compiled first, as an installed copy's are after its first run.
"""

from __future__ import annotations

import argparse
import compileall
import csv
import os
import resource
import shutil
import subprocess
import sys
import tempfile
import textwrap
import time

import numpy as np

sys.path.insert(0, os.path.dirname(os.path.abspath(__file__)))

import cells

_RSS_WRAP = textwrap.dedent(
    """
    import resource, runpy, sys
    sys.argv = sys.argv[1:]
    try:
        if sys.argv[0] == "-c":
            code = sys.argv[1]; sys.argv = ["-c"] + sys.argv[2:]; exec(compile(code, "<bench>", "exec"), {"__name__": "__main__"})
        else:
            runpy.run_module(sys.argv[0], run_name="__main__", alter_sys=True)
    except SystemExit as e:
        code = e.code
    else:
        code = 0
    # VmHWM: this process's own peak resident memory (ru_maxrss would include the parent's
    # memory at fork on Linux).
    hwm = [l for l in open("/proc/self/status") if l.startswith("VmHWM:")]
    kb = int(hwm[0].split()[1]) if hwm else resource.getrusage(resource.RUSAGE_SELF).ru_maxrss
    print(f"@@maxrss_kb={kb}", file=sys.stderr)
    # The largest of the worker processes it forked (upstroke analyze shares a long sweep's
    # chunks with them), counted with the pages it shares with this one.
    print(f"@@children_maxrss_kb={resource.getrusage(resource.RUSAGE_CHILDREN).ru_maxrss}", file=sys.stderr)
    sys.exit(code or 0)
    """
)


def _children_cpu_s() -> float:
    use = resource.getrusage(resource.RUSAGE_CHILDREN)
    return use.ru_utime + use.ru_stime


def measure(args: list[str], label: str, tree: str | None = None) -> tuple[float, float, float, float, str]:
    """Run ``python <args>`` in a fresh process; (wall s, CPU s, peak MB of that process, peak MB
    of the largest worker it forked (0 when none), output). With ``tree``, the process runs the
    project's code from that checkout (working directory and PYTHONPATH).

    The CPU time is the difference of the finished children's user + system time around the
    run, so it is that one child's own, its workers included.
    """
    cpu0 = _children_cpu_s()
    start = time.perf_counter()
    env = None if tree is None else {**os.environ, "PYTHONPATH": tree}
    proc = subprocess.run([sys.executable, "-c", _RSS_WRAP, *args], capture_output=True, text=True, cwd=tree, env=env)
    wall = time.perf_counter() - start
    cpu = _children_cpu_s() - cpu0
    if proc.returncode != 0:
        print(f"{label} failed ({proc.returncode}):\n{proc.stdout}\n{proc.stderr}", file=sys.stderr)
        sys.exit(1)
    rss_kb = [int(line.split("=")[1]) for line in proc.stderr.splitlines() if line.startswith("@@maxrss_kb=")]
    worker_kb = [int(line.split("=")[1]) for line in proc.stderr.splitlines() if line.startswith("@@children_maxrss_kb=")]
    return wall, cpu, rss_kb[-1] / 1024.0, worker_kb[-1] / 1024.0, proc.stdout + proc.stderr


FLOOR = textwrap.dedent(
    """
    import sys, numpy as np, pyabf
    abf = pyabf.ABF(sys.argv[1], loadData=False)
    raw = np.memmap(sys.argv[1], dtype=np.int16, mode="r", offset=abf.dataByteStart,
                    shape=(abf.dataPointCount,))
    scale = float(abf._dataGain[0]) if hasattr(abf, "_dataGain") else 1.0
    total = 0.0
    for a in range(0, raw.size, 1 << 22):
        total += float((raw[a:a + (1 << 22)].astype(np.float64) * scale).sum())
    print("mean", total / raw.size)
    """
)

STRAIGHTFORWARD = textwrap.dedent(
    """
    import sys, numpy as np, pyabf
    from scipy.signal import find_peaks
    abf = pyabf.ABF(sys.argv[1])
    fs = abf.dataRate
    v = np.asarray(abf.sweepY, dtype=float)
    dv = np.gradient(v) * fs / 1000.0
    peaks, _ = find_peaks(v, height=-20, distance=int(0.3 * fs), prominence=30)
    rows = []
    for k in range(1, len(peaks)):
        p0, p1 = peaks[k - 1], peaks[k]
        seg = v[p0:p1]
        i_mdp = p0 + int(np.argmin(seg))
        mdp = v[i_mdp]
        i_up = i_mdp + int(np.argmax(dv[i_mdp:p1]))
        dvdt = dv[i_up]
        i_top = i_up
        while i_top > i_mdp and dv[i_top] >= 0.5:
            i_top -= 1
        top = v[i_top]
        ts = np.arange(i_mdp, i_top + 1) / fs
        ddr = np.polyfit(ts, v[i_mdp:i_top + 1], 1)[0] if i_top - i_mdp > 2 else float("nan")
        peak = v[p1]
        apa = peak - mdp
        apd = {}
        for x in (20, 50, 90):
            level = peak - x / 100 * apa
            j = p1
            while j < len(v) - 1 and v[j] > level:
                j += 1
            apd[x] = (j - i_up) / fs * 1000.0
        rows.append((i_up / fs, mdp, top, ddr, dvdt, peak, apa, apd[20], apd[50], apd[90]))
    cl = np.diff([r[0] for r in rows]) * 1000.0
    print("beats", len(peaks), "mean CL", float(np.mean(cl)))
    """
)


def bench_cell(kind: str, minutes: float, folder: str, repeat: int, baseline: str | None = None) -> dict:
    """The four processes on one kind of cell (six with a baseline checkout, whose analyze runs
    in turn with this one's); prints its table and returns its ratios."""
    abf_path, n_beats = cells.make(kind, minutes, folder)
    csv_path = os.path.join(folder, f"bench_beats_{kind}.csv")
    size_mb = os.path.getsize(abf_path) / 1e6
    print(f"\n== {kind}-like: {abf_path}: {size_mb:.0f} MB, {n_beats} beats built in", flush=True)
    runs: dict[str, list[tuple[float, ...]]] = {"floor": [], "analyze": [], "analyze1": [], "script": []}
    if baseline:
        runs.update({"base": [], "base1": []})
    base_csv = os.path.join(folder, f"bench_beats_{kind}_baseline.csv")
    naive_out = ""
    for _ in range(max(1, repeat)):
        runs["floor"].append(measure(["-c", FLOOR, abf_path], "floor")[:4])
        for name, tree, out in (("analyze", None, csv_path), ("base", baseline, base_csv)):
            if name in runs:
                runs[name].append(measure(["app", "analyze", abf_path, "--csv", out], "upstroke analyze", tree)[:4])
        for name, tree, out in (("analyze1", None, csv_path), ("base1", baseline, base_csv)):
            if name in runs:
                runs[name].append(measure(["app", "analyze", abf_path, "--csv", out, "--workers", "1"],
                                          "upstroke analyze", tree)[:4])
        *figures, naive_out = measure(["-c", STRAIGHTFORWARD, abf_path], "straightforward script")
        runs["script"].append(tuple(figures))
    with open(csv_path, newline="") as fh:
        found = sum(1 for _ in csv.DictReader(fh))

    def best(name: str, k: int) -> float:
        return min(r[k] for r in runs[name])

    def median(name: str, k: int) -> float:
        return float(np.median([r[k] for r in runs[name]]))

    from analysis.chunkpool import default_workers

    cores = default_workers()  # the processes upstroke analyze starts here by default
    print(f"{'':34s}{'wall s':>9s}{'(median)':>10s}{'CPU s':>9s}{'(median)':>10s}{'peak MB':>10s}{'worker MB':>11s}")
    rows = [("floor", "floor (read + one pass)"), ("analyze", f"upstroke analyze ({cores} workers)"),
            ("analyze1", "upstroke analyze --workers 1"), ("script", "straightforward script")]
    if baseline:
        rows[3:3] = [("base", f"baseline analyze ({cores} workers)"), ("base1", "baseline analyze --workers 1")]
    for name, label in rows:
        print(f"{label:34s}{best(name, 0):9.2f}{median(name, 0):10.2f}{best(name, 1):9.2f}"
              f"{median(name, 1):10.2f}{max(r[2] for r in runs[name]):10.0f}{max(r[3] for r in runs[name]):11.0f}")
    print(f"(best and median of {len(runs['analyze'])} run(s) each; CPU includes the workers'; worker MB: "
          "the largest forked worker, pages shared with its parent included)")
    for name, what in (("analyze", "   "), ("analyze1", " 1w")):
        for k, unit in ((0, "wall"), (1, "CPU ")):
            print(f"analyze{what} / floor           = {best(name, k) / best('floor', k):6.2f}x {unit} (target <= 8x)")
    if baseline:
        for name, what in (("base", "   "), ("base1", " 1w")):
            for k, unit in ((0, "wall"), (1, "CPU ")):
                print(f"baseline{what} / floor          = {best(name, k) / best('floor', k):6.2f}x {unit}")
        with open(csv_path, "rb") as a, open(base_csv, "rb") as b:
            print(f"beats CSV against the baseline's = {'the same bytes' if a.read() == b.read() else 'DIFFERENT'}")
    for name, what in (("analyze", "   "), ("analyze1", " 1w")):
        for k, unit in ((0, "wall"), (1, "CPU ")):
            print(f"straightforward / analyze{what} = {best('script', k) / best(name, k):6.2f}x {unit} (target >= 10x)")
    peak = max(r[2] + r[3] * (cores - 1) for r in runs["analyze"])
    print(f"analyze peak memory             = {peak:6.0f} MB, this process plus its workers at most (target <= 600 MB)")
    print(f"beats found / built in          = {found} / {n_beats}   ({'right' if abs(found - n_beats) <= 1 else 'WRONG'})")
    print(f"straightforward script          : {naive_out.strip().splitlines()[0]}")
    out = {"wall": best("analyze", 0) / best("floor", 0), "cpu": best("analyze", 1) / best("floor", 1),
           "wall1": best("analyze1", 0) / best("floor", 0), "cpu1": best("analyze1", 1) / best("floor", 1),
           "script": best("script", 0) / best("analyze", 0)}
    if baseline:
        out.update(base=best("base", 1) / best("floor", 1), base1=best("base1", 1) / best("floor", 1))
    return out


def main() -> int:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--minutes", type=float, default=30.0)
    parser.add_argument("--repeat", type=int, default=1, help="run each process this many times")
    parser.add_argument("--cells", default=",".join(cells.KINDS),
                        help=f"kinds of cell, comma-separated (default: {','.join(cells.KINDS)})")
    parser.add_argument("--keep", metavar="DIR", help="keep the generated recordings and outputs here")
    parser.add_argument("--baseline", metavar="CHECKOUT",
                        help="another checkout of the project (a git worktree of an earlier commit, say) whose "
                             "analyze runs in turn with this one's, as the baseline of the same run")
    args = parser.parse_args()
    folder = args.keep or tempfile.mkdtemp(prefix="upstroke-bench-")
    os.makedirs(folder, exist_ok=True)
    # An installed copy runs from byte-compiled modules (Python writes them on the first run):
    # compile the project once here, so that no measured run pays for compiling it, even where
    # PYTHONDONTWRITEBYTECODE is set.
    root = os.path.dirname(os.path.dirname(os.path.abspath(__file__)))
    for tree in (root, args.baseline) if args.baseline else (root,):
        for package in ("analysis", "app"):
            compileall.compile_dir(os.path.join(tree, package), quiet=1)
    try:
        ratios = {kind: bench_cell(kind, args.minutes, folder, args.repeat, args.baseline)
                  for kind in args.cells.split(",")}
        print("\n== every cell type (best wall and CPU of analyze over the floor; target <= 8x)")
        for kind, r in ratios.items():
            met = "met" if max(r["wall"], r["cpu"]) <= 8.0 else "MISSED"
            print(f"{kind:12s} analyze/floor {r['wall']:6.2f}x wall {r['cpu']:6.2f}x CPU, --workers 1 "
                  f"{r['wall1']:6.2f}x wall {r['cpu1']:6.2f}x CPU; script/analyze {r['script']:6.2f}x wall  ({met})"
                  + (f"; baseline {r['base']:6.2f}x CPU, --workers 1 {r['base1']:6.2f}x CPU" if "base" in r else ""))
        print(f"load average at the end: {' '.join(f'{x:.2f}' for x in os.getloadavg())}")
    finally:
        if not args.keep:
            shutil.rmtree(folder, ignore_errors=True)
    return 0


if __name__ == "__main__":
    sys.exit(main())
