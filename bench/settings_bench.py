"""Benchmark of settings changes in a review session against ``upstroke analyze``, same run.

Generates a 30-min 20 kHz recording (``bench/cells.py``, nodal-like by default), then in one
process per figure (whole-process wall time, CPU time of that child and its workers, peak memory):

* ``upstroke analyze FILE --csv OUT`` (its default workers);
* a session that adds the recording, then applies one change of each kind, timing the change
  alone (made as the app makes it: :meth:`Session.settings_job` then the job, then
  :meth:`Session.apply_settings`, on the same number of workers): a quality rule
  (``quality.reject_low_apa``; the re-flag alone and with the summaries), a trace event setting
  (``quality.ead_min_mV``), a measurement setting (``measurement.mdp_smoothing_ms``) and a
  detection setting (``detection.min_interval_ms``).

Targets: every change within 1.5x of ``upstroke analyze``; a quality-rule change under 0.2 s.
Usage: ``python bench/settings_bench.py [--kind nodal|purkinje|ventricular] [--minutes 30]
[--keep DIR]``.
"""

from __future__ import annotations

import argparse
import os
import shutil
import sys
import tempfile
import textwrap

sys.path.insert(0, os.path.dirname(os.path.abspath(__file__)))

import cells
from analyze_bench import measure

SESSION = textwrap.dedent(
    """
    import resource, sys, time
    def cpu():
        a, b = resource.getrusage(resource.RUSAGE_SELF), resource.getrusage(resource.RUSAGE_CHILDREN)
        return a.ru_utime + a.ru_stime + b.ru_utime + b.ru_stime
    from analysis.chunkpool import default_workers
    from analysis.session import Session
    from analysis.settings import Settings
    s = Session(Settings(), workers=default_workers())
    t, c = time.perf_counter(), cpu(); key = s.add(sys.argv[1]); print(f"@@add={time.perf_counter() - t:.3f} - {cpu() - c:.3f}")
    changes = [("rule", "quality.reject_low_apa", True, False), ("rule+summaries", "quality.reject_low_apa", False, True),
               ("events", "quality.ead_min_mV", 4.0, True), ("measure", "measurement.mdp_smoothing_ms", 3.0, True),
               ("detect", "detection.min_interval_ms", 120.0, True)]
    for label, name, value, summaries in changes:
        new = s.settings(key).replace(name, value)
        t, c = time.perf_counter(), cpu()
        job = s.settings_job(new, [key], summaries=summaries)
        change = job()
        assert s.apply_settings(change)
        print(f"@@{label}={time.perf_counter() - t:.3f} {change.scopes[key]} {cpu() - c:.3f}")
    """
)


def main() -> int:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--kind", default="nodal", choices=cells.KINDS)
    parser.add_argument("--minutes", type=float, default=30.0)
    parser.add_argument("--keep", metavar="DIR", help="keep the generated recording here")
    args = parser.parse_args()
    folder = args.keep or tempfile.mkdtemp(prefix="upstroke-settings-bench-")
    os.makedirs(folder, exist_ok=True)
    try:
        path, n_beats = cells.make(args.kind, args.minutes, folder)
        print(f"{path}: {os.path.getsize(path) / 1e6:.0f} MB, {n_beats} beats built in", flush=True)
        csv_path = os.path.join(folder, "settings_bench_beats.csv")
        a_wall, a_cpu, a_mb, _, _ = measure(["app", "analyze", path, "--csv", csv_path], "upstroke analyze")
        s_wall, s_cpu, s_mb, _, out = measure(["-c", SESSION, path], "session")
        figures = {}
        for line in out.splitlines():
            if line.startswith("@@") and "=" in line and "maxrss" not in line:
                name, rest = line[2:].split("=", 1)
                figures[name] = rest.split()
        print()
        print(f"upstroke analyze                 {a_wall:7.2f} s wall {a_cpu:7.2f} s CPU {a_mb:6.0f} MB")
        print(f"session process (add + changes)  {s_wall:7.2f} s wall {s_cpu:7.2f} s CPU {s_mb:6.0f} MB")
        print(f"session add (first analysis)     {float(figures['add'][0]):7.2f} s wall {float(figures['add'][2]):7.2f} s CPU")
        for name, what in (("rule", "quality rule, re-flag"), ("rule+summaries", "quality rule + summaries"),
                           ("events", "trace event setting"), ("measure", "measurement setting"),
                           ("detect", "detection setting")):
            t, stage, c = float(figures[name][0]), figures[name][1], float(figures[name][2])
            target = " (target < 0.2 s)" if name == "rule" else ""
            print(f"{what:32s} {t:7.3f} s wall = {t / a_wall:5.2f}x analyze; {c:7.3f} s CPU = {c / a_cpu:5.2f}x"
                  f"  [stage {stage}]{target}")
        print("target: every change within 1.5x of upstroke analyze")
    finally:
        if not args.keep:
            shutil.rmtree(folder, ignore_errors=True)
    return 0


if __name__ == "__main__":
    sys.exit(main())
