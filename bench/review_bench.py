"""The review loop on a long recording: the app's CPU per review key, and open-to-idle time.

Writes a 30-minute 20 kHz gap-free ABF 1 file of a synthetic nodal-like cell (the same file as
``bench/gui_bench.py``), then, in the same run:

* ``analyze``  the command line, ``python -m app.cli analyze FILE --out RESULTS.h5``, in a fresh
  process: its wall time is the baseline;
* ``window``   the real main window, offscreen, in a fresh process: ``open_path`` to the moment
  the window is idle (beats drawn, summaries shown, no background job left); then three
  conditions of 10 minutes each are marked, and each review key is pressed 20 times through
  Qt's own key events (the window's shortcuts, the reason picker's digit):
  ``N`` next beat, ``P`` previous beat, ``Shift+N`` next beat waiting for a look, ``A`` accept
  (and move on), ``R`` then ``3`` reject with a reason, ``Ctrl+Z`` undo.

A key's cost is the process's CPU time (every thread: ``time.process_time``) from the key press
to the moment the window has done the key's work (no event and no background job left): the
row, the marks, the beat card and the condition's summary. What a run of keys leaves for the
pause after it (the full summaries with their ensemble beats, off the GUI thread, and one redraw
of the figure shown, both saying they are updating meanwhile) is measured once after each run of
20 keys and printed beside it. It prints, per key, the median and the worst of the 20, and the
open-to-idle time against ``analyze``. Run from the repository: ``python bench/review_bench.py`` (``--minutes 5`` for a
quicker run; ``--profile KEY`` prints cProfile's top functions of that key's handling, in CPU time).
"""

from __future__ import annotations

import argparse
import json
import os
import statistics
import subprocess
import sys
import tempfile
import time
from pathlib import Path

sys.path.insert(0, str(Path(__file__).resolve().parent))

from gui_bench import REPO, write_long_abf

WIDTH, HEIGHT = 1366, 768
PRESSES = 20
#: (name, key sequence) in the order pressed; each is pressed PRESSES times.
KEYS = (
    ("next beat (N)", "N"),
    ("previous beat (P)", "P"),
    ("next to look at (Shift+N)", "Shift+N"),
    ("accept and next (A)", "A"),
    ("reject with a reason (R, 3)", "R 3"),
    ("undo (Ctrl+Z)", "Ctrl+Z"),
)


def _press(window, app, sequence: str) -> None:
    """Send a key sequence as Qt key events to the widget that has focus (or the window)."""
    from PySide6 import QtGui
    from PySide6.QtTest import QTest

    for part in sequence.split():
        combo = QtGui.QKeySequence(part)[0]
        popup = app.activePopupWidget()
        target = popup if popup is not None else (app.focusWidget() or window)
        QTest.keyClick(target, combo.key(), combo.keyboardModifiers())


