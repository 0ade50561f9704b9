"""Opening a long gap-free ABF: Upstroke's memory-mapped reader against pyabf's full load.

Writes 10- and 30-minute 20 kHz gap-free ABF 1 files with pyabf's own writer into a temporary
folder, then measures, each in a fresh process (median of ``--repeat`` runs):

* ``imports``     the interpreter with numpy, pyabf and analysis imported (the floor);
* ``window``      ``open_recording`` and the first 10 s of the sweep;
* ``sweep``       ``open_recording`` and the whole first sweep (the whole file, for gap-free);
* ``pyabf``       ``pyabf.ABF(path)``, ``setSweep(0)``, ``sweepY`` (the baseline).

For each it prints the in-process time of the work, the whole-process wall time and the
child's peak resident memory (``resource.getrusage(RUSAGE_SELF).ru_maxrss``, and Linux's VmHWM
as a check), then the ratios against pyabf. Pages of the memory-mapped file that a read
touches count as resident, so reading the whole sweep of a gap-free file costs the file's size
plus the float64 result. Run from the repository: ``python bench/open_bench.py``.
"""

from __future__ import annotations

import argparse
import json
import os
import statistics
import struct
import subprocess
import sys
import tempfile
import time
from pathlib import Path

import numpy as np

REPO = Path(__file__).resolve().parents[1]
RATE_HZ = 20_000.0
WINDOW_S = 10.0
MODES = ("imports", "window", "sweep", "pyabf")


def write_gap_free_abf(path: Path, minutes: float, rate_hz: float = RATE_HZ) -> Path:
    """A gap-free ABF 1 file of a beating-cell-like trace, written by pyabf's writer."""
    from pyabf.abfWriter import writeABF1

    n = int(round(minutes * 60 * rate_hz))
    phase = (np.arange(n) * (1.5 / rate_hz)) % 1.0  # 1.5 beats per second
    trace = -62.0 + 8.0 * phase + 95.0 * np.exp(-phase / 0.08) * (phase > 0.001)
    writeABF1(trace[np.newaxis, :], str(path), rate_hz, units="mV")
    del trace, phase
    with open(path, "r+b") as fh:
        fh.seek(8)  # nOperationMode (ABF 1 header, where pyabf's writer puts it): 3 = gap-free
        fh.write(struct.pack("<h", 3))
    return path


def _peak_mb() -> tuple[float, float | None]:
    """This process's peak resident memory: ru_maxrss, and Linux's VmHWM when available."""
    import resource

    maxrss = resource.getrusage(resource.RUSAGE_SELF).ru_maxrss / 1024
    try:
        with open("/proc/self/status") as fh:
            hwm = next(int(line.split()[1]) for line in fh if line.startswith("VmHWM:")) / 1024
    except (OSError, StopIteration):
        hwm = None
    return maxrss, hwm


def child(mode: str, path: str) -> None:
    """Run one measurement in this process and print it as JSON."""

    t0 = time.perf_counter()
    sys.path.insert(0, str(REPO))
    import pyabf  # noqa: F401  (every mode pays the same imports)

    from analysis import open_recording

    t1 = time.perf_counter()
    n = 0
    if mode == "window":
        rec = open_recording(path)
        n = rec.sweep(0, 0, 0, int(WINDOW_S * rec.sampling_rate_hz)).size
    elif mode == "sweep":
        rec = open_recording(path)
        n = rec.sweep(0, 0).size
    elif mode == "pyabf":
        abf = pyabf.ABF(path)
        abf.setSweep(0)
        n = abf.sweepY.size
    t2 = time.perf_counter()
    maxrss, hwm = _peak_mb()
    print(json.dumps({"import_s": t1 - t0, "work_s": t2 - t1, "peak_mb": maxrss, "hwm_mb": hwm, "n": n}))


def measure(mode: str, path: Path, repeat: int) -> dict:
    runs = []
    for _ in range(repeat):
        start = time.perf_counter()
        done = subprocess.run(
            [sys.executable, __file__, "--child", mode, str(path)],
            capture_output=True, text=True, check=True,
        )
        wall = time.perf_counter() - start
        result = json.loads(done.stdout)
        result["wall_s"] = wall
        runs.append(result)
    return {
        "work_s": statistics.median(r["work_s"] for r in runs),
        "wall_s": statistics.median(r["wall_s"] for r in runs),
        "peak_mb": max(r["peak_mb"] for r in runs),
        "hwm_mb": max((r["hwm_mb"] or 0.0) for r in runs),
        "n": runs[0]["n"],
    }


def main(argv: list[str] | None = None) -> int:
    parser = argparse.ArgumentParser(description=__doc__.split("\n\n")[0])
    parser.add_argument("--minutes", type=float, nargs="+", default=[10.0, 30.0])
    parser.add_argument("--repeat", type=int, default=3)
    parser.add_argument("--child", nargs=2, metavar=("MODE", "PATH"), help=argparse.SUPPRESS)
    parser.add_argument("--write", nargs=2, metavar=("MINUTES", "PATH"), help=argparse.SUPPRESS)
    args = parser.parse_args(argv)
    if args.child:
        child(*args.child)
        return 0
    if args.write:
        write_gap_free_abf(Path(args.write[1]), float(args.write[0]))
        return 0
    print(f"python {sys.version.split()[0]}, numpy {np.__version__}, {os.cpu_count()} CPU(s); "
          f"median of {args.repeat} runs per row")
    with tempfile.TemporaryDirectory(prefix="upstroke-bench-") as folder:
        for minutes in args.minutes:
            path = Path(folder) / f"gapfree_{minutes:g}min.abf"
            t0 = time.perf_counter()
            # Written in its own process: Linux carries a parent's peak RSS into the ru_maxrss
            # of the children it starts, so the parent stays small.
            subprocess.run([sys.executable, __file__, "--write", str(minutes), str(path)], check=True)
            size_mb = path.stat().st_size / 2**20
            print(f"\n{minutes:g} min at {RATE_HZ / 1e3:g} kHz gap-free: {size_mb:.1f} MiB "
                  f"(written by pyabf's writer in {time.perf_counter() - t0:.1f} s)")
            print(f"  {'mode':<8} {'samples':>10} {'work s':>8} {'process s':>10} {'maxrss MiB':>11} {'VmHWM MiB':>10}")
            results = {mode: measure(mode, path, args.repeat) for mode in MODES}
            for mode, r in results.items():
                print(f"  {mode:<8} {r['n']:>10} {r['work_s']:>8.3f} {r['wall_s']:>10.3f} "
                      f"{r['peak_mb']:>11.1f} {r['hwm_mb']:>10.1f}")
            base = results["pyabf"]
            for mode in ("window", "sweep"):
                r = results[mode]
                print(f"  pyabf / {mode}: {base['work_s'] / r['work_s']:.1f}x faster in-process, "
                      f"{base['wall_s'] / r['wall_s']:.1f}x whole process, "
                      f"{base['peak_mb'] - results['imports']['peak_mb']:.0f} vs "
                      f"{r['peak_mb'] - results['imports']['peak_mb']:.0f} MiB above the imports")
    return 0


if __name__ == "__main__":
    sys.exit(main())