def _window_run(path: Path, minutes: float, profile: str | None) -> dict:
    os.environ.setdefault("QT_QPA_PLATFORM", "offscreen")
    from analysis.conditions import Condition
    from app.gui.window.launch import application
    from app.gui.window.main_window import MainWindow

    app = application()
    window = MainWindow(interactive=False)
    window.resize(WIDTH, HEIGHT)
    window.show()
    window.activateWindow()
    app.processEvents()
    t0 = time.perf_counter()
    c0 = time.process_time()
    window.open_path(path)
    window.settle(3_600_000)
    open_s, open_cpu_s = time.perf_counter() - t0, time.process_time() - c0
    third = minutes * 60.0 / 3
    for i, name in enumerate(("baseline", "UP-113 1 uM", "washout")):
        window.add_condition(Condition(name, i * third, (i + 1) * third))
    window.settle(3_600_000)
    window.trace_view.setFocus()
    window.select_beat(len(window.beats) // 2)
    window.settle()
    window.figures.flush()
    out: dict = {"open_s": open_s, "open_cpu_s": open_cpu_s, "n_beats": len(window.beats), "keys": {}, "deferred": {}}
    profiler = None
    for label, sequence in KEYS:
        if profile is not None and profile == sequence:
            import cProfile

            profiler = cProfile.Profile(time.process_time)  # CPU, as the keys' cost is measured
        costs = []
        for _ in range(PRESSES):
            c = time.process_time()
            if profiler is not None:
                profiler.enable()
            _press(window, app, sequence)
            window.wait_idle()
            if profiler is not None:
                profiler.disable()
            costs.append(1e3 * (time.process_time() - c))
        # What the run of keys left for the pause after it: the full summaries with their
        # ensemble beats (off the GUI thread) and the figures' one redraw.
        c = time.process_time()
        window.settle()
        window.figures.flush()
        window.settle()
        out["keys"][label] = costs
        out["deferred"][label] = 1e3 * (time.process_time() - c)
        if profiler is not None:
            import io
            import pstats

            text = io.StringIO()
            pstats.Stats(profiler, stream=text).sort_stats("cumulative").print_stats(40)
            print(text.getvalue(), file=sys.stderr)
            profiler = None
    out["current_row"] = window.current_row
    return out


def _run_child(args: list[str]) -> dict:
    out = subprocess.run([sys.executable, __file__, *args], capture_output=True, text=True, cwd=REPO,
                         env={**os.environ, "QT_QPA_PLATFORM": "offscreen", "PYTHONPATH": str(REPO)})
    line = next((ln for ln in out.stdout.splitlines() if ln.startswith("RESULT ")), None)
    if out.stderr.strip():
        print(out.stderr, file=sys.stderr)
    if line is None:
        print(out.stdout, file=sys.stderr)
        raise SystemExit(f"{args[0]} failed")
    return json.loads(line[7:])


def main() -> None:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--minutes", type=float, default=30.0, help="length of the recording (default 30)")
    parser.add_argument("--profile", metavar="KEY", help="profile one key sequence, e.g. 'A' or 'R 3'")
    parser.add_argument("--child", type=Path, help=argparse.SUPPRESS)
    args = parser.parse_args()
    if args.child:
        result = _window_run(args.child, args.minutes, args.profile)
        print("RESULT " + json.dumps(result), flush=True)
        os._exit(0)  # background threads have nothing left to do; leave at once
    import gui_bench

    gui_bench.MINUTES = args.minutes
    with tempfile.TemporaryDirectory() as tmp:
        path = Path(tmp) / "long-gapfree.abf"
        write_long_abf(path)
        t = time.perf_counter()
        done = subprocess.run([sys.executable, "-m", "app.cli", "analyze", str(path), "--out", str(Path(tmp) / "r.h5")],
                              capture_output=True, text=True, cwd=REPO, env={**os.environ, "PYTHONPATH": str(REPO)})
        analyze_s = time.perf_counter() - t
        if done.returncode:
            raise SystemExit(f"analyze failed: {done.stderr}")
        result = _run_child(["--child", str(path), "--minutes", str(args.minutes)] +
                            (["--profile", args.profile] if args.profile else []))
    print(f"{args.minutes:g}-min 20 kHz gap-free recording, {result['n_beats']} beats, window {WIDTH}x{HEIGHT} offscreen, "
          f"{PRESSES} presses per key")
    print(f"{'review key':32s}{'median CPU ms':>15s}{'worst ms':>10s}{'pause after 20 keys, CPU ms':>30s}")
    worst_median = 0.0
    for label, costs in result["keys"].items():
        med = statistics.median(costs)
        worst_median = max(worst_median, med)
        print(f"{label:32s}{med:>15.1f}{max(costs):>10.1f}{result['deferred'][label]:>30.0f}")
    ratio = result["open_s"] / analyze_s
    print(f"open to idle in the window      {result['open_s']:.1f} s (CPU {result['open_cpu_s']:.1f} s)")
    print(f"upstroke analyze (baseline)     {analyze_s:.1f} s")
    print(f"ratio window / analyze          {ratio:.2f}")
    print(f"targets: every key <= 30 ms median ({'met' if worst_median <= 30 else 'missed'}); "
          f"open-to-idle <= 2x analyze ({'met' if ratio <= 2 else 'missed'})")


if __name__ == "__main__":
    main()
